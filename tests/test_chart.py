"""The stage chart: its register cells against the plan's counts and the closed forms, its
geometry against the timing contract, banding, the slowest-stage highlight, and a real
renderer (cairosvg) turning it into a picture of the stated size."""

from __future__ import annotations

import dataclasses
import io
import math
import re
import xml.etree.ElementTree as ET
from functools import cached_property

import cairosvg
import pytest
from PIL import Image

import gallery
from carrypipe import chart, positions, svg
from carrypipe.plan import SlicedPlan, Word
from conftest import make

SVG = "{http://www.w3.org/2000/svg}"


def parse(text: str) -> ET.Element:
    return ET.fromstring(text)


def cells(root: ET.Element, kind: str | None = None) -> list[dict]:
    """The register elements of a chart (optionally of one kind), as attribute dicts."""
    return [dict(e.attrib) for e in root.iter(f"{SVG}rect")
            if e.get("class") == "reg" and kind in (None, e.get("data-kind"))]


def bits_by_kind(root: ET.Element) -> dict[str, int]:
    total: dict[str, int] = {}
    for c in cells(root):
        total[c["data-kind"]] = total.get(c["data-kind"], 0) + int(c["data-count"])
    return total


def bit_range(cell: dict) -> range:
    hi, lo = (int(v) for v in cell["data-bits"].split(":"))
    return range(lo, hi + 1)


CASES = {
    "1-bit, one slice": dict(width=1, carry_in=True),
    "4-bit, one slice": dict(width=4),
    "16-bit, 4x4, every option": dict(width=16, slice_width=4, carry_in=True, valid=True,
                                      reset="sync", enable=True, register_inputs=True),
    "64-bit uneven brent-kung": dict(width=64, slices=[24, 20, 20], cell="brent-kung"),
    "100-bit (bands of 2 bits)": dict(width=100, slice_width=10, valid=True),
    "64-bit, 1-bit slices (rows banded)": dict(width=64, slice_width=1, valid=True),
    "4096-bit, 16 slices": dict(width=4096, slice_width=256, carry_in=True),
    "4096-bit, 256 slices (both banded)": dict(width=4096, slice_width=16, valid=True),
    "subtractor": dict(width=32, unit="subtractor", slice_width=8, carry_in=True, signed=True),
    "addsub": dict(width=24, unit="addsub", slices=[4, 10, 10], valid=True,
                   register_inputs=True),
    "comparator": dict(width=40, unit="comparator", slice_width=8, signed=True, valid=True),
    "accumulator": dict(width=48, unit="accumulator", slice_width=12, valid=True,
                        enable=True, reset="sync"),
    "levels": dict(width=64, pipeline="levels", cell="kogge-stone", local_width=16,
                   wire_registers=1, valid=True),
    "levels, 256-bit banded": dict(width=256, pipeline="levels", cell="han-carlson",
                                   levels_per_stage=2, register_inputs=True),
    "levels addsub": dict(width=32, unit="addsub", pipeline="levels", cell="sklansky",
                          carry_in=True, signed=True, enable=True),
    "blocks": dict(width=64, pipeline="blocks", cell="brent-kung", block_width=8, valid=True),
    "blocks subtractor, wired": dict(width=130, unit="subtractor", pipeline="blocks",
                                     cell="kogge-stone", block_width=16, wire_registers=2),
    "comparator levels": dict(width=64, unit="comparator", pipeline="levels", valid=True),
}
PREFIX_CASES = [k for k, v in CASES.items() if v.get("pipeline") in ("levels", "blocks")]
SLICED_CASES = [k for k in CASES if k not in PREFIX_CASES]


@pytest.mark.parametrize("keys", CASES.values(), ids=CASES.keys())
def test_cells_add_up_to_the_plan_by_kind(keys):
    plan = make(**keys)
    drawn = bits_by_kind(parse(chart.svg(plan)))
    expected = {k: v for k, v in plan.registers.as_dict().items() if k != "total" and v}
    assert drawn == expected


