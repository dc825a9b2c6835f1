"""Candidate generator, circuit dedupe, search and selection rule (pure: no tools run)."""


import pytest

from carrypipe import candidates, config, emit, units
from carrypipe.candidates import Row
from carrypipe.plan import make_plan
from carrypipe.toolflow import Measurement
from conftest import make


def base(**keys):
    keys.setdefault("name", "dut")
    keys.setdefault("width", 64)
    return config.from_mapping(keys)


@pytest.mark.parametrize("width,stages", [(64, 4), (64, 5), (7, 3), (1, 1), (100, 32)])
def test_balanced_splits(width, stages):
    split = candidates.balanced(width, stages)
    assert sum(split) == width and len(split) == stages
    assert max(split) - min(split) <= 1


def sliced(cfgs):
    return [c for c in cfgs if c.pipeline == "slices"]


def test_generate_spans_latencies_and_cells():
    cfgs = sliced(candidates.generate(base(carry_in=True), ("native", "kogge-stone")))
    lat = sorted({make(**c.normalized()).latency for c in cfgs})
    assert lat == list(range(1, candidates.MAX_STAGES + 1))
    assert len(cfgs) == 2 * candidates.MAX_STAGES
    assert all(c.carry_in and sum(c.slices) == 64 and min(c.slices) >= 2 for c in cfgs)


def test_generate_small_width_and_duplicates():
    rows = candidates.distinct([Row(make_plan(c)) for c in candidates.generate(
        base(width=5), ("native", "native"), ("slices",))])
    assert [r.config.slices for r in rows] == [(5,), (3, 2)]
    assert rows[0].same == ["native 5x1"]  # the second `native` gave the same circuits


def modes_and_cells(cfgs):
    return sorted({(c.pipeline, c.cell) for c in cfgs})


def test_cells_restrict_every_mode():
    b16 = base(width=16)
    # A native-only search has no prefix style, so no levels or blocks candidates.
    assert modes_and_cells(candidates.generate(b16, ("native",))) == [("slices", "native")]
    got = modes_and_cells(candidates.generate(b16, ("native", "sklansky")))
    assert got == [("blocks", "sklansky"), ("levels", "sklansky"), ("slices", "native"),
                   ("slices", "sklansky")]
    # No --cells: the config's cell in slices; the default prefix pair in the prefix modes.
    got = modes_and_cells(candidates.generate(b16, None))
    assert got == sorted([("slices", "native")] + [
        (m, c) for m in ("levels", "blocks") for c in candidates.DEFAULT_PREFIX_STYLES])
    # --modes restricts the modes.
    assert modes_and_cells(candidates.generate(b16, ("kogge-stone",), ("levels",))) == [
        ("levels", "kogge-stone")]
    assert candidates.generate(b16, ("native",), ("levels", "blocks")) == []
    # Only the modes the unit kind has.
    for unit, modes in (("comparator", ["levels", "slices"]), ("accumulator", ["slices"])):
        got = candidates.generate(base(width=16, unit=unit), ("native", "kogge-stone"))
        assert sorted({c.pipeline for c in got}) == modes


def labels(rows):
    return [r.label for r in rows]


def test_distinct_circuits_by_published_structure():
    # Kogge-Stone over W bits has ceil(log2 W) levels (Harris 2003); in `levels` mode the last
    # one rides in the sum stage (docs/modes.md), so at 8 bits two levels remain, and two or
    # three levels per stage both put them in one stage: the same circuit, measured once.
    rows = candidates.distinct([Row(make_plan(c)) for c in candidates.generate(
        base(width=8), ("kogge-stone",), ("levels",))])
    assert labels(rows) == ["kogge-stone levels/1", "kogge-stone levels/2"]
    assert rows[1].same == ["kogge-stone levels/3"]
    # At 16 bits three levels remain: 1, 2 and 3 per stage give 3, 2 and 1 prefix stages.
    rows = candidates.distinct([Row(make_plan(c)) for c in candidates.generate(
        base(width=16), ("kogge-stone",), ("levels",))])
    assert [r.latency for r in rows] == [4, 3, 2]
    # Every prefix network over 2 bits is the one node (1, 0): 2-bit slices of two styles
    # are one circuit; so is any prefix network over two blocks.
    rows = candidates.distinct([Row(make_plan(c)) for c in candidates.generate(
        base(width=16), ("kogge-stone", "brent-kung"), ("slices", "blocks"))])
    assert "kogge-stone 2x8" in labels(rows) and "brent-kung 2x8" not in labels(rows)
    assert "kogge-stone blocks of 8" in labels(rows)
    assert "brent-kung blocks of 8" not in labels(rows)
    assert "brent-kung 16x1" in labels(rows)  # 16-bit networks differ


