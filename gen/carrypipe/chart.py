"""The stage chart: every register of a plan drawn as an SVG picture, built as plain text.

Bit positions run across (most significant on the left, as numbers are written) and clock
cycles run down.  Each time band is a logic lane (the adder slices computing in that cycle,
the carry handed from one slice to the next) above a register row (every register bit
loaded at the following rising edge), so the input-skew triangle, the staircase of stage
registers and the output-deskew triangle can be seen at once.  `valid` runs in a lane of its
own beside the data.

The chart reads only generic plan data: `plan.words` (kind, name, bit range, loading edge),
`plan.slices`, `plan.latency`, `plan.registers` and the slice delays, so a register kind it
does not know gets a neutral colour and a legend entry of its own.  Wide or deep units are
grouped into bands of bits and of edges (and the chart says so); every drawn register
element carries `data-kind`, `data-name`, `data-bits`, `data-edge` and `data-count` (the
register bits it stands for), so the elements of one kind add up to the plan's count.

Pure string building, no HDL: the same plan gives the same bytes.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from html import escape

from . import report, treechart
from .plan import Plan
from .treeplan import NativePlan, TreePlan

KINDS = ("input", "skew", "stage", "deskew", "control", "prefix", "result", "wire")
COLOURS = {"input": "#5b7db1", "skew": "#e69a28", "stage": "#2a8c6a", "deskew": "#8a63c2",
           "control": "#c73a6f", "prefix": "#3a9fc0", "result": "#9bb83a", "wire": "#b07c4f"}
EXTRA_COLOURS = ("#7a7a7a", "#a39a2c", "#2b9fb3", "#9c5b3b")  # kinds the chart does not know
MEANINGS = {
    "input": "input register: a, b (and cin) as they arrive",
    "skew": "input skew: operand bits waiting for their slice",
    "stage": "stage register: a slice's sum bits and carry",
    "deskew": "output deskew: result bits waiting for the upper slices",
    "control": "valid bit, delayed like the data",
    "prefix": "prefix terms: group generate/propagate between levels",
    "result": "result bits on their way to the output",
    "wire": "wire-pipelining copies of long-span terms",
}
SLOW = "#d62728"
INK, FAINT, PAPER = "#222222", "#8c8c8c", "#ffffff"
FONT = "DejaVu Sans, Lato, Helvetica, Arial, sans-serif"

MAX_COLUMNS = 72  # bit columns drawn one bit each; wider units are grouped into bands
MAX_ROWS = 48  # time bands drawn one edge each; deeper pipelines are grouped into bands
GRID_WIDTH, GRID_HEIGHT = 920, 720  # about the space the grid may take, in px
GUTTER, MARGIN, LANE_GAP = 96, 24, 14
MIN_WIDTH = 820


def _band(count: int, limit: int) -> int:
    """The smallest power of two that groups `count` items into at most `limit` bands."""
    size = 1
    while math.ceil(count / size) > limit:
        size *= 2
    return size


def _num(value: float) -> str:
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text == "-0" else text


def _family(name: str) -> str:
    """A word's family: its name without trailing numbers (a_skew_3 -> a_skew, g_2_16 -> g)."""
    return re.sub(r"(_\d+)+$", "", name)


def _span(lo: int, hi: int, sep: str = ":") -> str:
    return str(lo) if lo == hi else f"{hi}{sep}{lo}"


def _thousands(n: int) -> str:
    return f"{n:,}".replace(",", " ")


def _text_fits(text: str, size: float, room: float) -> bool:
    return len(text) * size * 0.6 <= room


class _Svg:
    """An ordered list of SVG elements with attribute formatting in one place."""

    def __init__(self):
        self.parts: list[str] = []

    def add(self, tag: str, body: str | None = None, **attrs) -> None:
        items = []
        for key, value in attrs.items():
            if value is None:
                continue
            key = key.rstrip("_").replace("_", "-")
            shown = _num(value) if isinstance(value, float) else str(value)
            items.append(f'{key}="{escape(shown, quote=True)}"')
        head = f"<{tag} {' '.join(items)}" if items else f"<{tag}"
        self.parts.append(f"{head}/>" if body is None else f"{head}>{escape(body)}</{tag}>")

    def text(self, x, y, body, size=11.0, anchor="start", fill=INK, weight=None, **attrs):
        self.add("text", body, x=float(x), y=float(y), font_size=float(size),
                 text_anchor=anchor, fill=fill, font_weight=weight, **attrs)


