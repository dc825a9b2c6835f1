"""The text report: tips only about what a config does not do yet, every tied slowest stage
named, register kinds the unit has, the words of each mode and unit kind."""

from __future__ import annotations

import itertools
import re

from pathlib import Path

import pytest

from carrypipe import chart, config, positions, report
from carrypipe.plan import PrefixPlan, make_plan
from conftest import make

ROOT = Path(__file__).resolve().parent.parent


def load_plan(path):
    return make_plan(config.load(path))


# A spread of configs over every unit kind and pipeline mode, options on and off.
BASES = [
    dict(width=24, slice_width=8), dict(width=24, slices=[10, 4, 10], cell="ripple"),
    dict(width=64, slice_width=16, cell="kogge-stone"), dict(width=12, slice_width=1),
    dict(width=16, cell="brent-kung"), dict(width=32, unit="subtractor", slice_width=8),
    dict(width=32, unit="addsub", slices=[8, 16, 8], cell="sklansky"),
    dict(width=40, unit="comparator", slice_width=8),
    dict(width=48, unit="accumulator", slice_width=12),
    dict(width=64, pipeline="levels", cell="kogge-stone"),
    dict(width=64, pipeline="levels", cell="han-carlson", levels_per_stage=2, local_width=16),
    dict(width=64, pipeline="blocks", cell="brent-kung", block_width=8),
    dict(width=130, unit="subtractor", pipeline="blocks", cell="sklansky", block_width=16),
    dict(width=64, unit="comparator", pipeline="levels", levels_per_stage=2),
    dict(width=32, unit="addsub", pipeline="levels", cell="ladner-fischer"),
    dict(width=256, pipeline="levels", cell="kogge-stone", local_width=16, carry_increment=True),
]
OPTIONS = [dict(), dict(register_inputs=True), dict(carry_in=True, valid=True, enable=True),
           dict(signed=True, reset="sync", register_inputs=True), dict(wire_registers=2),
           dict(cell="native")]


def configs():
    for base, extra in itertools.product(BASES, OPTIONS):
        keys = {**base, **extra}
        try:
            yield make(**keys)
        except config.ConfigError:
            continue  # a key the unit kind or mode does not take


PLANS = list(configs())


def tips(plan) -> str:
    text = report.report(plan)
    return text.split("If timing fails\n", 1)[1] if "If timing fails" in text else ""


def expand(listed: str) -> list[int]:
    out = []
    for part in listed.split(", "):
        lo, _, hi = part.partition("–")
        out += range(int(lo), int(hi or lo) + 1)
    return out


@pytest.mark.parametrize("plan", PLANS, ids=[p.label() + f" #{i}" for i, p in enumerate(PLANS)])
def test_no_tip_offers_what_the_config_already_does(plan):
    c, said = plan.config, tips(plan)
    # A `levels` unit that can still take a wire rank is offered that instead of an input
    # register: the same cycle, measured faster on ECP5 (docs/modes.md; a docs trial found
    # the report suggesting both).
    rank = isinstance(plan, PrefixPlan) and isinstance(plan.schedule.positions, positions.Bits) \
        and c.wire_registers < plan.schedule.network.depth
    assert ("`register_inputs: true`" in said) == (not c.register_inputs and not rank)
    if rank:
        assert f"`wire_registers: {c.wire_registers + 1}`" in said
    if c.cell == "native":
        assert "`cell: native`" not in said
    assert f"`cell: {c.cell}`" not in said
    if plan.mode != "slices":
        assert "`pipeline:" not in said
        if not isinstance(plan.schedule.positions, positions.Slices):
            assert "(`slice_width` or `slices`)" not in said
        wired = f"`wire_registers: {c.wire_registers}` puts"
        assert wired not in said  # the tip offers one rank more than the config has
        if c.levels_per_stage == 1:
            assert "levels_per_stage" not in said
        bits = isinstance(plan.schedule.positions, positions.Bits)
        local = bits and 2 <= c.local_width < c.width
        assert ("`carry_increment: true`" in said) == (local and not c.carry_increment)
    else:
        others = [m for m in plan.unit.modes if m != "slices"] if c.width > 1 else []
        for mode in ("levels", "blocks"):
            assert (f"`{mode}`" in said or f"`pipeline: {mode}`" in said) == (mode in others)
    for line in said.splitlines():
        assert len(line) <= 92, line