def partitions(keys, width=8):
    """Candidates grouped by the emitted Verilog (comments, which quote the config and name
    the tree's style, left out) and by the circuit key."""
    by_text, by_key = {}, {}
    for cfg in candidates.generate(base(width=width, **keys), config.CELLS):
        plan = make_plan(cfg)
        code = (line.partition("//")[0].rstrip() for line in emit.unit_verilog(plan).splitlines())
        body = "\n".join(line for line in code if line)
        label = Row(plan).label
        by_text.setdefault(body, set()).add(label)
        by_key.setdefault(candidates.circuit(plan), set()).add(label)
    return sorted(map(sorted, by_text.values())), sorted(map(sorted, by_key.values()))


@pytest.mark.parametrize("keys", [dict(carry_in=True), dict(unit="subtractor"),
                                  dict(unit="accumulator")], ids=lambda k: str(k))
def test_circuit_key_agrees_with_the_emitted_verilog(keys):
    """Two candidates share a key exactly when their emitted Verilog is the same text."""
    by_text, by_key = partitions(keys)
    assert by_text == by_key
    assert len(by_key) < sum(map(len, by_key)) or keys.get("unit") == "accumulator"


def test_circuit_key_never_merges_two_circuits():
    # A comparator's slices need only their top carry, so more prefix styles coincide there
    # than the key (which reads whole networks) sees: the key may keep two equal circuits
    # apart, never merge two different ones.
    by_text, by_key = partitions(dict(unit="comparator"))
    for group in by_key:
        assert any(set(group) <= set(same) for same in by_text), group


def test_generate_from_a_prefix_mode_config_gives_slice_variants():
    cfg = base(pipeline="levels", cell="sklansky", levels_per_stage=2)
    out = sliced(candidates.generate(cfg, ("sklansky",)))
    assert out and all(c.cell == "sklansky" and not c.carry_in for c in out)


def test_narrowed_keeps_width_and_latency():
    cfg = base(slice_width=16)
    new = candidates.narrowed(cfg, 1, 2)
    assert sum(new.slices) == 64 and len(new.slices) == 4
    assert new.slices[1] == 14 and sorted(new.slices) == [14, 16, 17, 17]
    assert candidates.narrowed(cfg, 0, 4) is None  # needs 4 other slices
    assert candidates.narrowed(base(), 0, 1) is None  # one slice: nothing to narrow into


def row(slices, mhz=None, predicted=None, cell="native", luts=10, origin="even"):
    plan = make(width=sum(slices), slices=list(slices), cell=cell)
    r = Row(plan, origin, predicted)
    if mhz is not None:
        r.measured = [Measurement(1, "ok", mhz=mhz, luts=luts)]
    return r


def test_select_least_latency_then_register_bits_then_luts():
    rows = [row([16] * 4, 260), row([22, 21, 21], 255), row([32, 32], 240),
            row([21, 22, 21], 255), row([22, 21, 21], 255, cell="sklansky", luts=9)]
    # Latency 3 wins over 4; among latency 3 the split with the fewer register bits (the
    # plan's closed forms: the wider top slice waits less) wins; then fewer LUTs.
    chosen = candidates.select(rows, 250)
    assert chosen.latency == 3
    bits = {r.config.slices: r.register_bits for r in rows[1:4]}
    assert bits[(22, 21, 21)] < bits[(21, 22, 21)]
    assert chosen.config.cell == "sklansky" and chosen.config.slices == (22, 21, 21)
    assert candidates.select(rows, 300) is None
    assert candidates.best(rows).mhz == 260