class _Layout:
    """Where bits, lanes and time bands go on the page."""

    def __init__(self, plan: Plan):
        data = [w for w in plan.words if w.kind != "control" and w.width > 0]
        self.top = max([plan.width, *(w.lsb + w.width for w in data)])
        self.bit_band = _band(self.top, MAX_COLUMNS)
        self.columns = math.ceil(self.top / self.bit_band)
        self.edges = max([plan.latency, *(w.edge for w in plan.words)])
        self.edge_band = _band(self.edges, MAX_ROWS)
        self.rows = math.ceil(self.edges / self.edge_band)
        self.side = any(w.kind == "control" for w in plan.words)
        self.cw = min(64.0, max(12.0, GRID_WIDTH / self.columns))
        band_h = min(60.0, max(15.0, GRID_HEIGHT / self.rows))
        self.rh = round(band_h * 0.45, 2)  # register row
        self.lh = round(band_h - self.rh, 2)  # logic lane
        self.x0 = MARGIN + GUTTER
        self.grid_w = self.columns * self.cw
        self.side_x = self.x0 + self.grid_w + LANE_GAP
        right = self.side_x + (self.cw + 34 if self.side else 0)
        self.width = max(MIN_WIDTH, math.ceil(right + MARGIN))

    def column_bits(self, j: int) -> tuple[int, int]:
        lo = j * self.bit_band
        return lo, min(self.top, lo + self.bit_band) - 1

    def _bit_x(self, bit: int) -> tuple[float, float]:
        """Left and right x of one bit: its band's column, split evenly among the band's bits."""
        j = bit // self.bit_band
        first, last = self.column_bits(j)
        each = self.cw / (last - first + 1)
        left = self.x0 + (self.columns - 1 - j) * self.cw + (last - bit) * each
        return left, left + each

    def x_of(self, lo: int, hi: int) -> tuple[float, float]:
        """Left x and width of bits lo..hi (MSB on the left)."""
        left, right = self._bit_x(hi)[0], self._bit_x(lo)[1]
        return left, right - left

    def band_edges(self, t: int) -> tuple[int, int]:
        first = t * self.edge_band + 1
        return first, min(self.edges, first + self.edge_band - 1)


def _colours(plan: Plan) -> dict[str, str]:
    kinds = ({w.kind for w in plan.words} | set(plan.registers.as_dict())) - {"total"}
    extra = sorted(kinds - set(KINDS))
    return {**COLOURS, **{k: EXTRA_COLOURS[i % len(EXTRA_COLOURS)] for i, k in enumerate(extra)}}


def _kind_order(kind: str) -> tuple[int, str]:
    return (KINDS.index(kind), "") if kind in KINDS else (len(KINDS), kind)