# Sums and multipliers: the tree's stages and the final adder's ranked together.
TREE_PLANS = [load_plan(ROOT / "configs" / name) for name in ("tap_mul18.yaml",
                                                               "beam_sum12.yaml")] + [
    make(unit="multiplier", width=8, partial_products="booth4", tree_levels_per_stage=3,
         slice_width=4),
    make(unit="multiplier", width=13, width_b=5, signed=True, partial_products="booth4",
         tree="wallace", tree_levels_per_stage=2, pipeline="blocks", cell="brent-kung",
         block_width=3),
    make(unit="sum", operands=4, width=24, slice_width=12, tree_levels_per_stage=2),
    make(unit="sum", operands=16, width=17, pipeline="levels", cell="kogge-stone"),
    make(unit="multiplier", width=1, width_b=1),
]


@pytest.mark.parametrize("plan", PLANS + TREE_PLANS,
                         ids=[p.label() + f" #{i}" for i, p in enumerate(PLANS + TREE_PLANS)])
def test_the_slowest_sentence_names_every_tied_stage(plan):
    text = report.report(plan)
    slow = [s.index for s in plan.slowest]
    delay = plan.slowest[0].delay
    units = f"{delay} unit{'s' * (delay != 1)}"  # "1 unit", not "1 units"
    if len(plan.stages) == 1:
        assert f"One stage: {units}." in text
    elif len(slow) == len(plan.stages):
        assert f"Every stage has the same unit-gate delay: {units}." in text
    else:
        sentence = " ".join(text.split("\nSlowest: ", 1)[1].split("\n\n")[0].split())
        named = re.match(r"stages? ([\d, –]+) at ", sentence).group(1)
        assert expand(named) == slow
    marked = [int(row.split()[0]) for row in text.splitlines() if row.endswith("<- slowest")]
    assert marked == (slow if len(slow) < len(plan.stages) else [])
    if len(slow) < len(plan.stages):  # no tip may say otherwise
        assert "every stage ties" not in tips(plan)


@pytest.mark.parametrize("keys, named", [
    # Ripple slices of 10, 4, 10 bits, all with a carry-in: t_pg + (w-1) t_AO + t_xor
    # (common practice) gives 22 units for the outer two, 10 for the middle one.
    (dict(width=24, cell="ripple", carry_in=True, slices=[10, 4, 10]),
     "narrow the slowest stages 0 (bits 9:0), 2 (bits 23:14): an uneven"),
    # Without a carry-in slice 0 is 2 units shorter, so the other 255 tie.
    (dict(width=4096, slice_width=16), "narrow the slowest stages 1–255 (16 bits each): an"),
])
def test_the_narrowing_tip_names_every_tied_stage(keys, named):
    assert named in " ".join(tips(make(**keys)).split())


def test_a_full_tie_asks_for_narrower_slices_everywhere():
    plan = make(width=24, slice_width=8, carry_in=True)
    assert f"every stage ties at {plan.slowest[0].delay} units: a smaller `slice_width` " \
        "narrows them all" in " ".join(tips(plan).split())


@pytest.mark.parametrize("width, offered", [(2, False), (3, False), (4, True), (16, True)])
def test_a_prefix_cell_is_offered_only_where_it_shortens_the_path(width, offered):
    # A carry network of 2 or 3 bits is a ripple chain in every prefix style (Kogge-Stone,
    # Sklansky, ... all need ceil(log2 w) levels, 1 or 2, as the ripple's w-1 does; common
    # practice); from 4 bits Kogge-Stone's log2 depth is shorter.
    plan = make(width=4 * width, slice_width=width, cell="ripple", carry_in=True)
    assert ("a prefix cell (" in tips(plan)) == offered
    if offered:
        fastest = tips(plan).split("a prefix cell (", 1)[1].split(",")[0]
        slow = plan.slowest[0]
        assert plan.unit.slice_delay(plan.config, fastest, slow.width, slow.index == 0,
                                     slow.index == len(plan.stages) - 1, slow.carry_in,
                                     slow.carry_out) < slow.delay


def test_a_final_adder_is_offered_its_own_fastest_cell():
    # A sum's sliced final adder: its slices are numbered after the tree's stages, and the
    # cells offered first are those whose own plan has the shortest slowest stages.
    from carrypipe.cells import PREFIX_STYLES

    keys = dict(unit="sum", operands=12, width=14, signed=True, slice_width=9, valid=True)
    plan = make(**keys)
    slow = {s.index for s in plan.slowest}
    own = {cell: max(s.delay for s in make(**keys, cell=cell).stages if s.index in slow)
           for cell in PREFIX_STYLES}
    named = tips(plan).split("a prefix cell (", 1)[1].split(",")[0]
    assert own[named] == min(own.values())