def test_next_batch_confirms_and_stops():
    rows = [row([64], predicted=150), row([32, 32], predicted=240), row([22, 21, 21], predicted=300),
            row([16] * 4, predicted=320)]
    batch = candidates.next_batch(rows, 250, 2)
    # The 1-slice candidate is predicted far below (more than MARGIN): not run.
    assert [r.latency for r in batch] == [2, 3]
    batch[0].measured = [Measurement(1, "ok", mhz=230, luts=1)]
    batch[1].measured = [Measurement(1, "ok", mhz=280, luts=1)]
    assert candidates.next_batch(rows, 250, 2) == []  # latency 3 meets, nothing better open
    assert candidates.select(rows, 250).latency == 3


def test_next_batch_measures_the_best_predictions_when_none_is_promising():
    rows = [row([64], predicted=100), row([32, 32], predicted=120), row([16] * 4, predicted=110)]
    assert [r.latency for r in candidates.next_batch(rows, 500, 1)] == [2]
    rows[1].measured = [Measurement(1, "ok", mhz=125, luts=1)]
    assert candidates.next_batch(rows, 500, 1) == []


def test_a_best_prediction_that_fails_in_the_tools_gets_its_retry_seeds():
    # nextpnr-machxo2 fails to route the clock for some placements: while nothing has given a
    # figure, the best prediction is tried on its next seeds (RETRY_SEEDS), so an unreachable
    # target ends in "none meets" (exit 1) after a lucky seed, not in "no candidate could be
    # measured" (exit 3) after one unlucky placement; no other candidate is tried.
    rows = [row([64], predicted=100), row([32, 32], predicted=120), row([16] * 4, predicted=110)]
    order = []
    while batch := candidates.next_batch(rows, 500, 1):
        (r,) = batch
        seed = r.seeds_to_run()[0]
        order.append((r.latency, seed))
        r.measured.append(Measurement(seed, "error"))
    assert order == [(2, 1), (2, 2), (2, 3)]
    rows = [row([64], predicted=100), row([32, 32], predicted=120)]
    rows[1].measured = [Measurement(1, "error"), Measurement(2, "ok", mhz=125, luts=1)]
    assert candidates.next_batch(rows, 500, 1) == []  # a figure, and nothing promising


def test_uneven_variants_only_for_near_misses():
    near, far, met = row([16] * 4, 240), row([32, 32], 150), row([22, 21, 21], 260)
    near.measured[0].end = "unit.carry_stage_2_SB_DFF_Q"  # the measured slowest stage
    new = candidates.uneven_rows([near, far, met], 250, lambda c, o: Row(make_plan(c), o))
    # Stage 2 narrowed by 1 and 2 bits; the bits go to the slices farthest from it first.
    assert [r.config.slices for r in new] == [(17, 16, 15, 16), (17, 17, 14, 16)]
    assert all(r.forced and r.origin == "uneven of native 16x4" for r in new)
    assert candidates.uneven_rows([near, far, met], 250, lambda c, o: Row(make_plan(c), o)) == []


def test_prefix_mode_candidates():
    moded = lambda cfgs: sorted((c.pipeline, c.cell, c.levels_per_stage if c.pipeline == "levels"
                                 else c.block_width) for c in cfgs if c.pipeline != "slices")
    # No --cells and a native config: the default pair is tried in the prefix modes.
    got = moded(candidates.generate(base(width=64), None))
    styles = {cell for _, cell, _ in got}
    assert styles == set(candidates.DEFAULT_PREFIX_STYLES)
    # 64 bits in 32-bit blocks is two blocks: one prefix node whatever the style, so the
    # two styles are one circuit and measured once.
    rows = candidates.distinct([Row(make_plan(c)) for c in candidates.generate(
        base(width=64), None, ("blocks",))])
    assert [r.label for r in rows if r.config.block_width == 32] == ["kogge-stone blocks of 32"]
    assert len([r for r in rows if r.config.block_width == 16]) == 2
    got = moded(candidates.generate(base(width=64), ("sklansky",)))
    assert {cell for _, cell, _ in got} == {"sklansky"}


