"""The prefix pipeline modes (`levels`, `blocks`): results against Python integers, the
networks against published counts, latency and register counts against independent counts,
and the validation of the mode keys."""

from __future__ import annotations

import itertools
import json
import math
import re
import subprocess

import pytest

from carrypipe import emit, report, sim, vectors
from carrypipe.config import PREFIX_CELLS, ConfigError, from_mapping
from carrypipe.hdl import Unit
from conftest import make, needs_icarus, simulate
from test_registers import flip_flop_bits, yosys

WIDTHS = (1, 2, 5, 64, 100, 256)
OPTION_SETS = [
    {},
    {"carry_in": True},
    {"carry_out": False, "valid": True},
    {"enable": True, "valid": True, "reset": "sync"},
    {"register_inputs": True, "carry_in": True},
    {"carry_in": True, "carry_out": False, "valid": True, "enable": True, "reset": "sync",
     "register_inputs": True},
]


def mode_keys(mode: str, cell: str, width: int, turn: int) -> dict:
    """A config of `mode` whose shape (levels per stage, block width, wire registers) and
    options rotate with `turn`, so the sweep below covers each of them in several places."""
    keys = {"pipeline": mode, "cell": cell, "width": width, "levels_per_stage": 1 + turn % 3,
            **OPTION_SETS[turn % len(OPTION_SETS)]}
    if mode == "blocks":
        keys["block_width"] = max(1, min(width, (3, 8, 16, 5)[turn % 4]))
    probe = make(**{**keys, "wire_registers": 0})
    keys["wire_registers"] = min(turn % 2, probe.schedule.network.depth)
    return keys


SWEEP = [(mode, cell, width) for mode in ("levels", "blocks") for cell in PREFIX_CELLS
         for width in WIDTHS]


@pytest.mark.parametrize("mode, cell, width", SWEEP, ids=lambda v: str(v))
def test_matches_python_integers(mode, cell, width):
    """Every mode x prefix style x width, with rotating options, against Python integers."""
    turn = SWEEP.index((mode, cell, width))
    simulate(make(**mode_keys(mode, cell, width, turn)), count=80, seed=turn)


@pytest.mark.parametrize("opts", OPTION_SETS, ids=lambda o: "-".join(o) or "plain")
@pytest.mark.parametrize("mode", ["levels", "blocks"])
def test_every_option_in_every_mode(mode, opts):
    extra = {"block_width": 4} if mode == "blocks" else {}
    for cell in PREFIX_CELLS:
        simulate(make(pipeline=mode, cell=cell, width=23, wire_registers=1, **extra, **opts),
                 count=60)


@needs_icarus
@pytest.mark.parametrize("keys", [
    {"pipeline": "levels", "cell": "han-carlson", "width": 64, "carry_in": True,
     "valid": True, "enable": True, "reset": "sync"},
    {"pipeline": "levels", "cell": "kogge-stone", "width": 37, "levels_per_stage": 2,
     "wire_registers": 2, "register_inputs": True},
    {"pipeline": "blocks", "cell": "sklansky", "width": 100, "block_width": 16,
     "carry_in": True, "carry_out": False, "valid": True},
    {"pipeline": "blocks", "cell": "brent-kung", "width": 256, "block_width": 8,
     "wire_registers": 1, "enable": True},
    {"pipeline": "levels", "cell": "kogge-stone", "width": 256, "local_width": 16,
     "wire_registers": 2, "register_inputs": True, "valid": True},
], ids=["levels-hc64", "levels-ks37-wired", "blocks-sk100", "blocks-bk256", "levels-ks256-local"])
def test_emitted_verilog_in_icarus(keys):
    simulate(make(**keys), simulator="icarus", count=150)


