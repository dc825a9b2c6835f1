"""The stage chart: its register cells against the plan's counts and the closed forms, its
geometry against the timing contract, banding, the slowest-stage highlight, and a real
renderer (cairosvg) turning it into a picture of the stated size."""

from __future__ import annotations

import dataclasses
import io
import math
import xml.etree.ElementTree as ET
from functools import cached_property

import cairosvg
import pytest
from PIL import Image

from carrypipe import chart
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
    "4-bit, one slice": dict(width=4),
    "16-bit, 4x4, every option": dict(width=16, slice_width=4, carry_in=True, valid=True,
                                      reset="sync", enable=True, register_inputs=True),
    "64-bit uneven brent-kung": dict(width=64, slices=[24, 20, 20], cell="brent-kung"),
    "100-bit (bands of 2 bits)": dict(width=100, slice_width=10, valid=True),
    "64-bit, 1-bit slices (rows banded)": dict(width=64, slice_width=1, valid=True),
    "4096-bit, 16 slices": dict(width=4096, slice_width=256, carry_in=True),
    "4096-bit, 256 slices (both banded)": dict(width=4096, slice_width=16, valid=True),
}


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