def test_local_networks_from_64_bits():
    local = lambda w: sorted((c.local_width, c.wire_registers, c.carry_increment)
                             for c in candidates.generate(base(width=w), ("kogge-stone",))
                             if c.pipeline == "levels" and c.local_width)
    assert local(32) == []
    # docs/modes.md: the carry increment behind two wire ranks was the fastest 256-bit unit;
    # 4-bit blocks with one wire rank the fastest 64-bit unit (ECP5-85F).
    each = [(0, False), (1, False), (1, True), (2, False), (2, True)]
    assert local(64) == [(k, *w) for k in (4, 16) for w in each]
    assert local(256) == local(64)


def test_every_candidate_has_its_own_label():
    # The table, the CSV and the plot name candidates by label: two configs, two labels.
    for width in (64, 256):
        labels = [Row(make_plan(c)).label for c in candidates.generate(
            base(width=width), ("native", "kogge-stone", "han-carlson"))]
        assert len(labels) == len(set(labels))
    assert Row(make_plan(base(pipeline="levels", cell="kogge-stone", local_width=16,
                              wire_registers=2))).label == "kogge-stone levels/1 local 16 wired 2"


def test_correction_is_per_kind():
    # A measured native split corrects the other native splits, not the levels candidates:
    # one kind's error says little about another's.
    native = [row([32, 32], 200, predicted=250), row([16] * 4, predicted=300)]
    lev = Row(make(width=64, pipeline="levels", cell="kogge-stone"), predicted=400)
    factors = candidates.scale(native + [lev])
    assert candidates.corrected(native[1], factors) == 240.0  # 300 x 200 / 250
    assert candidates.corrected(lev, factors) == 400.0
    assert set(factors) == {candidates.kind(native[0])}


def test_margin_decides_what_is_measured():
    rows = [row([64], predicted=236), row([32, 32], predicted=300)]
    assert [r.latency for r in candidates.next_batch(rows, 250, 2, margin=0.05)] == [2]
    assert [r.latency for r in candidates.next_batch(rows, 250, 2, margin=0.10)] == [1, 2]
    # Its kind measured (factor 1): the margin decided.
    factors = {candidates.kind(rows[0]): 1.0}
    note = candidates.why_not_run(rows[0], rows, 250, factors, None, 0.05)
    assert note == "not run: predicted 236 < 0.95 x 250 MHz"
    # Its kind never measured and nothing met: the last resort (twice the margin) decided.
    note = candidates.why_not_run(rows[0], rows, 262.5, {}, None, 0.05)
    assert note == "not run: predicted 236 < 0.9 x 262.5 MHz (the last resort)"


def test_last_resort_before_saying_none_meets():
    # Measured on iCE40 HX8K (docs/fit.md): the model put kogge-stone levels at 353.4 MHz
    # (measured 375.9) and the local-block network at 348.5 (measured 384.0); at 380 MHz
    # with a 5 % margin its own prediction never got it run, and fit said that no candidate
    # meets.  Before saying so, the kinds not measured yet are tried when their prediction,
    # times the largest correction of the search, is within twice the margin.
    ks = Row(make(width=64, pipeline="levels", cell="kogge-stone"), predicted=353.4)
    ks.measured = [Measurement(1, "ok", mhz=375.9, luts=1)]
    local = lambda p: Row(make(width=64, pipeline="levels", cell="kogge-stone",  # noqa: E731
                               local_width=16, wire_registers=1), predicted=p)
    near, far = local(348.5), local(300.0)
    rows = [ks, near, far]
    assert not candidates.promising(near, 380, candidates.scale(rows), rows, 0.05)
    assert candidates.next_batch(rows, 380, 2, margin=0.05) == [near]
    note = candidates.why_not_run(far, rows, 380, candidates.scale(rows), None, 0.05)
    assert note == ("not run: predicted 300 (x1.06, this search's largest correction: "
                    "319.1) < 0.9 x 380 MHz (the last resort)")
    # Measured and still missing: its kind has its own correction now, and the search ends.
    near.measured = [Measurement(1, "ok", mhz=370.0, luts=1)]
    assert candidates.next_batch(rows, 380, 2, margin=0.05) == []
    # With a candidate that meets, nothing is added: the rule is only for "none meets".
    near.measured = [Measurement(1, "ok", mhz=385.1, luts=1)]
    assert candidates.next_batch(rows, 380, 2, margin=0.05) == []
    assert candidates.select(rows, 380) is near