@pytest.mark.parametrize("width, k", [(16, 4), (64, 16), (64, 8), (96, 8), (4096, 256),
                                      (4096, 16)])
def test_triangles_match_the_closed_forms(width, k):
    # Closed forms for an even split into S slices of k bits: skew = k*S*(S-1), deskew =
    # k*S*(S-1)/2 (our own derivation, written out in plan.py's docstring).
    s = width // k
    drawn = bits_by_kind(parse(chart.svg(make(width=width, slice_width=k))))
    assert drawn.get("skew", 0) == k * s * (s - 1)
    assert drawn.get("deskew", 0) == k * s * (s - 1) // 2
    assert drawn["stage"] == width + (s - 1) + 1  # every sum bit, one carry per hand-off, cout


def test_unbanded_cells_are_single_bits_where_the_timing_contract_puts_them():
    # 16 bits in 4 slices of 4, no input register: slice i adds bits [4i+3:4i] in cycle i and
    # registers them at edge i+1, so after edge e the operand bits from 4e up still wait (a
    # and b: two cells per bit) and the result bits below 4(e-1) wait for the rest.
    root = parse(chart.svg(make(width=16, slice_width=4)))
    assert root.get("data-bit-band") == "1" and root.get("data-edge-band") == "1"
    assert all(c["data-count"] == "1" and len(bit_range(c)) == 1 for c in cells(root))
    for edge in range(1, 5):
        def at(kind, edge=edge):
            return sorted(b for c in cells(root, kind) if c["data-edge"] == str(edge)
                          for b in bit_range(c))
        assert at("skew") == sorted(2 * list(range(4 * edge, 16)))
        assert at("deskew") == list(range(0, 4 * (edge - 1)))
        carry = [4 * edge] if edge < 4 else [16]  # the hand-off carry, and cout at the end
        assert at("stage") == sorted(list(range(4 * (edge - 1), 4 * edge)) + carry)


def test_msb_on_the_left_and_cycles_down():
    root = parse(chart.svg(make(width=16, slice_width=4)))
    sums = {(c["data-bits"], c["data-edge"]): float(c["x"]) for c in cells(root, "stage")}
    assert sums[("15:15", "4")] < sums[("12:12", "4")]
    rows = {c["data-edge"]: float(c["y"]) for c in cells(root, "deskew")}
    assert rows["2"] < rows["3"] < rows["4"]


def test_carry_hand_off_between_each_pair_of_slices():
    plan = make(width=24, slices=[4, 10, 10])
    root = parse(chart.svg(plan))
    arrows = [(int(e.get("data-from")), int(e.get("data-to"))) for e in root.iter(f"{SVG}line")
              if e.get("class") == "carry"]
    assert arrows == [(0, 1), (1, 2)]


def test_valid_travels_beside_the_data():
    plan = make(width=16, slice_width=4, valid=True, register_inputs=True)
    root = parse(chart.svg(plan))
    valid = cells(root, "control")
    assert sorted(int(c["data-edge"]) for c in valid) == list(range(1, plan.latency + 1))
    leftmost_valid = min(float(c["x"]) for c in valid)
    assert all(float(c["x"]) + float(c["width"]) < leftmost_valid for c in cells(root)
               if c["data-kind"] != "control")