@pytest.mark.slow
def test_small_units_every_shape():
    """Every prefix style, width 1..16, levels per stage 1..3, wire registers 0..2, both
    modes, local blocks of 3 bits, block widths 1..3: all against Python integers."""
    for cell, width, lps, wires in itertools.product(PREFIX_CELLS, range(1, 17), (1, 2, 3),
                                                      (0, 1, 2)):
        for extra in ({"pipeline": "levels"},
                      {"pipeline": "levels", "local_width": min(3, width)},
                      *({"pipeline": "blocks", "block_width": min(k, width)} for k in (1, 2, 3))):
            keys = {"cell": cell, "width": width, "levels_per_stage": lps, **extra,
                    "carry_in": width % 2 == 1}
            depth = make(**keys).schedule.network.depth
            if wires <= depth:
                simulate(make(**keys, wire_registers=wires), count=60)


# Published depth and node counts for N = 2^m inputs (Harris 2003, "A Taxonomy of Parallel
# Prefix Networks", Table 1; from memory).
PUBLISHED = {
    "kogge-stone": (lambda n, m: m, lambda n, m: n * m - n + 1),
    "sklansky": (lambda n, m: m, lambda n, m: n // 2 * m),
    "brent-kung": (lambda n, m: 2 * m - 1, lambda n, m: 2 * n - 2 - m),
    "han-carlson": (lambda n, m: m + 1, lambda n, m: n // 2 * m),
}


@pytest.mark.parametrize("cell", sorted(PUBLISHED))
@pytest.mark.parametrize("n", [8, 16, 64, 256])
def test_levels_mode_uses_the_published_networks(cell, n):
    """The stages of a levels unit evaluate exactly the published network, level by level."""
    m = int(math.log2(n))
    depth, nodes = (f(n, m) for f in PUBLISHED[cell])
    p = make(pipeline="levels", cell=cell, width=n)
    assert p.schedule.network.depth == depth
    assert p.schedule.network.nodes == nodes
    assert sum(s.depth for s in p.stages) == depth
    assert sum(s.nodes for s in p.stages) == nodes
    assert [k for s in p.stages for k in s.levels] == list(range(1, depth + 1))


def expected_latency(cell: str, n: int, lps: int, wires: int, inputs: bool) -> int:
    """Latency from the published depth (Harris 2003, as above): stage 1 forms g/p with the
    first levels, `lps` levels per stage, one logic-free stage per wired level, a sum stage
    that also evaluates the last level (valid for lps = 1 or wires = 0: a wire stage restarts
    the count of levels per stage)."""
    m = int(math.log2(n))
    depth = PUBLISHED[cell][0](n, m)
    return math.ceil((depth - 1) / lps) + 1 + wires + int(inputs)


@pytest.mark.parametrize("cell", sorted(PUBLISHED))
@pytest.mark.parametrize("n, lps, wires, inputs", [(16, 1, 0, False), (64, 2, 0, True),
                                                   (32, 1, 1, False), (64, 3, 0, False)])
def test_latency_formula_against_simulation(cell, n, lps, wires, inputs):
    p = make(pipeline="levels", cell=cell, width=n, levels_per_stage=lps, wire_registers=wires,
             register_inputs=inputs, valid=True)
    assert p.latency == expected_latency(cell, n, lps, wires, inputs)
    simulate(p, count=60)  # the simulation compares results exactly `latency` edges later


def test_simulation_sees_a_wrong_latency():
    """A unit checked against a latency one too long must fail: the check is exact."""
    p = make(pipeline="levels", cell="sklansky", width=16)
    longer = make(pipeline="levels", cell="sklansky", width=16, register_inputs=True)
    result = sim.run_amaranth(longer, vectors.suite(longer, 40, 1), unit=Unit(p))
    assert not result.passed


def test_blocks_latency():
    # Chains, then ceil(depth / lps) prefix stages over the blocks, then the select.
    p = make(pipeline="blocks", cell="kogge-stone", width=256, block_width=16)
    assert p.latency == 1 + 4 + 1  # 16 blocks: Kogge-Stone depth log2(16) = 4
    p = make(pipeline="blocks", cell="kogge-stone", width=256, block_width=16,
             levels_per_stage=2)
    assert p.latency == 1 + 2 + 1
    assert make(pipeline="blocks", cell="sklansky", width=40, block_width=40).latency == 1


@pytest.mark.parametrize("blocks", [2, 3, 5, 9, 16, 17, 33])
@pytest.mark.parametrize("cout", [True, False])
def test_blocks_latency_counts_only_the_levels_used(blocks, cout):
    # Kogge-Stone over n positions: position i's group is complete after ceil(log2(i + 1))
    # levels (Harris 2003).  The top block's select needs its carry-in (position n - 2), the
    # carry-out needs position n - 1; the results leave after the later of the two, so a last
    # level that only a pruned carry-out would read costs no cycle.
    p = make(pipeline="blocks", cell="kogge-stone", width=4 * blocks, block_width=4,
             carry_out=cout)
    select = 1 + math.ceil(math.log2(blocks - 1)) + 1
    carry = 1 + math.ceil(math.log2(blocks))
    assert p.latency == (max(select, carry) if cout else select)
    simulate(p, count=40)


def _complete_after(cell: str, n: int) -> list[int]:
    """The prefix level after which each position's group reaches position 0, walking the
    network's levels (position 0 is complete at the start)."""
    from carrypipe import prefix

    low, done = list(range(n)), [0] + [None] * (n - 1)
    for k, level in enumerate(prefix.network(cell, n).levels, 1):
        reads = dict(level)  # node (i, j): position i takes in the group of position j
        low = [low[reads[i]] if i in reads else low[i] for i in range(n)]
        done = [k if d is None and low[i] == 0 else d for i, d in enumerate(done)]
    return done


@pytest.mark.parametrize("cell", PREFIX_CELLS)
def test_blocks_latency_waits_for_every_carry_in(cell):
    # docs/modes.md: L = 1 + max(ceil(d_c / n) + 1, ceil(d_B / n) with carry_out), d_c the
    # level after which every block's carry-in (position q - 1, q = 1 ... B - 1) is complete.
    for blocks, n, cout in itertools.product(range(2, 24), (1, 2, 3), (True, False)):
        done = _complete_after(cell, blocks)
        d_c, d_b = max(done[:-1]), max(done)
        p = make(pipeline="blocks", cell=cell, width=3 * blocks, block_width=3,
                 levels_per_stage=n, carry_out=cout)
        assert p.latency == 1 + max(math.ceil(d_c / n) + 1, math.ceil(d_b / n) if cout else 0)


@pytest.mark.parametrize("cell", PREFIX_CELLS)
def test_carry_increment_keeps_the_latency_or_saves_a_cycle(cell):
    # docs/modes.md: the network is unchanged; the sums may leave a cycle sooner.
    seen = set()
    for width, local, n in itertools.product(range(4, 40, 3), (2, 3, 4, 8), (1, 2)):
        if local >= width:
            continue
        keys = dict(pipeline="levels", cell=cell, width=width, local_width=local,
                    levels_per_stage=n)
        plain, inc = make(**keys), make(**keys, carry_increment=True)
        assert inc.schedule.network.depth == plain.schedule.network.depth
        seen.add(plain.latency - inc.latency)
    assert seen == {0, 1}
    if cell == "kogge-stone":
        assert make(pipeline="levels", cell=cell, width=8, local_width=4).latency == 4
        shorter = make(pipeline="levels", cell=cell, width=8, local_width=4,
                       carry_increment=True, valid=True)
        assert shorter.latency == 3
        simulate(shorter, count=60)  # against Python integers, at the shorter latency


def test_register_count_by_hand():
    """A 4-bit Kogge-Stone levels unit, counted by hand from the network (nodes (1,0), (2,1),
    (3,2), then (2,0), (3,1)); the second level rides in the sum stage, so there are two
    stages.  Rank 1 holds p0..p3, g0, G1, G2, P2, G3, P3 (10 bits: the propagate of the
    complete group 1..0 is not kept); the output rank holds sum and cout (5 bits)."""
    p = make(pipeline="levels", cell="kogge-stone", width=4)
    assert p.latency == 2
    r = p.registers
    assert (r.prefix + r.result, r.stage, r.total) == (10, 5, 15)


PRUNED = [
    {"pipeline": "levels", "cell": "kogge-stone", "width": 64, "carry_in": True, "valid": True},
    {"pipeline": "levels", "cell": "han-carlson", "width": 100, "levels_per_stage": 2,
     "register_inputs": True, "enable": True},
    {"pipeline": "levels", "cell": "brent-kung", "width": 33, "carry_out": False,
     "reset": "sync", "valid": True},
    {"pipeline": "levels", "cell": "ladner-fischer", "width": 48, "levels_per_stage": 3},
    {"pipeline": "blocks", "cell": "sklansky", "width": 256, "block_width": 16,
     "carry_in": True},
    {"pipeline": "blocks", "cell": "han-carlson", "width": 70, "block_width": 6,
     "levels_per_stage": 2, "valid": True},
    {"pipeline": "levels", "cell": "kogge-stone", "width": 32, "wire_registers": 2},
    {"pipeline": "levels", "cell": "sklansky", "width": 40, "local_width": 8, "carry_in": True,
     "valid": True, "wire_registers": 1},
    {"pipeline": "levels", "cell": "kogge-stone", "width": 64, "local_width": 16,
     "carry_increment": True, "wire_registers": 1},
]


@pytest.mark.skipif(yosys is None, reason="no Yosys (pip install 'carrypipe[fit]')")
@pytest.mark.parametrize("keys", PRUNED, ids=lambda k: f"{k['pipeline']}-{k['cell']}-{k['width']}")
def test_yosys_counts_the_planned_bits(keys, tmp_path):
    p = make(**keys)
    assert flip_flop_bits(emit.unit_verilog(p), tmp_path) == p.registers.total


@pytest.mark.parametrize("keys", PRUNED, ids=lambda k: f"{k['pipeline']}-{k['cell']}-{k['width']}")
def test_words_add_up_and_fit_the_unit(keys):
    p = make(**keys)
    by_kind = {}
    for w in p.words:
        by_kind[w.kind] = by_kind.get(w.kind, 0) + w.width
        assert 1 <= w.edge <= p.latency and 0 <= w.lsb and w.lsb + w.width <= p.width + 1
    r = p.registers.as_dict()
    assert sum(by_kind.values()) == r["total"]
    assert {k: v for k, v in r.items() if v and k != "total"} == by_kind
    assert r["skew"] == r["deskew"] == 0
    assert len({w.name for w in p.words}) == len(p.words)


def test_pruning_saves_registers():
    """Dropping terms past their last use beats carrying every bit's (G, P) and p through
    every rank: that naive count is 3 bits per bit per inner rank."""
    p = make(pipeline="levels", cell="kogge-stone", width=64)
    inner = p.latency - 1
    assert p.registers.prefix + p.registers.result < 3 * 64 * inner


def test_last_level_rides_in_the_sum_stage():
    """s_i = p_i ^ (G_h | P_h & G_l) is one 4-input function of the last level's node h =
    i - 1, for every network (the fill-in level of the sparse ones, the longest-span level
    of Kogge-Stone and Sklansky), wired in front or not."""
    hc = make(pipeline="levels", cell="han-carlson", width=64)
    assert hc.schedule.merged and hc.stages[-1].logic == "prefix level 7, sum"
    ks = make(pipeline="levels", cell="kogge-stone", width=64)
    assert ks.schedule.merged and ks.stages[-1].logic == "prefix level 6, sum"
    wired = make(pipeline="levels", cell="kogge-stone", width=64, wire_registers=1)
    assert [s.logic for s in wired.stages[-2:]] == ["wire registers (no logic)",
                                                    "prefix level 6, sum"]
    assert wired.latency == ks.latency + 1


LOCAL = [("kogge-stone", 64, 16), ("sklansky", 100, 16), ("han-carlson", 37, 8),
         ("brent-kung", 256, 32), ("ladner-fischer", 23, 3), ("kogge-stone", 5, 2),
         ("sklansky", 9, 9)]


@pytest.mark.parametrize("cell, width, local", LOCAL, ids=lambda v: str(v))
def test_local_networks_match_python_integers(cell, width, local):
    turn = LOCAL.index((cell, width, local))
    keys = mode_keys("levels", cell, width, turn)
    simulate(make(**keys, local_width=local), count=80, seed=turn)


@pytest.mark.parametrize("cell", sorted(PUBLISHED))
@pytest.mark.parametrize("n, local", [(64, 16), (256, 16), (256, 8), (128, 32)])
def test_local_network_depth(cell, n, local):
    """The network within a block of `local` bits, then over the n / local block tops, then
    one fill-in level: depth d(local) + d(n / local) + 1 from the published depths (as
    above), and the last level rides in the sum stage."""
    d = PUBLISHED[cell][0]
    depth = d(local, int(math.log2(local))) + d(n // local, int(math.log2(n // local))) + 1
    p = make(pipeline="levels", cell=cell, width=n, local_width=local)
    assert p.schedule.network.depth == depth
    assert p.latency == depth  # (depth - 1) prefix stages, the first with g/p, then the sum
    within = {(i // local, j // local) for level in p.schedule.network.levels[:-1]
              for i, j in level if i % local != local - 1}
    assert all(a == b for a, b in within)  # only block tops reach across blocks, but the fill-in


@pytest.mark.parametrize("cell", PREFIX_CELLS)
def test_local_depth_rule_of_the_docs(cell):
    # docs/modes.md: d(k) + d(ceil(W / k)) + 1, without the fill-in when W = k + 1.
    from carrypipe import prefix

    def d(n):
        return prefix.network(cell, n).depth if n > 1 else 0
    for width, local in itertools.product(range(3, 41), range(2, 40)):
        if local < width:
            p = make(pipeline="levels", cell=cell, width=width, local_width=local)
            fill = 0 if width == local + 1 else 1
            assert p.schedule.network.depth == d(local) + d(-(-width // local)) + fill


# carry_increment: the units against Python integers (the adder kinds, carry-in, signed
# overflow, enable and reset, several stages' levels, wired levels up to the fill-in).
INCREMENT = [
    dict(cell="kogge-stone", width=64, local_width=16, wire_registers=1),
    dict(cell="kogge-stone", width=256, local_width=16, wire_registers=2, valid=True),
    dict(cell="sklansky", width=100, local_width=12, carry_in=True, levels_per_stage=2),
    dict(cell="han-carlson", width=37, local_width=8, unit="subtractor", wire_registers=3),
    dict(cell="brent-kung", width=45, local_width=7, unit="addsub", signed=True),
    dict(cell="ladner-fischer", width=23, local_width=3, signed=True, carry_in=True,
         levels_per_stage=3, enable=True, valid=True, reset="sync"),
    dict(cell="kogge-stone", width=17, local_width=16, register_inputs=True),
    dict(cell="kogge-stone", width=3, local_width=2, unit="addsub", carry_out=False),
    # a carry-save unit's final adder (whose second operand is shorter)
    dict(cell="kogge-stone", width=40, local_width=8, unit="sum", operands=5, wire_registers=1),
    dict(cell="sklansky", width=24, local_width=5, unit="multiplier", width_b=9, signed=True),
]


@pytest.mark.parametrize("keys", INCREMENT, ids=lambda k: f"{k['cell']}-{k['width']}-{k['local_width']}")
def test_carry_increment_matches_python_integers(keys):
    turn = INCREMENT.index(keys)
    simulate(make(pipeline="levels", carry_increment=True, **keys), count=120, seed=turn)


@needs_icarus
def test_carry_increment_in_icarus():
    simulate(make(pipeline="levels", cell="kogge-stone", width=96, local_width=16,
                  carry_increment=True, wire_registers=2, carry_in=True), simulator="icarus",
             count=150)


def test_carry_increment_waits_with_two_terms():
    """Bit i of a block q >= 1 (not its lowest) waits for the block carry with its sum for
    carry-in 0 and one propagate instead of p_i, G and P, and s0 ^ P & C is formed in the
    stage after the block carry is final.  Counted by hand for 32 bits, Kogge-Stone, blocks
    of 8 (levels 1-3 within the blocks, 4-5 over the block tops, 6 the fill-in; latency 6):
    the waiting bits 9-15, 17-23 and 25-31 are complete within their blocks in stage 3.
    Plain, they hold p, G and P in ranks 3-5 (21 x 3 x 3 = 189 bits), and block 0's carry
    waits in ranks 4-5 for the merged fill-in (2 bits).  With the increment, block q's carry
    is final in stage q + 2 (block 0's top in stage 3, then prefix levels 4 and 5), so its
    bits flip in stage q + 3 and hold s0 and P for q ranks, then their sum bit: 7 x (2 + 2)
    + 7 x (4 + 1) + 7 x 6 = 105 bits.  Nothing else differs: 189 + 2 - 105 = 86."""
    keys = dict(pipeline="levels", cell="kogge-stone", width=32, local_width=8)
    plain, inc = make(**keys), make(**keys, carry_increment=True)
    assert inc.latency == plain.latency == 6
    flips = {t.pos: t.stage for t in inc.schedule.terms if t.op == "sum_flip"}
    assert flips == {q * 8 + r: q + 3 for q in (1, 2, 3) for r in range(1, 8)}
    assert plain.registers.total - inc.registers.total == 189 + 2 - 105
    text = emit.unit_verilog(inc)
    assert re.search(r"sum_stage\[31:26\] <= csum_\w+\[31:26\] \^ \(grp_prop_\w+ & "
                     r"\{6\{grp_gen_\w+\}\}\);", text), text


def test_local_width_zero_one_or_full_is_the_plain_network():
    # Blocks of one bit have every bit as a top: the network over the tops is the plain one.
    plain = make(pipeline="levels", cell="sklansky", width=40)
    for local in (0, 1, 40):
        p = make(pipeline="levels", cell="sklansky", width=40, local_width=local)
        assert p.schedule.network == plain.schedule.network
        assert p.registers == plain.registers
        assert "local" not in p.label() and "local blocks" not in report.report(p)


ECP5_WIRED = [{"cell": "kogge-stone", "width": 32, "wire_registers": 2},
              {"cell": "sklansky", "width": 32, "wire_registers": 2, "enable": True},
              {"cell": "han-carlson", "width": 24, "wire_registers": 1, "local_width": 8}]


@pytest.mark.skipif(yosys is None, reason="no Yosys (pip install 'carrypipe[fit]')")
@pytest.mark.parametrize("keys", ECP5_WIRED, ids=lambda k: f"{k['cell']}-{k['width']}")
def test_wire_copies_survive_synthesis(keys, tmp_path):
    """A full FPGA synthesis (`synth_ecp5`, which merges equal flip-flops) keeps every planned
    register, the far-operand copies included, with every initial value stripped first (as
    ASIC flows do): the copies and their twins carry `keep`, not different power-up values."""
    p = make(pipeline="levels", **keys)
    assert p.registers.wire
    text = emit.unit_verilog(p)
    assert "(* keep *)" in text and " = 1'b" not in text.split("module")[1].split(";")[0]
    (tmp_path / "u.v").write_text(text)
    subprocess.run([yosys, "-q", "-p", "read_verilog u.v; attrmap -remove init; "
                    "synth_ecp5 -top dut; tee -q -o stat.txt stat"], cwd=tmp_path, check=True,
                   capture_output=True)
    found = re.search(r"^\s+(\d+)\s+TRELLIS_FF$", (tmp_path / "stat.txt").read_text(), re.M)
    assert int(found.group(1)) == p.registers.total


def test_build_describes_the_mode(tmp_path):
    p = make(pipeline="levels", cell="han-carlson", width=32, valid=True)
    files = emit.render(p, vectors=20)
    manifest = json.loads(files["dut.json"])
    assert manifest["pipeline"] == "levels" and manifest["latency"] == p.latency
    assert manifest["registers"] == p.registers.as_dict()
    assert [s["logic"] for s in manifest["stages"]] == [s.logic for s in p.stages]
    assert "pipeline levels" in files["dut.v"].splitlines()[1]
    assert "Prefix network  han-carlson over 32 bits" in files["dut.txt"]
    assert emit.render(p, vectors=20) == files  # deterministic


def test_report_offers_the_input_rank_as_a_wire_rank():
    # 64-bit Kogge-Stone in 16-bit local blocks: depth 4 + 2 + 1 = 7, so L = 7 + 1 either
    # with the input register or with one wired level (the latency formula above).
    kept = dict(pipeline="levels", cell="kogge-stone", width=64, local_width=16)
    registered = make(**kept, register_inputs=True)
    moved = make(**kept, wire_registers=1)
    assert registered.latency == moved.latency == 8
    text = report.report(registered)
    assert "`register_inputs: false` with\n    `wire_registers: 1` (latency 8, as now)" in text
    # Not offered without an input register, nor in blocks mode (not measured there).
    blocks = make(pipeline="blocks", cell="kogge-stone", width=64, register_inputs=True)
    for other in (moved, blocks):
        assert "`register_inputs: false` with" not in report.report(other)


def base(**extra):
    return {"name": "u", "width": 32, **extra}


@pytest.mark.parametrize("keys, message", [
    ({"pipeline": "stages"},
     r"config: key 'pipeline': value 'stages' is not allowed; expected one of slices, levels, blocks\Z"),
    ({"pipeline": "levels"},
     r"config: key 'cell': value 'native' \(the default\) is not allowed with key 'pipeline' 'levels'; expected one of kogge-stone, brent-kung, sklansky, han-carlson, ladner-fischer\Z"),
    ({"pipeline": "blocks", "cell": "ripple"},
     r"config: key 'cell': value 'ripple' is not allowed with key 'pipeline' 'blocks'; expected one of kogge-stone"),
    ({"pipeline": "levels", "cell": "sklansky", "slice_width": 8},
     r"config: keys 'slice_width' and 'pipeline' \('levels'\) are both given; expected 'slice_width' only with pipeline 'slices'\Z"),
    ({"pipeline": "blocks", "cell": "sklansky", "slices": [16, 16]},
     r"config: keys 'slices' and 'pipeline' \('blocks'\) are both given"),
    ({"levels_per_stage": 2},
     r"config: key 'levels_per_stage' is given with pipeline 'slices'; expected it only with pipeline 'levels' or 'blocks'\Z"),
    ({"pipeline": "levels", "cell": "sklansky", "block_width": 8},
     r"config: key 'block_width' is given with pipeline 'levels'; expected it only with pipeline 'blocks'\Z"),
    ({"wire_registers": 1},
     r"config: key 'wire_registers' is given with pipeline 'slices'"),
    ({"pipeline": "levels", "cell": "sklansky", "levels_per_stage": 0},
     r"config: key 'levels_per_stage': value 0 is not allowed; expected an integer from 1 to 64\Z"),
    ({"pipeline": "levels", "cell": "sklansky", "levels_per_stage": True},
     r"config: key 'levels_per_stage': value true is not allowed"),
    ({"pipeline": "blocks", "cell": "sklansky", "block_width": 33},
     r"config: key 'block_width': value 33 is not allowed; expected an integer from 1 to width \(32\)\Z"),
    ({"pipeline": "blocks", "cell": "sklansky", "block_width": "16"},
     r"config: key 'block_width': value '16' is not allowed"),
    ({"pipeline": "levels", "cell": "kogge-stone", "wire_registers": 6},
     r"config: key 'wire_registers': value 6 is not allowed; expected an integer from 0 to the depth of the kogge-stone network \(5\)\Z"),
    ({"pipeline": "blocks", "cell": "kogge-stone", "block_width": 8, "wire_registers": 3},
     r"config: key 'wire_registers': value 3 is not allowed; expected an integer from 0 to the depth of the kogge-stone network \(2\)\Z"),
    ({"pipeline": "levels", "cell": "kogge-stone", "wire_registers": -1},
     r"config: key 'wire_registers': value -1 is not allowed"),
    ({"pipeline": "levels", "cell": "kogge-stone", "local_width": 33},
     r"config: key 'local_width': value 33 is not allowed; expected an integer from 0 to width \(32\); 0: one network\Z"),
    ({"pipeline": "levels", "cell": "kogge-stone", "local_width": 1.5},
     r"config: key 'local_width': value 1.5 is not allowed"),
    ({"pipeline": "blocks", "cell": "kogge-stone", "local_width": 8},
     r"config: key 'local_width' is given with pipeline 'blocks'; expected it only with pipeline 'levels'\Z"),
    ({"pipeline": "levels", "cell": "kogge-stone", "local_width": 8, "wire_registers": 7},
     r"config: key 'wire_registers': value 7 is not allowed; expected an integer from 0 to the depth of the kogge-stone network \(6\)\Z"),
    ({"pipeline": "levels", "cell": "kogge-stone", "carry_increment": True},
     r"config: key 'carry_increment': value true is not allowed with local_width 0; expected local_width from 2 to 31 \(width - 1\) beside it, or carry_increment: false\Z"),
    ({"pipeline": "levels", "cell": "kogge-stone", "local_width": 32, "carry_increment": True},
     r"config: key 'carry_increment': value true is not allowed with local_width 32;"),
    ({"pipeline": "levels", "cell": "kogge-stone", "local_width": 1, "carry_increment": True},
     r"config: key 'carry_increment': value true is not allowed with local_width 1;"),
    ({"pipeline": "levels", "cell": "kogge-stone", "width": 2, "local_width": 1,
      "carry_increment": True},
     r"config: key 'carry_increment': value true is not allowed with width 2; expected false"),
    ({"pipeline": "levels", "cell": "kogge-stone", "local_width": 8, "carry_increment": "yes"},
     r"config: key 'carry_increment': value 'yes' is not allowed; expected true or false\Z"),
    ({"pipeline": "blocks", "cell": "kogge-stone", "carry_increment": True},
     r"config: key 'carry_increment' is given with pipeline 'blocks'; expected it only with pipeline 'levels'\Z"),
    ({"pipeline": "levels", "unit": "comparator", "carry_increment": False},
     r"config: key 'carry_increment' is given with unit 'comparator'; expected it only with unit 'adder' or 'subtractor' or 'addsub' or 'sum' or 'multiplier'\Z"),
], ids=lambda v: "-".join(f"{k}={v[k]}" for k in v)[:40] if isinstance(v, dict) else None)
def test_bad_mode_keys(keys, message):
    with pytest.raises(ConfigError, match="^" + message):
        from_mapping(base(**keys))


def test_mode_keys_in_the_normalized_config():
    levels = from_mapping(base(pipeline="levels", cell="sklansky")).normalized()
    assert (levels["pipeline"], levels["levels_per_stage"], levels["wire_registers"]) == \
        ("levels", 1, 0)
    assert "block_width" not in levels
    blocks = from_mapping(base(pipeline="blocks", cell="sklansky")).normalized()
    assert blocks["block_width"] == 16
    slices = from_mapping(base(pipeline="slices")).normalized()
    assert not {"pipeline", "levels_per_stage", "block_width", "wire_registers",
                "local_width"} & set(slices)
    assert levels["local_width"] == 0 and "local_width" not in blocks


@pytest.mark.skipif(yosys is None, reason="no Yosys (pip install 'carrypipe[fit]')")
@pytest.mark.parametrize("keys", [
    {"pipeline": "levels", "cell": "han-carlson", "width": 8, "carry_in": True, "valid": True,
     "reset": "sync"},
    {"pipeline": "levels", "cell": "kogge-stone", "width": 5, "levels_per_stage": 2,
     "wire_registers": 1, "enable": True},
    {"pipeline": "blocks", "cell": "sklansky", "width": 12, "block_width": 4, "carry_in": True,
     "register_inputs": True},
    {"pipeline": "levels", "cell": "kogge-stone", "width": 10, "local_width": 4,
     "wire_registers": 1, "carry_in": True, "valid": True},
], ids=["levels-hc8", "levels-ks5-wired", "blocks-sk12", "levels-ks10-local4-wired"])
def test_prove_small_units(keys):
    """The formal check (Yosys sat against a + b + cin) holds for small prefix-mode units."""
    from carrypipe import prove

    assert prove.prove(make(**keys), timeout=120).proved