def test_uneven_variants_go_by_their_prediction():
    near = row([16] * 4, 240, predicted=250)
    make_row = lambda c, o: Row(make_plan(c), o, predicted=245)  # noqa: E731
    new = candidates.uneven_rows([near], 250, make_row)
    assert new and not any(r.forced for r in new)  # measured only when promising
    factors = candidates.scale([near, *new])
    # The parent's measured/predicted ratio (240/250) applies to its variants: 235.2.
    assert not candidates.promising(new[0], 250, factors, [near, *new], 0.05)
    assert candidates.promising(new[0], 250, factors, [near, *new], 0.10)


@pytest.mark.parametrize("statuses,seeds,expect", [
    ((), 1, (1,)), ((), 3, (1, 2, 3)), (("ok",), 1, ()), (("error",), 1, (2,)),
    (("error", "error"), 1, (3,)), (("error", "error", "error"), 1, ()),
    (("no-fit",), 1, ()), (("timeout",), 1, ()), (("error", "ok", "error"), 3, ()),
    (("error", "error", "error"), 3, (4,))])
def test_a_seed_that_fails_in_the_tools_is_followed_by_the_next(statuses, seeds, expect):
    r = row([8, 8])
    r.seeds = seeds
    r.measured = [Measurement(i + 1, s, mhz=100.0 if s == "ok" else None)
                  for i, s in enumerate(statuses)]
    assert r.seeds_to_run() == expect
    assert r.done == (expect == ())


@pytest.mark.parametrize("unit", sorted(units.KINDS))
@pytest.mark.parametrize("width", [64])
def test_every_unit_kind_gets_candidates_at_64_bits(unit, width):
    # A 64-bit comparator's fit used to stop with a traceback: the local-network variants
    # gave it `local_width`, which it refuses.
    keys = {"sum": {"operands": 3}}.get(unit, {})
    cfg = config.from_mapping({"name": "w", "width": width, "unit": unit, **keys})
    found = candidates.generate(cfg, None, units.KINDS[unit].modes)
    assert found and all(make_plan(c).latency >= 1 for c in found)


@pytest.mark.parametrize("keys", [dict(unit="sum", operands=4), dict(unit="multiplier")],
                         ids=lambda k: k["unit"])
def test_a_trees_circuit_key_reads_its_final_adder(keys):
    # Kogge-Stone and Han-Carlson over two blocks are one network, so a sum's or
    # multiplier's `blocks of 8` candidates with either are one circuit (they were measured
    # twice); the key still never merges two different circuits.
    by_text, by_key = partitions(keys)
    for group in by_key:
        assert any(set(group) <= set(same) for same in by_text), group
    pair = {"dadda/1 + han-carlson blocks of 8", "dadda/1 + kogge-stone blocks of 8"}
    assert any(pair <= set(group) for group in by_key)


def test_trees_that_build_the_same_counters_are_one_circuit():
    # A 3-operand sum has one counter level: Dadda and Wallace place the same counters, and
    # one or two levels per stage the same rank, so the four trees are one circuit (they
    # were placed and routed four times). Checked against the emitted Verilog, comments
    # aside: the key groups exactly what the text groups.
    by_text, by_key = partitions(dict(unit="sum", operands=3), width=4)
    assert by_text == by_key
    assert {"dadda/1 + native 5x1", "dadda/2 + native 5x1", "wallace/1 + native 5x1",
            "wallace/2 + native 5x1"} in map(set, by_key)