@pytest.mark.parametrize("plan", PLANS, ids=[p.label() + f" #{i}" for i, p in enumerate(PLANS)])
def test_register_table_lists_the_kinds_the_unit_has(plan):
    text = report.report(plan)
    rows = text.split("Register bits\n", 1)[1].split("\n\n")[0].splitlines()
    listed = {k: int(v) for k, v in (row.split() for row in rows)}
    want = {k: v for k, v in plan.registers.as_dict().items() if v or k == "total"}
    assert listed == want and list(listed)[-1] == "total"


def test_a_comparators_verdicts_never_wait():
    plan = make(width=32, unit="comparator", slice_width=8)
    text = report.report(plan)
    rows = [r for r in text.splitlines() if re.match(r"\s+\d+\s+\[", r)]
    assert all(r.split("/")[1].split()[0] == "–" for r in rows)
    assert "verdicts never wait" in text and "`pipeline: levels` compares all slices" in text


def test_a_comparators_tree_counts_the_nodes_it_keeps():
    # Pruned to the top position, the network is a tree over the n slices: n - 1 nodes,
    # ceil(log2 n) levels (a binary tree with n leaves has n - 1 inner nodes; common
    # practice).
    for n in (2, 3, 5, 8, 13):
        plan = make(width=8 * n, unit="comparator", pipeline="levels", slice_width=8)
        text = report.report(plan)
        levels = (n - 1).bit_length()
        assert f"Verdict tree    a balanced tree over {n} slices (compared in parallel): " \
            f"{levels} level{'s' * (levels > 1)}, {n - 1} node{'s' * (n > 2)}" in text
        rows = [r.split() for r in text.splitlines() if re.match(r"\s+\d+\s+\d+\s+\d+\s+\d+", r)]
        assert sum(int(r[2]) for r in rows) == n - 1
        assert "tree level 1" in text and "prefix level" not in text


def test_an_accumulator_is_offered_no_other_pipeline():
    text = tips(make(width=48, unit="accumulator", slice_width=12))
    assert "`pipeline:" not in text and "narrow the slowest" in text


def test_prefix_tips_name_the_slowest_stages_they_would_shorten():
    plan = make(width=64, pipeline="levels", cell="brent-kung", levels_per_stage=3)
    deep = [s.index for s in plan.slowest if s.depth > 1]
    assert deep
    said = " ".join(tips(plan).split())
    listed = said.split("fewer `levels_per_stage` (now 3) splits the prefix levels of ", 1)[1]
    listed = re.match(r"stages? ([\d, –]+) over", listed).group(1)
    assert expand(listed) == deep
    blocks = make(width=64, pipeline="blocks", cell="kogge-stone", block_width=16)
    assert blocks.slowest[0].index == 0
    assert "a smaller `block_width` (now 16) shortens the carry chains of stage 0" in \
        " ".join(tips(blocks).split())


@pytest.mark.parametrize("keys", [
    dict(unit="multiplier", width=16, pipeline="levels", cell="kogge-stone"),
    dict(unit="sum", operands=5, width=12, pipeline="levels", cell="sklansky"),
    # The final adder (499 bits) is wider than a multiplier may be: re-planning its config
    # as a unit of its own was refused, a traceback from `plan`.
    dict(unit="multiplier", width=256, signed=True, tree="wallace", pipeline="levels",
         cell="kogge-stone"),
], ids=["multiplier", "sum", "multiplier-256"])
def test_a_final_adder_is_not_offered_the_input_rank_swap(keys):
    """The swap of `register_inputs` for a wire rank is about a unit's own operands: a tree's
    final adder reads the tree's last rank (and the unit here has no input register)."""
    plan = make(**keys)
    assert plan.adder is not None and not plan.config.register_inputs
    said = " ".join(tips(plan).split())
    assert "`register_inputs: false`" not in said
    assert "`register_inputs: true` takes the input routing" in said


@pytest.mark.parametrize("keys, said", [
    (dict(unit="multiplier", width=8), "; bit 0 is finished by the tree"),
    (dict(unit="multiplier", width=4, width_b=4, tree="wallace", signed=True),
     "; bits 1:0 are finished by the tree"),
    (dict(unit="sum", operands=3, width=8), ", its carry out is the top bit"),
    (dict(unit="sum", operands=3, width=8, signed=True),
     ", its carry out, complemented, is the top bit"),
])
def test_the_final_adder_line_counts_the_finished_bits(keys, said):
    """The low columns the tree leaves with one dot are finished; one bit is singular; a
    carry out that the constant's top one-bit complements says so (the line wraps at the
    report's width, its continuation indented)."""
    lines = report.table(make(**keys))
    at = next(i for i, x in enumerate(lines) if x.startswith("Final adder"))
    rest = [x for x in itertools.takewhile(lambda x: x.startswith(" " * 13), lines[at + 1:])]
    assert all(len(x) <= report.COLUMNS for x in [lines[at], *rest])
    assert " ".join(x.strip() for x in [lines[at], *rest]).endswith(said)


