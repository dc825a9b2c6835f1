"""The stage chart of a carry-save unit (`treechart.py`): its register cells add up to the
plan's counts by kind, each tree rank's dots are the plan's dots, wide units are banded,
the slowest stage is marked, and a real renderer (cairosvg) draws it."""

import io
import re
import xml.etree.ElementTree as ET

import cairosvg
import pytest
from PIL import Image

from carrypipe import chart, svg
from conftest import make

SVG = "{http://www.w3.org/2000/svg}"
CASES = {
    "8x8 signed, sliced, valid": dict(unit="multiplier", width=8, signed=True, slice_width=5,
                                      valid=True, reset="sync", register_inputs=True),
    "12x9 booth, levels": dict(unit="multiplier", width=12, width_b=9,
                               partial_products="booth4", pipeline="levels",
                               cell="kogge-stone"),
    "sum 5x9 wallace, blocks": dict(unit="sum", operands=5, width=9, tree="wallace",
                                    tree_levels_per_stage=2, pipeline="blocks",
                                    cell="brent-kung", block_width=4),
    "sum 16x200 (banded)": dict(unit="sum", operands=16, width=200, slice_width=64),
    "native": dict(unit="multiplier", width=16, tree="native", native_stages=3, valid=True),
    "1x1 (no final adder)": dict(unit="multiplier", width=1, width_b=1),
}


def cells(root, kind=None):
    return [dict(e.attrib) for e in root.iter(f"{SVG}rect")
            if e.get("class") == "reg" and kind in (None, e.get("data-kind"))]


@pytest.mark.parametrize("keys", CASES.values(), ids=CASES.keys())
def test_cells_add_up_to_the_plan_by_kind(keys):
    plan = make(**keys)
    root = ET.fromstring(chart.svg(plan))
    drawn = {}
    for c in cells(root):
        drawn[c["data-kind"]] = drawn.get(c["data-kind"], 0) + int(c["data-count"])
    assert drawn == {k: v for k, v in plan.registers.as_dict().items() if k != "total" and v}
    bits = {e.get("data-kind"): int(e.text.replace(" ", "")) for e in root.iter(f"{SVG}text")
            if e.get("data-role") == "bits"}
    assert bits == drawn  # the legend: only the kinds the unit has (docs/chart.md)
    rows = sum(int(e.get("data-count")) for e in root.iter(f"{SVG}text")
               if e.get("data-role") == "row-bits")
    assert rows == plan.registers.total
    assert all(c["data-families"] == c["data-name"] for c in cells(root))


def test_each_rank_holds_the_plans_dots():
    plan = make(unit="multiplier", width=6, width_b=5)
    root = ET.fromstring(chart.svg(plan))
    first = plan.input_cycles + 1
    for stage, rank in enumerate(plan.tree.ranks):
        dots = sum(int(c["data-count"]) for c in cells(root, "tree")
                   if c["data-edge"] == str(first + stage))
        assert dots == sum(len(col) for col in rank)
    matrix = [e for e in root.iter(f"{SVG}circle") if e.get("class") == "dot"]
    assert len(matrix) == len(plan.tree.matrix.leaves)  # hollow: logic, not registers


def test_wide_units_are_banded_and_say_so():
    root = ET.fromstring(chart.svg(make(**CASES["sum 16x200 (banded)"])))
    assert root.get("data-bit-band") == "4"
    assert any(e.get("data-role") == "banding" for e in root.iter(f"{SVG}text"))


def blocks(root) -> list[dict]:
    return [dict(e.attrib) for e in root.iter(f"{SVG}rect") if e.get("class") == "slice"]


def test_the_slowest_stage_is_marked_and_measured_figures_decide():
    plan = make(**CASES["8x8 signed, sliced, valid"])
    root = ET.fromstring(chart.svg(plan))
    marked = {int(b["data-stage"]) for b in blocks(root) if b["data-slowest"] == "1"}
    assert marked == {s.index for s in plan.slowest}
    root = ET.fromstring(chart.svg(plan, {0: 2.5, 3: 1.0}, "nextpnr"))
    marked = {int(b["data-stage"]) for b in blocks(root) if b["data-slowest"] == "1"}
    assert marked == {0}
    with pytest.raises(ValueError, match="the plan has stages"):
        chart.svg(plan, {99: 1.0})


def test_same_plan_same_bytes_and_a_real_picture():
    plan = make(**CASES["12x9 booth, levels"])
    text = chart.svg(plan)
    assert text == chart.svg(make(**CASES["12x9 booth, levels"]))
    png = cairosvg.svg2png(bytestring=text.encode())
    image = Image.open(io.BytesIO(png))
    root = ET.fromstring(text)
    assert image.size == (int(root.get("width")), int(root.get("height")))