@pytest.mark.parametrize("keys, bit_band, edge_band", [
    (dict(width=64, slice_width=16), 1, 1),
    (dict(width=100, slice_width=10), 2, 1),
    (dict(width=4096, slice_width=256), 64, 1),
    (dict(width=64, slice_width=1), 1, 2),
    (dict(width=4096, slice_width=1), 64, 128),
], ids=["64/16", "100/10", "4096/256", "64/1", "4096/1"])
def test_wide_units_are_banded_and_say_so(keys, bit_band, edge_band):
    text = chart.svg(make(**keys))
    root = parse(text)
    assert (root.get("data-bit-band"), root.get("data-edge-band")) == (str(bit_band),
                                                                       str(edge_band))
    note = [e.text for e in root.iter(f"{SVG}text") if e.get("data-role") == "banding"]
    if bit_band == edge_band == 1:
        assert note == []
    else:
        assert len(note) == 1
        assert (f"one column = {bit_band} bits" in note[0]) == (bit_band > 1)
        assert (f"one row = {edge_band} clock edges" in note[0]) == (edge_band > 1)
    columns = {c["data-bits"].split(":")[1] for c in cells(root) if c["data-kind"] != "control"}
    assert len({int(lo) // bit_band for lo in columns}) <= chart.MAX_COLUMNS
    assert len(cells(root)) <= 4 * chart.MAX_COLUMNS * chart.MAX_ROWS  # stays drawable
    assert len(text) < 2_000_000


def slowest_blocks(root):
    return [e.get("data-stage") for e in root.iter(f"{SVG}rect")
            if e.get("class") == "slice" and e.get("data-slowest") == "1"]


def sentence(root):
    return next(e.text for e in root.iter(f"{SVG}text") if e.get("data-role") == "slowest")


def test_the_slowest_stage_is_highlighted():
    plan = make(width=24, slices=[12, 6, 6])  # the widest ripple slice has the longest path
    assert plan.slowest[0].index == 0 and plan.slices[0].delay > plan.slices[1].delay
    root = parse(chart.svg(plan))
    assert slowest_blocks(root) == ["0"]
    assert sentence(root).startswith(f"Slowest: stage 0 at delay {plan.slowest[0].delay} ")


def test_a_tie_everywhere_highlights_nothing_and_says_so():
    plan = make(width=24, slice_width=8, carry_in=True)
    root = parse(chart.svg(plan))
    assert slowest_blocks(root) == []
    assert sentence(root).startswith(f"All 3 stages tie at delay {plan.slowest[0].delay}")


def test_measured_figures_choose_the_slowest_stage():
    plan = make(width=24, slices=[12, 6, 6])
    text = chart.svg(plan, measured={0: 1.9, 1: 2.75, 2: 2.1}, measured_source="bench board")
    root = parse(text)
    assert slowest_blocks(root) == ["1"]
    assert sentence(root) == "Slowest: stage 1 at 2.75 ns (measured), highlighted."
    assert "measured (bench board)" in text
    assert ("Stage figures measured (bench board): worst register-to-register delay inside "
            "each stage, in ns.") in text


@pytest.mark.parametrize("keys", [dict(width=24, slices=[12, 6, 6]),
                                  dict(unit="sum", operands=3, width=8, slice_width=4)],
                         ids=["adder", "sum"])
def test_one_measured_stage_says_the_others_show_the_model(keys):
    # fit measures the critical path's stage only: the footnote said every stage was.
    plan = make(**keys)
    text = chart.svg(plan, measured={1: 2.75}, measured_source="nextpnr")
    assert ("Measured (nextpnr): the worst register-to-register delay, in ns, of stage 1; "
            "the other stages show their unit-gate delay.") in text
    assert "inside each stage" not in text


@pytest.mark.parametrize("measured, message", [
    ({3: 1.0}, r"measured figure for stage 3: the plan has stages 0\.\.2\Z"),
    ({0: -1.0}, r"measured figure for stage 0: -1\.0 is not a non-negative number of ns\Z"),
    ({0: math.nan}, r"measured figure for stage 0: nan is not"),
])
def test_bad_measured_figures_are_refused(measured, message):
    with pytest.raises(ValueError, match=message):
        chart.svg(make(width=24, slices=[12, 6, 6]), measured=measured)


class RetimedPlan(SlicedPlan):
    """A plan with a register kind the chart does not know (as a future mode might add)."""

    @cached_property
    def words(self):
        return super().words + (Word("retime", "retime_a", 2, 3, 5, 2),
                                Word("retime", "retime_b", 2, 3, 5, 2))


def test_an_unknown_register_kind_gets_a_colour_and_a_legend_entry():
    base = make(width=16, slice_width=4)
    plan = RetimedPlan(config=base.config, stages=base.stages)
    root = parse(chart.svg(plan))
    drawn = cells(root, "retime")
    assert sum(int(c["data-count"]) for c in drawn) == 10
    assert {c["fill"] for c in drawn} == {chart.EXTRA_COLOURS[0]}
    keys = [e.get("data-kind") for e in root.iter(f"{SVG}rect") if e.get("class") == "key"]
    assert keys[-1] == "retime"
    legend = [e.text for e in root.iter(f"{SVG}text") if e.get("data-kind") == "retime"]
    assert legend == ["10"]


def test_same_plan_same_bytes():
    one = chart.svg(make(width=64, slices=[24, 20, 20], valid=True))
    two = chart.svg(make(width=64, slices=[24, 20, 20], valid=True))
    assert one == two and one.endswith("</svg>\n")


def hex_rgb(colour: str) -> tuple[int, int, int]:
    return tuple(int(colour[i:i + 2], 16) for i in (1, 3, 5))


RENDERED = {
    "small 4-bit": dict(width=4),
    "medium 64-bit": dict(width=64, slice_width=16, carry_in=True, valid=True),
    "very wide 4096-bit": dict(width=4096, slice_width=512, valid=True),
}


@pytest.mark.parametrize("keys", RENDERED.values(), ids=RENDERED.keys())
def test_renders_to_a_picture_of_the_stated_size(keys):
    plan = make(**keys)
    text = chart.svg(plan)
    root = parse(text)
    width, height = int(root.get("width")), int(root.get("height"))
    assert chart.MIN_WIDTH <= width <= 1400 and 300 <= height <= 1400  # fits a review slide
    png = cairosvg.svg2png(bytestring=text.encode())
    image = Image.open(io.BytesIO(png)).convert("RGB")
    assert image.size == (width, height)
    colours = dict((rgb, n) for n, rgb in image.getcolors(width * height))
    ink = width * height - colours.get((255, 255, 255), 0)
    assert ink > 0.08 * width * height  # not blank: cells, blocks and text were drawn
    present = set(colours)
    for kind, bits in plan.registers.as_dict().items():
        if kind != "total" and bits:  # every kind that has registers shows its colour
            assert hex_rgb(chart.COLOURS[kind]) in present, kind


def test_stages_spanning_every_bit_are_drawn_without_hand_offs():
    # A plan whose stages each cover all bits (as the prefix-level modes do): one full-width
    # block per cycle and no carry arrows, since no stage starts where another ends.
    base = make(width=16, slice_width=4)
    full = tuple(dataclasses.replace(s, lsb=0, width=16) for s in base.slices)
    root = parse(chart.svg(SlicedPlan(config=base.config, stages=full)))
    blocks = [e for e in root.iter(f"{SVG}rect") if e.get("class") == "slice"]
    assert [(b.get("data-stage"), b.get("data-bits")) for b in blocks] == \
        [(str(i), "15:0") for i in range(4)]
    assert not [e for e in root.iter(f"{SVG}line") if e.get("class") == "carry"]


# ---- words, labels and marks of every mode and unit kind ----

def texts(root: ET.Element, role: str | None = None) -> list[ET.Element]:
    return [e for e in root.iter(f"{SVG}text") if role is None or e.get("data-role") == role]


def legend(root: ET.Element) -> str:
    """Every word of the chart below the grid (the legend and the key to the marks)."""
    return " ".join(e.text or "" for e in texts(root))


def expand(listed: str) -> list[int]:
    """Stage numbers as a sentence lists them: `0, 2, 5` or runs `1–255`."""
    out = []
    for part in listed.split(", "):
        lo, _, hi = part.partition("–")
        out += range(int(lo), int(hi or lo) + 1)
    return out


@pytest.mark.parametrize("keys", CASES.values(), ids=CASES.keys())
def test_the_legend_lists_only_the_kinds_the_unit_has(keys):
    plan = make(**keys)
    root = parse(chart.svg(plan))
    present = {k for k, v in plan.registers.as_dict().items() if k != "total" and v}
    keyed = [e.get("data-kind") for e in root.iter(f"{SVG}rect") if e.get("class") == "key"]
    assert sorted(keyed) == sorted(present)
    shown = {e.get("data-kind"): int(e.text.replace(" ", "")) for e in texts(root, "bits")}
    assert shown == {k: plan.registers[k] for k in present}
    assert int(texts(root, "total")[0].text.replace(" ", "")) == plan.registers.total


@pytest.mark.parametrize("keys", CASES.values(), ids=CASES.keys())
def test_every_cell_says_what_it_holds_and_rows_add_up(keys):
    plan = make(**keys)
    root = parse(chart.svg(plan))
    families = {w.family for w in plan.words}
    for c in cells(root):
        assert {"data-kind", "data-bits", "data-edge", "data-count", "data-families"} <= set(c)
        assert set(c["data-families"].split()) <= families
        last, _, first = c["data-edge"].partition(":")
        edges = int(last) - int(first or last) + 1
        assert int(c["data-count"]) <= len(bit_range(c)) * len(families) * edges
    rows = sum(int(e.get("data-count")) for e in texts(root, "row-bits"))
    assert rows == plan.registers.total  # the bits loaded per row, over all rows


@pytest.mark.parametrize("name", SLICED_CASES)
def test_every_slice_is_labelled_with_its_bits(name):
    plan = make(**CASES[name])
    root = parse(chart.svg(plan))
    blocks = [e for e in root.iter(f"{SVG}rect") if e.get("class") == "slice"]
    labels = {e.get("data-stage"): e.text for e in texts(root, "stage-label")}
    assert len(labels) == len(blocks)  # one label per drawn block (grouped when rows band)
    for b in blocks:
        hi, _, lo = b.get("data-bits").partition(":")
        assert f"bits {hi}:{lo}" in labels[b.get("data-stage")] or (
            hi == lo and f"bit {lo}" in labels[b.get("data-stage")])


@pytest.mark.parametrize("name", PREFIX_CASES)
def test_prefix_stage_bands_say_which_levels_they_hold(name):
    plan = make(**CASES[name])
    root = parse(chart.svg(plan))
    blocks = {e.get("data-stage"): e for e in root.iter(f"{SVG}rect")
              if e.get("class") == "slice"}
    labels = {e.get("data-stage"): e.text for e in texts(root, "stage-label")}
    tree = isinstance(plan.schedule.positions, positions.Slices)
    for s in plan.stages:
        block, label = blocks[str(s.index)], labels[str(s.index)]
        assert block.get("data-logic") == s.logic and s.logic in label
        assert block.get("data-levels", "").split() == [str(k) for k in s.levels]
        if s.levels:  # the schedule's 0-based levels, 1-based as in the report
            first, last = s.levels[0], s.levels[-1]
            what = "tree level" if tree else "prefix level"
            assert (f"{what} {first}" if first == last else f"{what}s {first}-{last}") in label
        assert "bits" not in label  # every stage spans all bits: no range to tell apart
        assert (block.get("stroke-dasharray") is not None) == (s.delay == 0)


@pytest.mark.parametrize("name", PREFIX_CASES)
def test_prefix_legends_speak_of_their_own_mode(name):
    plan = make(**CASES[name])
    words = legend(parse(chart.svg(plan)))
    assert "slice:" not in words and "handed to the next slice" not in words
    assert "waiting for their slice" not in words and "upper slices" not in words
    assert "stage: its logic in one cycle, across all bits" in words
    pos = plan.schedule.positions
    if isinstance(pos, positions.Slices):
        assert "slice verdicts" in words and "a tree over their verdicts" in words
    elif isinstance(pos, positions.Blocks):
        chain = plan.unit.chain[0]
        assert f"block {'carries' if chain == 'carry' else chain + 's'}:" in words
        assert f"{chain}-in 0 and 1" in words
    else:
        assert f"{plan.unit.chain[0]} generate/propagate" in words
    if plan.unit.result:
        assert f"output register: {plan.unit.result} [{plan.width - 1}:0]" in words


@pytest.mark.parametrize("keys, block, handoff, stage", [
    (dict(width=16, slice_width=4), "adder slice: adds its bits", "carry handed to the next "
     "slice", "each slice's sum bits and the carry it hands on; cout at the top"),
    (dict(width=16, unit="subtractor", slice_width=4, carry_in=True), "subtractor slice: "
     "subtracts its bits", "borrow handed to the next slice", "each slice's diff bits and the "
     "borrow it hands on; bout at the top"),
    (dict(width=16, unit="addsub", slice_width=4), "adder/subtractor slice: adds or "
     "subtracts", "carry handed to the next slice", "input skew: a, b bits and the sub flag"),
    (dict(width=16, unit="comparator", slice_width=4), "comparator slice: compares its bits",
     "lt and eq handed to the next slice", "lt and eq of the bits so far, handed from slice "
     "to slice; lt, eq, gt at the top"),
    (dict(width=16, unit="accumulator", slice_width=4), "accumulator slice: accumulates its "
     "bits in one cycle, keeping its bits of the total", "carry handed to the next slice",
     "each slice's bits of the running total acc"),
], ids=["adder", "subtractor", "addsub", "comparator", "accumulator"])
def test_sliced_legends_use_the_words_of_the_unit_kind(keys, block, handoff, stage):
    plan = make(**keys)
    words = legend(parse(chart.svg(plan)))
    assert block in words and handoff in words and stage in words
    # the hand-off names the unit's chain (carry, borrow, lt and eq)
    assert " and ".join(plan.unit.chain) + " handed to the next slice" in words
    if plan.unit.result is None:  # a comparator: no result word, no deskew
        assert "deskew" not in words


@pytest.mark.parametrize("keys, name", [
    (dict(width=96, slices=[36, 36, 24]), "cout"),
    (dict(width=32, unit="subtractor", slice_width=8), "bout"),
    (dict(width=32, signed=True, slice_width=8), "cout/overflow"),
    (dict(width=32, unit="comparator", slice_width=8), "lt/eq/gt"),
    (dict(width=64, pipeline="levels", cell="sklansky"), "cout"),
    (dict(width=64, unit="comparator", pipeline="levels"), "lt/eq/gt"),
], ids=["adder", "subtractor", "signed", "comparator", "levels", "comparator levels"])
def test_the_column_above_the_top_bit_is_named_for_what_it_holds(keys, name):
    plan = make(**keys)
    root = parse(chart.svg(plan))
    [out] = texts(root, "out-column")
    assert out.text == name and out.get("data-bit") == str(plan.width)
    ticks = [int(e.text) for e in texts(root, "tick")]
    assert plan.width not in ticks and 0 in ticks and plan.width - 1 in ticks
    # the column's cells are the chain out of the top and the one-bit outputs
    top = [c for c in cells(root) if int(c["data-bits"].split(":")[1]) >= plan.width]
    assert top and all(c["data-bits"] == f"{plan.width}:{plan.width}" for c in top)


def test_no_column_above_the_top_bit_without_a_chain_out():
    root = parse(chart.svg(make(width=32, slice_width=8, carry_out=False)))
    assert texts(root, "out-column") == []


@pytest.mark.parametrize("name", ["16-bit, 4x4, every option", "64-bit uneven brent-kung",
                                  "100-bit (bands of 2 bits)", "4096-bit, 16 slices",
                                  "4096-bit, 256 slices (both banded)", "addsub", "blocks",
                                  "levels", "comparator levels"])
def test_ticks_fall_at_slice_or_block_boundaries(name):
    plan = make(**CASES[name])
    root = parse(chart.svg(plan))
    ticks = [int(e.text) for e in texts(root, "tick")]
    assert ticks == sorted(ticks) and ticks[0] == 0 and ticks[-1] == plan.width - 1
    if plan.mode == "slices":
        starts = {s.lsb for s in plan.stages}
    elif isinstance(plan.schedule.positions, positions.Bits):
        local = plan.config.local_width
        starts = set(range(0, plan.width, local))
    else:
        starts = set(plan.schedule.lsbs)
    assert set(ticks[:-1]) <= starts and len(ticks) >= 3
    # evenly thinned: the boundaries between ticks are skipped by one step everywhere
    inner = sorted(starts)
    picked = [inner.index(t) for t in ticks[:-1]]
    steps = {b - a for a, b in zip(picked, picked[1:])}
    assert len(steps) <= 1
    lines = {int(e.get("data-bit")) for e in root.iter(f"{SVG}line")
             if e.get("class") == "boundary"}
    assert lines == (starts - {0} if len(starts) <= chart.MAX_COLUMNS else set())


def test_the_banding_note_is_calm():
    root = parse(chart.svg(make(width=4096, slice_width=256)))
    [note] = texts(root, "banding")
    assert note.get("fill") == chart.CALM and note.get("fill") != chart.SLOW
    assert note.get("font-weight") is None


@pytest.mark.parametrize("keys", [dict(width=16, slice_width=4, enable=True, valid=True),
                                  dict(width=64, pipeline="levels", cell="kogge-stone",
                                       enable=True),
                                  dict(width=64, slice_width=1, enable=True)],
                         ids=["sliced", "levels", "rows banded"])
def test_en_is_drawn_once_beside_every_register_row(keys):
    plan = make(**keys)
    root = parse(chart.svg(plan))
    [en] = [e for e in root.iter() if e.get("class") == "enable"]
    assert en.get("data-port") == "en" and en.get("data-edges") == f"{plan.latency}:1"
    rows = int(math.ceil(plan.latency / int(root.get("data-edge-band"))))
    assert en.get("d").count("M") == rows  # one stroke per register row, where it acts
    right = max(float(c["x"]) + float(c["width"]) for c in cells(root))
    assert all(float(p) > right for p in re.findall(r"M([\d.]+),", en.get("d")))
    assert f"en: {plan.port('en').meaning}" in legend(root)
    assert not [e for e in parse(chart.svg(make(width=16, slice_width=4))).iter()
                if e.get("class") == "enable"]


@pytest.mark.parametrize("keys, lane", [
    (dict(width=24, unit="addsub", slice_width=8, register_inputs=True), "sub"),
    (dict(width=24, unit="accumulator", slice_width=8), "clear"),
    (dict(width=24, unit="addsub", pipeline="levels", cell="sklansky"), "sub"),
])
def test_flags_travel_in_a_lane_of_their_own(keys, lane):
    plan = make(**keys)
    root = parse(chart.svg(plan))
    assert lane in [e.text for e in texts(root, "lane")]
    flags = [w for w in plan.words if w.width == 1 and w.family in
             (lane, f"{lane}_in", f"{lane}_skew")]
    drawn = [c for c in cells(root) if set(c["data-families"].split()) & {w.family for w in flags}]
    assert sum(int(c["data-count"]) for c in drawn) == len(flags) > 0
    data_right = max(float(c["x"]) + float(c["width"]) for c in cells(root)
                     if c not in drawn and c["data-kind"] != "control")
    assert all(float(c["x"]) > data_right for c in drawn)


def test_prefix_register_rows_are_runs_not_terms():
    # 64-bit Kogge-Stone by levels: hundreds of prefix terms per rank, drawn as a few runs
    # per rank and kind (one strip per kind, solid where each column is one bit).
    plan = make(width=64, pipeline="levels", cell="kogge-stone", valid=True)
    root = parse(chart.svg(plan))
    data = [c for c in cells(root) if c["data-kind"] != "control"]
    by_row: dict = {}
    for c in data:
        by_row.setdefault(c["data-edge"], []).append(c)
    assert len(by_row) == plan.latency
    for edge, row in by_row.items():
        kinds = {c["data-kind"] for c in row}
        assert len(row) <= 2 * len(kinds) + 1  # a run per kind, the column above the top
        heights = {round(float(c["height"]), 2) for c in row}
        assert len(heights) == 1  # kinds share the row in equal strips
    assert all(c.get("fill-opacity") is None for c in data)  # unbanded: nothing to shade


def test_slowest_sentence_names_every_tied_stage_and_is_red_only_when_highlighted():
    plan = make(width=4096, slice_width=16)  # stage 0 has no carry-in: 1-255 tie
    root = parse(chart.svg(plan))
    [line] = texts(root, "slowest")
    listed = line.text.rsplit("stages ", 1)[1].rstrip(".")
    assert expand(listed) == [s.index for s in plan.slowest] == list(range(1, 256))
    assert line.get("fill") == chart.SLOW
    tie = parse(chart.svg(make(width=24, slice_width=8, carry_in=True)))
    assert texts(tie, "slowest")[0].get("fill") == chart.INK


# ---- every chart kind rendered, and the gallery of docs/chart.md ----

@pytest.mark.parametrize("stem", gallery.GALLERY)
def test_every_chart_kind_renders_readably(stem):
    plan = gallery.plan_of(stem)
    text = chart.svg(plan)
    root = parse(text)
    width, height = int(root.get("width")), int(root.get("height"))
    image = Image.open(io.BytesIO(gallery.png(text))).convert("RGB")
    assert image.size == (width, height)
    colours = {rgb for _, rgb in image.getcolors(width * height)}
    for kind, bits in plan.registers.as_dict().items():
        if kind != "total" and bits:
            assert hex_rgb(svg.REGISTER_COLOURS[kind]) in colours, kind  # tree kinds too
    # no text runs off the picture (estimated with the fitting rule's glyph width)
    for e in texts(root):
        size, x = float(e.get("font-size")), float(e.get("x"))
        w = svg.text_width(e.text or "", size)
        left = x - {"end": w, "middle": w / 2}.get(e.get("text-anchor"), 0)
        assert 0 <= left and left + w <= width, e.text


def test_the_gallery_is_in_the_docs():
    doc = (gallery.HERE.parent / "docs" / "chart.md").read_text()
    for stem, (caption, _) in gallery.GALLERY.items():
        path = gallery.FOLDER / f"{stem}.png"
        assert f"(chart/{stem}.png)" in doc and caption in doc
        assert path.stat().st_size < 100_000  # small
        text = chart.svg(gallery.plan_of(stem))
        root = parse(text)
        with Image.open(path) as image:  # drawn by this version's layout
            assert image.size == (round(int(root.get("width")) * gallery.SCALE),
                                  round(int(root.get("height")) * gallery.SCALE))
            # from today's chart (a docs trial found four images showing old stage delays):
            # rewrite them with `python tests/gallery.py`
            assert image.text.get("svg-sha256") == gallery.svg_digest(text), stem


@pytest.mark.parametrize("keys", [dict(width=64, pipeline="blocks", cell="brent-kung",
                                       block_width=8, signed=True),
                                  dict(width=40, unit="comparator", pipeline="levels"),
                                  dict(width=256, pipeline="levels", cell="sklansky",
                                       signed=True)],
                         ids=["blocks signed", "comparator levels", "levels banded"])
def test_the_output_register_is_drawn_full(keys):
    # Every output bit has exactly one register in the last rank, so its cells are full;
    # the column above the top bit (cout and overflow side by side) does not change that.
    plan = make(**keys)
    root = parse(chart.svg(plan))
    last = [c for c in cells(root, "stage") if c["data-edge"] == str(plan.latency)]
    assert last and all(c.get("fill-opacity") is None for c in last)


def test_a_band_of_unmeasured_stages_names_its_deepest_model_delay():
    """Found by a code review: with measured figures for some stages only, a band of stages
    none of which was measured took its first stage's model delay (`delay 4` for stages
    80–81, whose slice 81 adds 20 bits: delay 42)."""
    widths = [1] * 50 + [20] + [1] * 30 + [20]
    plan = make(width=sum(widths), slices=widths)
    labels = re.findall(r">(stages \d+–\d+ · [^<]*)<", chart.svg(plan, measured={0: 2.5}))
    band = next(t for t in labels if t.startswith("stages 80–81"))
    assert band.endswith(f"up to delay {plan.stages[81].delay}") and plan.stages[81].delay > 4
