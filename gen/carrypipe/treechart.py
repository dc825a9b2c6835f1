"""The stage chart of a carry-save unit: the tree's dot diagram, rank by rank, then the final
adder, as SVG text built from the plan alone.

Bit columns run across (most significant on the left) and clock edges down, as in the stage
chart of the other units (`chart.py`).  At the top the dot matrix the unit adds (the partial
products, or the operands' bits) is drawn as hollow dots; below it, each register rank of
the tree as the dots it holds, one per register bit, the r-th dot of each column in row r;
then the final adder's registers (stage, skew, deskew, prefix ... words, as bars over their
bits), the finished low result bits waiting beside it, and `valid` at the side.  Every
register element is a `rect` of class `reg` carrying `data-kind`, `data-name`,
`data-families`, `data-bits`, `data-edge` and `data-count` (the register bits it stands
for), so the elements of one kind add up to the plan's count, like the other chart; each
stage is a `rect` of class `slice` behind its row with the other chart's data attributes, and
the root carries the same ones too, so one script reads every chart (docs/chart.md).  Units
wider than 96 result bits are grouped into bands of columns (and the chart says so).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from html import escape

from . import report
from .header import plural
from .svg import (FAINT, FONT, INK, MARGIN, MIN_WIDTH, REGISTER_COLOURS, SLOW, Svg,
                  measured_basis, num, register_table, slowest, stage_block, thousands)
from .svg import band as bands

MAX_COLUMNS = 96
GRID_WIDTH, GUTTER = 900, 150


def svg(plan, said, measured: Mapping[int, float] | None = None,
        measured_source: str = "") -> str:
    """The stage chart of a `TreePlan` or `NativePlan` (see the module docstring); `said`:
    its words (`chart.words`): what the rows show and what each register kind holds."""
    slow, slow_text = slowest(plan, measured)
    c = plan.config
    width = plan.result_width
    band = bands(width, MAX_COLUMNS)
    columns = math.ceil(width / band)
    cw = min(28.0, max(7.0, GRID_WIDTH / columns))
    x0 = MARGIN + GUTTER
    side_x = x0 + columns * cw + 14
    bits_x = side_x + cw + 56  # right edge of each row's register-bit count
    page_w = max(MIN_WIDTH, math.ceil(bits_x + MARGIN))
    out = Svg()

    def col_x(k: int) -> float:
        return x0 + (columns - 1 - k // band) * cw

    y = MARGIN + 16
    out.text(MARGIN, y, f"{c.name} — stage chart", size=18, weight="bold")
    room = page_w - 2 * MARGIN
    y = out.paragraph(MARGIN, y + 20, f"{report.unit_phrase(plan)}; "
                      f"{plural(len(plan.stages), 'stage')}; latency "
                      f"{plural(plan.latency, 'cycle')}", 12, room, 15)
    y = out.paragraph(MARGIN, y + 17, "Result bits across (most significant on the left), "
                      f"clock edges down: {said.block}.", 11, room, 14, fill=FAINT)
    if band > 1:
        y = out.paragraph(MARGIN, y + 16, "Grouped into bands to stay readable: one column = "
                          f"{band} bits (a dot stands for the register bits of its row in those "
                          "columns).", 11, room, 14, fill=SLOW, weight="bold", data_role="banding")
    y += 24
    for j in range(columns):
        if j % max(1, math.ceil(30 / cw)) == 0 or j == columns - 1:
            out.text(col_x(j * band) + cw / 2, y, str(j * band), size=9, anchor="middle",
                     fill=FAINT, data_role="tick", data_bit=j * band)
    out.text(MARGIN, y, "bit", size=10, fill=FAINT)
    y += 10

    tree = getattr(plan, "tree", None)
    if tree is not None:  # the matrix the unit adds, before any register
        heights = [0] * columns
        for leaf in tree.matrix.leaves:
            heights[leaf.column // band] += 1
        y = _dots(out, x0, y, cw, [math.ceil(h / band) for h in heights],
                  f"matrix: {plural(len(tree.matrix.leaves), 'dot')}")

    stage_of_edge = {plan.edge(s.index): s for s in plan.stages}
    for edge in range(1, plan.latency + 1):
        words = [w for w in plan.words if w.edge == edge]
        top, at = y, len(out.parts)
        s = stage_of_edge.get(edge)
        if s is not None:
            figure = (f" · {num(measured[s.index])} ns" if measured and s.index in measured
                      else f" · delay {s.delay}" if plan.timed else "")
            hot = s.index in slow
            out.text(MARGIN, y + 12, f"stage {s.index}{figure}", size=10,
                     fill=SLOW if hot else INK, weight="bold" if hot else None,
                     data_role="stage-label", data_stage=s.index)
        out.text(MARGIN, y + 25, f"edge {edge}", size=10, fill=FAINT)
        tree_words = [w for w in words if w.kind == "tree"]
        if tree_words:
            y = _rank(out, y, cw, band, tree_words, col_x)
        others = [w for w in words if w.kind not in ("tree", "control")]
        families = sorted({w.family for w in others}, key=lambda f: (f.startswith(("row",)), f))
        row_h = 10.0
        for slot, fam in enumerate(families):
            for w in (w for w in others if w.family == fam):
                _bar(out, w, y + 2 + slot * row_h, row_h - 2, col_x, cw)
        y += max(30.0, len(families) * row_h + 6) if not tree_words else 6
        for w in (w for w in words if w.kind == "control"):
            out.add("rect", x=side_x, y=top + 4, width=cw, height=8.0,
                    fill=REGISTER_COLOURS["control"],
                    class_="reg", data_kind="control", data_name=w.family,
                    data_families=w.family, data_bits="0:0", data_edge=w.edge,
                    data_count=w.width)
        if s is not None:  # behind the row's registers: drawn first
            block = Svg()
            _stage_block(block, s, s.index in slow, tree is not None and s.delay == 0,
                         plan.timed, col_x, cw, top, y - top)
            out.parts[at:at] = block.parts
        loaded = plan.bits_loaded.get(edge, 0)
        out.text(bits_x, top + 12, thousands(loaded), size=9.5, anchor="end",
                 fill=FAINT, data_role="row-bits", data_edge=edge, data_count=loaded)
        out.add("line", x1=float(x0), y1=y, x2=x0 + columns * cw, y2=y, stroke="#ececec",
                stroke_width=0.6)
        y += 4
    y += 16
    out.text(MARGIN, y, f"outputs ready after edge {plan.latency}", size=10, fill=FAINT)
    y += 26
    y = _legend(out, plan, said.meanings, y, page_w)
    out.text(MARGIN, y, slow_text, size=12, weight="bold", fill=SLOW if slow else INK,
             data_role="slowest")
    y += 16
    basis = (measured_basis(plan, measured, measured_source) if measured else
             f"Stage delays: {report.DELAY_MODEL}; a full adder is one XOR pair."
             if plan.timed else "")
    if basis:
        out.text(MARGIN, y, basis, size=10, fill=FAINT)
    height = math.ceil(y + MARGIN)
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{page_w}" height="{height}" '
            f'viewBox="0 0 {page_w} {height}" font-family="{FONT}" '
            f'data-latency="{plan.latency}" data-bit-band="{band}" data-edge-band="1" '
            f'data-mode="{escape(plan.mode)}" data-unit="{escape(plan.unit.name)}" '
            f'data-width="{width}" data-stages="{len(plan.stages)}">')
    title = f"<title>{escape(c.name)}: stage chart</title>"
    background = f'<rect x="0" y="0" width="{page_w}" height="{height}" fill="#ffffff"/>'
    return "\n".join([head, title, background, *out.parts, "</svg>"]) + "\n"


def _stage_block(out, s, hot: bool, idle: bool, timed: bool, col_x, cw, y, h) -> None:
    """Stage `s` as a block over its bits and its register row (the same element and data
    attributes as a slice block of the other chart); `idle`: a rank without logic."""
    (fill, stroke, _), data = stage_block([s], hot, idle, timed)
    idle = idle and not hot
    left, right = col_x(s.msb), col_x(s.lsb) + cw
    out.add("rect", x=left + 0.5, y=y + 1.0, width=max(1.0, right - left - 1.0),
            height=max(1.0, h - 2.0), rx=3.0, fill=fill, fill_opacity=0.6, stroke=stroke,
            stroke_width=1.6 if hot else 0.6, stroke_dasharray="4 3" if idle else None,
            **data)


def _dots(out, x0, y, cw, heights: list[int], label: str) -> float:
    """The matrix's dots as hollow circles (they are logic, not registers), `heights[j]` in
    column j."""
    size = min(cw * 0.8, 9.0)
    out.text(MARGIN, y + 12, label, size=10, fill=FAINT)
    for j, tall in enumerate(heights):
        x = x0 + (len(heights) - 1 - j) * cw + (cw - size) / 2
        for r in range(tall):
            out.add("circle", cx=x + size / 2, cy=y + 4 + r * (size + 1) + size / 2,
                    r=size / 2 - 0.5, fill="none", stroke=REGISTER_COLOURS["tree"],
                    stroke_width=0.8,
                    class_="dot", data_column=j)
    return y + 8 + max(heights, default=0) * (size + 1)


def _rank(out, y, cw, band, words, col_x) -> float:
    """One tree rank: a dot per register bit (or per band of columns), row r at depth r."""
    size = min(cw * 0.8, 9.0)
    rows = 0
    cells: dict[tuple[int, int], list] = {}
    for w in words:
        row = int(w.family[3:].split("_")[0])
        rows = max(rows, row + 1)
        for k in range(w.lsb, w.lsb + w.width):
            cells.setdefault((k // band, row), []).append((k, w))
    for (j, row), found in sorted(cells.items()):
        lo, hi = min(k for k, _ in found), max(k for k, _ in found)
        w = found[0][1]
        x = col_x(j * band) + (cw - size) / 2
        out.add("rect", x=x, y=y + 4 + row * (size + 1), width=size, height=size,
                rx=size / 2, fill=REGISTER_COLOURS["tree"], class_="reg", data_kind="tree",
                data_name=w.family, data_families=w.family, data_bits=f"{hi}:{lo}",
                data_edge=w.edge, data_count=len(found))
    return y + 8 + rows * (size + 1)


def _bar(out, w, y, h, col_x, cw) -> None:
    """A register word of the final adder (or the input register) over its bits."""
    lo, hi = w.lsb, w.lsb + w.width - 1
    left = col_x(hi)
    right = col_x(lo) + cw
    out.add("rect", x=left + 0.5, y=y, width=max(0.6, right - left - 1.0), height=h,
            fill=REGISTER_COLOURS.get(w.kind, "#7a7a7a"), class_="reg", data_kind=w.kind,
            data_name=w.family, data_families=w.family, data_bits=f"{hi}:{lo}",
            data_edge=w.edge, data_count=w.width)


def _legend(out, plan, meanings: Mapping[str, str], y, page_w: float) -> float:
    kinds = [k for k, bits in plan.registers.as_dict().items() if k != "total" and bits]
    return register_table(out, plan, kinds, lambda k: REGISTER_COLOURS.get(k, "#7a7a7a"),
                          meanings, y, page_w) + 40