@pytest.mark.parametrize("keys", [*CASES.values(), dict(width=16, slice_width=4),
                                  dict(width=32, pipeline="levels", cell="sklansky")],
                         ids=[*CASES.keys(), "adder, slices", "adder, levels"])
def test_every_chart_carries_the_documented_data_attributes(keys):
    """One script reads every chart (docs/chart.md, *Data attributes*): the root's unit,
    mode, width and stages, and one stage block per stage with its bits, delay and mark."""
    plan = make(**keys)
    root = ET.fromstring(chart.svg(plan))
    assert root.get("data-mode") == plan.mode and root.get("data-unit") == plan.unit.name
    assert root.get("data-stages") == str(len(plan.stages))
    assert root.get("data-latency") == str(plan.latency)
    assert root.get("data-width") == str(getattr(plan, "result_width", plan.width))
    found = blocks(root)
    assert [b["data-stage"] for b in found] == [str(s.index) for s in plan.stages]
    slow = {s.index for s in plan.slowest} if len(plan.slowest) < len(plan.stages) else set()
    for b, s in zip(found, plan.stages):
        assert b["data-bits"] == f"{s.msb}:{s.lsb}"
        assert b.get("data-delay") == (str(s.delay) if plan.timed else None)
        assert b["data-slowest"] == ("1" if s.index in slow else "0")
    labels = [e.get("data-stage") for e in root.iter(f"{SVG}text")
              if e.get("data-role") == "stage-label"]
    assert sorted(set(labels), key=int) == [b["data-stage"] for b in found]


def test_a_tree_stage_block_says_which_counter_levels_it_holds():
    plan = make(**CASES["12x9 booth, levels"])
    found = blocks(ET.fromstring(chart.svg(plan)))
    for b, s in zip(found, plan.tree_stages):
        assert b["data-levels"] == " ".join(map(str, s.levels)) and b["data-logic"] == s.logic
    for b, s in zip(found[len(plan.tree_stages):], plan.adder_stages):  # prefix levels
        assert b["data-levels"] == " ".join(map(str, s.levels))


@pytest.mark.parametrize("reset", ["none", "sync"])
def test_the_valid_bits_meaning_says_what_rst_does_as_in_the_adders_chart(reset):
    # Both charts and the Verilog header describe the valid bits in the same words; the
    # tree chart left out that rst clears them.
    tree = chart.svg(make(unit="sum", operands=3, width=8, valid=True, reset=reset))
    adder = chart.svg(make(width=8, valid=True, reset=reset))
    words = "valid bit, delayed like the data" + ("; rst clears it" if reset != "none" else "")
    for picture in (tree, adder):
        assert re.search(f">{re.escape(words)}<", picture)


def test_the_legend_speaks_of_the_final_adders_own_mode():
    # The legend read "result bits waiting for the upper slices" for a `levels` final adder,
    # which has no slices; each kind now reads as the final adder's mode says, its bits
    # numbered as the unit's (an 8 x 8 product: bits 15:1 from the final adder, bit 0
    # finished by the tree).
    levels = chart.svg(make(unit="multiplier", width=8, pipeline="levels",
                            cell="kogge-stone"))
    assert not [t for t in re.findall(r">([^<]*)<", levels) if "slice" in t]
    assert ">final adder: output register: product [15:1]<" in levels
    assert ">output deskew: product bits the tree finished, waiting for the final adder<" \
        in levels
    sliced = chart.svg(make(unit="multiplier", width=8, slice_width=5))
    assert ">final adder: input skew: row0, row1 bits waiting for their slice<" in sliced
    native = chart.svg(make(unit="sum", operands=3, width=8, tree="native", native_stages=2))
    assert "final adder" not in native and "retime" in native


@pytest.mark.parametrize("keys", list(CASES.values()), ids=list(CASES))
def test_the_legend_wraps_inside_the_page(keys):
    # A sliced final adder's deskew meaning ran 150 px past the page's right edge; the
    # legend's lines are now wrapped as the adder chart's are (the chart's own glyph-width
    # estimate, svg.text_width).
    root = ET.fromstring(chart.svg(make(**keys)))
    width = float(root.get("width"))
    lines = [e for e in root.iter(f"{SVG}text") if e.get("fill") == "#444444"]
    assert lines and all(float(e.get("x")) + svg.text_width(e.text, 11) <= width - svg.MARGIN
                         for e in lines)