def test_a_final_adders_block_chains_get_the_block_width_tip():
    # The final adder's stages are numbered as the unit's (its first follows the tree's), so
    # "stage 0 is among the slowest" never held for it and the tip was left out.
    plan = make(unit="multiplier", width=11, width_b=7, signed=True, partial_products="booth4",
                pipeline="blocks", cell="brent-kung", block_width=4)
    first = plan.adder_stages[0].index
    assert plan.slowest[0].index == first > 0
    said = " ".join(tips(plan).split())
    assert f"a smaller `block_width` (now 4) shortens the carry chains of stage {first};" in said


def test_a_tree_without_counters_says_so():
    # Two rows need no counter: the summary said "0 half adders" and left the full adders out.
    line = next(x for x in report.table(make(unit="multiplier", width=2, width_b=7))
                if x.startswith("Tree "))
    assert line.endswith("height 2; 0 counter levels, no counters")


def test_report_lines_wrap_at_their_column():
    # The Timing and Delay model lines ran to 160 and 104 columns.
    for plan in PLANS:
        assert max(map(len, report.report(plan).splitlines())) <= report.COLUMNS == 92, \
            plan.config.name


def test_the_tree_line_wraps_at_the_column():
    # An 18 x 18 Booth multiplier's tree line ran to 120 columns.
    lines = report.table(make(unit="multiplier", width=18, signed=True,
                              partial_products="booth4"))
    at = next(i for i, x in enumerate(lines) if x.startswith("Tree "))
    assert lines[at + 1].startswith(" " * 10 + "1") and lines[at + 2] == ""
    assert max(len(lines[at]), len(lines[at + 1])) <= report.COLUMNS


@pytest.mark.parametrize("unit", ["sum", "multiplier"])
def test_a_native_units_stages_claim_no_unit_gate_delay(unit):
    """`tree: native` leaves the logic to synthesis: the report, the manifest and the chart
    give its stages no unit-gate delay (they used to say 0 units)."""
    plan = make(unit=unit, width=16, tree="native", native_stages=2,
                **({"operands": 5} if unit == "sum" else {}))
    said = report.report(plan)
    assert "units" not in said and "Delay model" not in said and "logic model" not in said
    manifest = report.manifest(plan, [])
    assert [(e["delay"], e["depth"], e["nodes"]) for e in manifest["slices"]] == [
        (None, None, None)] * 2
    assert manifest["pipeline"] is None  # it reads no `pipeline` key
    picture = chart.svg(plan)
    assert "data-delay" not in picture and "delay 0" not in picture
    assert "No stage delays: synthesis chooses the logic." in picture


def test_the_tips_end_with_a_full_stop_and_a_narrow_top_block_is_named():
    # The last tip of a unit with registered inputs ended with ";"; a 19-bit unit in blocks
    # of 5 was "4 blocks of 5 bits" (the top one has 4).
    plan = make(width=19, pipeline="blocks", cell="sklansky", block_width=5,
                register_inputs=True)
    said = report.report(plan)
    tips = said.split("If timing fails\n")[1].split("\nThe stage delays")[0]
    assert tips.endswith(".") and not tips.endswith(";.")
    assert "over 4 blocks of 5 bits (the top one 4):" in said
    assert "over 4 blocks of 4 bits:" in report.report(make(width=16, pipeline="blocks",
                                                             cell="sklansky", block_width=4))


def test_the_other_tree_is_offered_only_when_it_differs():
    # Three rows take one level of full adders whichever way they are placed (Dadda 1965 and
    # Wallace 1964 agree on a single 3 -> 2 level), so a 3-operand sum is not told to try
    # the other placement; a 5-operand sum is.
    said = " ".join(tips(make(unit="sum", operands=3, width=8)).split())
    assert "`tree: wallace`" not in said and "`tree: native`" in said
    said = " ".join(tips(make(unit="sum", operands=5, width=8)).split())
    assert "`tree: wallace` (another counter placement)" in said


@pytest.mark.parametrize("width, offered", [(1, False), (2, False), (3, True), (64, True)])
def test_a_sparser_cell_is_offered_only_where_the_network_has_levels_to_thin(width, offered):
    # A new-user trial: a 1-bit `levels` unit (no prefix level) was told to try a sparser
    # cell, which builds the same unit; with one level (2 bits) every prefix network is the
    # same single node, so the tip starts at two levels.
    text = report.report(make(width=width, pipeline="levels", cell="kogge-stone"))
    assert ("a sparser prefix `cell`" in text) == offered