def _register_groups(plan: Plan, lay: _Layout) -> dict:
    """(time band, lane column, kind, family) -> [count, lowest bit, highest bit, edges].

    A family is a word's name without its stage number when each row is one edge, and the
    kind when rows are banded.
    """
    groups: dict = {}
    if lay.edge_band == 1:  # one row per edge: each word family (a_skew, b_skew, ...) apart
        def family(w):
            return _family(w.name)
    else:  # several edges per row: one element per kind, or the cells become slivers
        def family(w):
            return w.kind
    for w in plan.words:
        if w.width <= 0:
            continue
        t = (w.edge - 1) // lay.edge_band
        if w.kind == "control":
            parts = [("side", w.lsb, w.lsb + w.width - 1)]
        else:
            msb = w.lsb + w.width - 1
            parts = []
            for j in range(w.lsb // lay.bit_band, msb // lay.bit_band + 1):
                first, last = lay.column_bits(j)
                parts.append((j, max(first, w.lsb), min(last, msb)))
        for column, lo, hi in parts:
            key = (t, column, w.kind, family(w))
            entry = groups.setdefault(key, [0, lo, hi, set()])
            entry[0] += hi - lo + 1
            entry[1], entry[2] = min(entry[1], lo), max(entry[2], hi)
            entry[3].add(w.edge)
    return groups


def _slowest(plan: Plan, measured: Mapping[int, float] | None) -> tuple[set[int], str]:
    """Indices of the slowest stage(s) and the sentence that names them."""
    if measured:
        top = max(measured.values())
        slow = {i for i, v in measured.items() if v == top}
        figure, basis = f"{_num(top)} ns", "measured"
    else:
        top = plan.slowest[0].delay
        slow = {s.index for s in plan.slowest}
        figure, basis = f"delay {top}", "unit-gate model"
    if len(plan.slices) == 1:
        return set(), f"One stage: {figure} ({basis})."
    if len(slow) == len(plan.slices):
        return set(), f"All {len(slow)} stages tie at {figure} ({basis}): no single slowest."
    names = ", ".join(str(i) for i in sorted(slow)[:8]) + (", ..." if len(slow) > 8 else "")
    if len(slow) == 1:
        return slow, f"Slowest: stage {names} at {figure} ({basis}), highlighted."
    return slow, (f"Slowest: {len(slow)} of {len(plan.slices)} stages tie at {figure} "
                  f"({basis}), highlighted: stages {names}.")


def _check_measured(plan: Plan, measured) -> None:
    if measured is None:
        return
    stages = {s.index for s in plan.slices}
    for key, value in measured.items():
        if key not in stages:
            raise ValueError(f"measured figure for stage {key!r}: the plan has stages "
                             f"0..{len(plan.slices) - 1}")
        if (isinstance(value, bool) or not isinstance(value, (int, float))
                or not math.isfinite(value) or value < 0):
            raise ValueError(f"measured figure for stage {key}: {value!r} is not a "
                             "non-negative number of ns")


def svg(plan: Plan, measured: Mapping[int, float] | None = None,
        measured_source: str = "") -> str:
    """The stage chart of `plan` as SVG text.

    `measured` (optional) maps a stage index to its measured register-to-register delay in
    ns (for example the worst path that place-and-route reports inside that stage); when it
    is given the slowest stage is chosen by it, stage labels show it, and `measured_source`
    (e.g. "nextpnr, ECP5-85F") is named beside it.  Without it the unit-gate model decides.
    """
    if isinstance(plan, (TreePlan, NativePlan)):  # a carry-save unit: its dot diagram
        return treechart.svg(plan, measured, measured_source)
    _check_measured(plan, measured)
    lay = _Layout(plan)
    colours = _colours(plan)
    slow, slow_text = _slowest(plan, measured)
    c, regs = plan.config, plan.registers.as_dict()
    out = _Svg()

    # Title and what the picture shows.
    y = MARGIN + 16
    out.text(MARGIN, y, f"{c.name} — stage chart", size=18, weight="bold")
    y += 20
    out.text(MARGIN, y, f"{report.unit_phrase(plan)}; cell {c.cell}; {len(plan.slices)} "
             f"stage(s); latency {plan.latency} cycle(s)", size=12)
    y += 17
    out.text(MARGIN, y, "Bits across (most significant on the left), clock cycles down: "
             "each band is the logic of one cycle above the registers its edge loads.",
             size=11, fill=FAINT)
    notes = []
    if lay.bit_band > 1:
        notes.append(f"one column = {lay.bit_band} bits")
    if lay.edge_band > 1:
        notes.append(f"one row = {lay.edge_band} clock edges (shade = how full the cell is)")
    if notes:
        y += 16
        out.text(MARGIN, y, f"Grouped into bands to stay readable: {'; '.join(notes)}.",
                 size=11, fill=SLOW, weight="bold", data_role="banding")

    # Bit numbers along the top.
    y += 26
    step = max(1, math.ceil(34 / lay.cw))
    if lay.bit_band == 1 and step > 1:
        step = 1 << (step - 1).bit_length()  # label every 2nd/4th/8th bit
    for j in range(lay.columns):
        if j % step and j != lay.columns - 1:
            continue
        if j == lay.columns - 2 and step > 1 and (j + 1) % step:
            continue  # keep the top label clear of its neighbour
        lo, hi = lay.column_bits(j)
        left, w = lay.x_of(lo, hi)
        out.text(left + w / 2, y, str(hi if lay.bit_band > 1 and j == lay.columns - 1 else lo),
                 size=10, anchor="middle", fill=FAINT)
    out.text(MARGIN, y, "bit", size=10, fill=FAINT)
    if lay.side:
        out.text(lay.side_x + lay.cw / 2, y, "valid", size=10, anchor="middle", fill=FAINT)

    # Operands arriving.
    y += 8
    left, w = lay.x_of(0, plan.width - 1)
    _io_strip(out, lay, left, w, y, "inputs", f"{_port_list(plan, 'input')} applied before "
              "edge 1", ("#eef2f8", "#b7c4da", "#3f5a86"))
    y += 20
    grid_top = y

    # Slice boundaries, so each triangle's steps line up with the slice that causes them.
    band_h = lay.lh + lay.rh
    grid_bottom = grid_top + lay.rows * band_h
    if len(plan.slices) <= MAX_COLUMNS:
        for s in plan.slices[1:]:
            if s.lsb % lay.bit_band == 0 or lay.bit_band == 1:
                bx = lay.x_of(s.lsb, s.lsb)[0] + lay.x_of(s.lsb, s.lsb)[1]
                out.add("line", x1=bx, y1=float(grid_top), x2=bx, y2=float(grid_bottom),
                        stroke="#d9d9d9", stroke_width=0.8, stroke_dasharray="3 3")

    # Logic lanes: the slices computing in each cycle, slowest highlighted.
    slices_by_band: dict[int, list] = {}
    for s in plan.slices:
        slices_by_band.setdefault((plan.input_cycles + s.index) // lay.edge_band, []).append(s)
    for t in range(lay.rows):
        ly = grid_top + t * band_h
        first, last = lay.band_edges(t)
        label = f"cycle {first - 1}" if first == last else f"cycles {first - 1}–{last - 1}"
        if lay.lh >= 12:
            out.text(MARGIN, ly + lay.lh / 2 + 4, label, size=10, fill=FAINT)
        for group in _runs(slices_by_band.get(t, [])):
            _slice_block(out, lay, group, ly, slow, measured)
        rows_y = ly + lay.lh
        label = f"edge {first}" if first == last else f"edges {first}–{last}"
        out.text(MARGIN, rows_y + lay.rh / 2 + 4, label, size=10, weight="bold")
        out.add("line", x1=float(lay.x0), y1=rows_y + lay.rh, x2=lay.x0 + lay.grid_w,
                y2=rows_y + lay.rh, stroke="#ececec", stroke_width=0.6)

    # Carry hand-off: the carry register of slice i feeds slice i+1 in the next cycle (only
    # where the next stage starts above this one: stages spanning every bit hand off none).
    if lay.edge_band == 1:
        for s, nxt in zip(plan.slices, plan.slices[1:]):
            if nxt.lsb == s.msb + 1:
                _carry_arrow(out, lay, grid_top, plan.input_cycles + s.index, s, nxt)

    # Register cells.
    groups = _register_groups(plan, lay)
    squares: dict = {}
    for (t, column, kind, fam) in groups:
        squares.setdefault((t, column), []).append((_kind_order(kind), fam, kind))
    for key in sorted(groups, key=lambda k: (k[0], str(k[1]), _kind_order(k[2]), k[3])):
        t, column, kind, fam = key
        count, lo, hi, edges = groups[key]
        slots = sorted(squares[(t, column)])
        slot = slots.index((_kind_order(kind), fam, kind))
        ry = grid_top + t * band_h + lay.lh + 1
        sub = (lay.rh - 2) / len(slots)
        if column == "side":
            x, w = lay.side_x, lay.cw
        else:
            x, w = lay.x_of(lo, hi)
        first, last = lay.band_edges(t)
        span_bits = hi - lo + 1
        fullness = min(1.0, count / (span_bits * (last - first + 1)))
        out.add("rect", x=x + 0.5, y=ry + slot * sub + 0.3, width=max(0.6, w - 1.0),
                height=max(0.6, sub - 0.6), fill=colours[kind],
                fill_opacity=round(0.25 + 0.75 * fullness, 2) if fullness < 1 else None,
                class_="reg", data_kind=kind, data_name=fam, data_bits=f"{hi}:{lo}",
                data_edge=_span(min(edges), max(edges)), data_count=count)

    # valid travelling beside the data.
    if lay.side:
        vx = lay.side_x + lay.cw / 2
        out.add("line", x1=vx, y1=float(grid_top - 4), x2=vx, y2=float(grid_bottom),
                stroke=COLOURS["control"], stroke_width=1.0, stroke_opacity=0.5)

    # Results leaving.
    y = grid_bottom + 4
    left, w = lay.x_of(0, plan.width - 1)
    _io_strip(out, lay, left, w, y, "outputs", f"{_port_list(plan, 'output')} ready after "
              f"edge {plan.latency}", ("#eef6f2", "#b5d6c8", "#1f6b50"))
    y += 44

    y = _legend(out, plan, lay, colours, regs, y, slow_text, measured, measured_source)
    height = math.ceil(y + MARGIN)
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{lay.width}" height="{height}" '
            f'viewBox="0 0 {lay.width} {height}" font-family="{FONT}" '
            f'data-latency="{plan.latency}" data-bit-band="{lay.bit_band}" '
            f'data-edge-band="{lay.edge_band}">')
    title = f"<title>{escape(c.name)}: stage chart</title>"
    background = f'<rect x="0" y="0" width="{lay.width}" height="{height}" fill="{PAPER}"/>'
    return "\n".join([head, title, background, *out.parts, "</svg>"]) + "\n"


def _port_list(plan: Plan, direction: str) -> str:
    """The data ports of one side, wide ones with their range: `a, b [63:0] + cin`."""
    skip = ("clk", "rst", "en", "in_valid", "out_valid")
    ports = [p for p in plan.ports if p.direction == direction and p.name not in skip]
    wide = [p.name for p in ports if p.width > 1]
    narrow = [p.name for p in ports if p.width == 1]
    text = f"{', '.join(wide)} [{plan.width - 1}:0]" if wide else ""
    return " + ".join(x for x in [text, *narrow] if x)


def _runs(slices: list) -> list[list]:
    """Slices of one time band, grouped when the band holds more than one cycle."""
    return [[s] for s in slices] if len({s.index for s in slices}) <= 1 else [slices]


def _io_strip(out: _Svg, lay: _Layout, left: float, w: float, y: float, label: str,
              text: str, colours: tuple[str, str, str]) -> None:
    """The strip above or below the grid where operands arrive or results leave."""
    fill, stroke, ink = colours
    out.add("rect", x=left, y=float(y), width=w, height=16.0, fill=fill, stroke=stroke,
            stroke_width=0.8)
    if _text_fits(text, 10, w - 6):
        out.text(left + w / 2, y + 12, text, size=10, anchor="middle", fill=ink)
    out.text(MARGIN, y + 12, label, size=10, fill=FAINT)
    if lay.side:
        out.add("rect", x=lay.side_x, y=float(y), width=lay.cw, height=16.0, fill="#f8eef2",
                stroke="#dab7c4", stroke_width=0.8)


def _slice_block(out: _Svg, lay: _Layout, group: list, ly: float, slow: set[int], measured):
    lo = min(s.lsb for s in group)
    hi = max(s.msb for s in group)
    x, w = lay.x_of(lo, hi)
    is_slow = any(s.index in slow for s in group)
    pad = min(4.0, lay.lh * 0.15)
    h = lay.lh - 2 * pad
    first, last = group[0], group[-1]
    stages = _span(first.index, last.index, "–") if len(group) > 1 else str(first.index)
    stages = "–".join(reversed(stages.split("–")))
    out.add("rect", x=x + 1.0, y=ly + pad, width=max(1.0, w - 2.0), height=h, rx=3.0,
            fill="#fde4e1" if is_slow else "#e3f1ec", stroke=SLOW if is_slow else "#2a8c6a",
            stroke_width=2.2 if is_slow else 1.0, class_="slice", data_stage=stages,
            data_bits=f"{hi}:{lo}", data_slowest="1" if is_slow else "0")
    size = min(11.0, max(8.0, h * 0.55))
    s = first
    figure = (f"{_num(measured[s.index])} ns" if measured and s.index in measured
              else f"delay {s.delay}")
    tail = " · slowest" if is_slow else ""
    labels = (f"stage {s.index} · bits {s.msb}:{s.lsb} · {figure}{tail}",
              f"stage {s.index} · {figure}{tail}", f"{s.index} · {figure}", str(s.index))
    if len(group) > 1:
        labels = (f"stages {first.index}–{last.index}", f"{first.index}–{last.index}")
    for label in labels:
        if _text_fits(label, size, w - 8) and h >= 9:
            out.text(x + w / 2, ly + pad + h / 2 + size * 0.36, label, size=size,
                     anchor="middle", fill=SLOW if is_slow else "#17553f",
                     weight="bold" if is_slow else None)
            break


def _carry_arrow(out: _Svg, lay: _Layout, grid_top: float, cycle: int, s, nxt):
    """From the carry register (edge cycle+1, bit nxt.lsb) down into the next slice."""
    x, w = lay.x_of(nxt.lsb, nxt.lsb)
    cx = x + w / 2 if lay.bit_band == 1 else x + w - 3
    band_h = lay.lh + lay.rh
    y1 = grid_top + cycle * band_h + lay.lh + lay.rh - 1
    y2 = grid_top + (cycle + 1) * band_h + min(4.0, lay.lh * 0.15)
    out.add("line", x1=cx, y1=y1, x2=cx, y2=y2 - 4, stroke=INK, stroke_width=1.4,
            class_="carry", data_from=s.index, data_to=nxt.index)
    out.add("path", d=f"M{_num(cx - 3.5)},{_num(y2 - 5)} L{_num(cx + 3.5)},{_num(y2 - 5)} "
            f"L{_num(cx)},{_num(y2)} Z", fill=INK)


def _legend(out: _Svg, plan: Plan, lay: _Layout, colours, regs, y, slow_text, measured,
            source) -> float:
    out.text(MARGIN, y, "Register bits by kind", size=13, weight="bold")
    kinds = [k for k in regs if k != "total"]
    kinds += sorted({w.kind for w in plan.words} - set(kinds), key=_kind_order)
    drawn: dict[str, int] = {}
    for w in plan.words:
        drawn[w.kind] = drawn.get(w.kind, 0) + max(0, w.width)
    y += 8
    per_row = 2 if lay.width >= 1100 else 1
    col_w = (lay.width - 2 * MARGIN) / per_row
    for i, kind in enumerate(kinds):
        x = MARGIN + (i % per_row) * col_w
        row_y = y + (i // per_row) * 20
        out.add("rect", x=float(x), y=float(row_y), width=14.0, height=12.0,
                fill=colours[kind], class_="key", data_kind=kind)
        bits = regs.get(kind, drawn.get(kind, 0))
        meaning = MEANINGS.get(kind, f"register of kind '{kind}'")
        out.text(x + 20, row_y + 10, kind, size=11, weight="bold")
        out.text(x + 140, row_y + 10, _thousands(bits), size=11, anchor="end",
                 data_role="bits", data_kind=kind)
        out.text(x + 150, row_y + 10, meaning, size=11, fill="#444444")
    y += math.ceil(len(kinds) / per_row) * 20 + 4
    out.text(MARGIN + 20, y + 10, "total", size=11, weight="bold")
    out.text(MARGIN + 140, y + 10, _thousands(regs["total"]), size=11, anchor="end",
             weight="bold", data_role="total")
    out.text(MARGIN + 150, y + 10, f"register bits; latency {plan.latency} cycle(s)", size=11)
    y += 28

    x = MARGIN
    out.add("rect", x=float(x), y=float(y), width=22.0, height=12.0, rx=3.0, fill="#e3f1ec",
            stroke="#2a8c6a", stroke_width=1.0)
    out.text(x + 28, y + 10, "adder slice: its logic in one cycle", size=11)
    x += 240
    out.add("rect", x=float(x), y=float(y), width=22.0, height=12.0, rx=3.0, fill="#fde4e1",
            stroke=SLOW, stroke_width=2.2)
    out.text(x + 28, y + 10, "slowest stage", size=11)
    x += 130
    out.add("line", x1=float(x + 10), y1=float(y - 1), x2=float(x + 10), y2=float(y + 9),
            stroke=INK, stroke_width=1.4)
    out.add("path", d=f"M{x + 6},{y + 8} L{x + 14},{y + 8} L{x + 10},{y + 13} Z", fill=INK)
    out.text(x + 22, y + 10, "carry handed to the next slice", size=11)
    y += 34
    out.text(MARGIN, y, slow_text, size=12, weight="bold", fill=SLOW, data_role="slowest")
    y += 16
    if measured:
        basis = f"Stage figures measured{f' ({source})' if source else ''}: worst register-" \
                "to-register delay inside each stage, in ns."
    else:
        basis = f"Stage delays: {report.DELAY_MODEL}; logic only, not a placed design."
    out.text(MARGIN, y, basis, size=10, fill=FAINT)
    return y
