"""The stage chart: every register of a plan drawn as an SVG picture, built as plain text.

Bit positions run across (most significant on the left, as numbers are written) and clock
cycles run down.  Each time band is a logic lane (the slices or the prefix stage computing in
that cycle, with what they hold) above a register row (every register bit loaded at the
following rising edge).  In slices the input-skew triangle, the staircase of stage registers
and the output-deskew triangle show at once, with the chain handed from slice to slice; in
the prefix modes each register row shows which kinds of terms its rank holds and over which
bits (shaded by the bits each position keeps where that tells the structure).  The bit carried out of the top (`cout`,
`bout`, a comparator's verdicts) has a column of its own left of the data; one-bit flags
that travel with the operands (`sub`, `clear`) and `valid` have lanes of their own right of
it, and `en` is drawn once, beside the register rows it holds.

The chart reads only plan data: `plan.words` (kind, family, bit range, loading edge),
`plan.stages`, `plan.unit`, `plan.ports`, `plan.registers` and the stage delays; the words
it uses for each mode and unit kind come from `words`.  A register kind it does not know
gets a neutral colour and a legend entry of its own, and the legend lists only the kinds the
unit has.  Wide or deep units are grouped into bands of bits and of edges (and the chart
says so); every drawn register element carries `data-kind`, `data-families`, `data-bits`,
`data-edge` and `data-count` (the register bits it stands for), so the elements of one kind
add up to the plan's count.

Pure string building, no HDL: the same plan gives the same bytes.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from functools import singledispatch
from html import escape

from . import positions, prefix, report, treechart
from .svg import (BLOCK, FAINT, FONT, IDLE_BLOCK, INK, MARGIN, MIN_WIDTH, REGISTER_COLOURS,
                  SLOW, SLOW_BLOCK, Svg, band, check_measured, measured_basis, num,
                  register_table, slowest, stage_block, text_fits, text_width, thousands, wrap)
from .header import bit_span, bits, plural, reset_clause
from .plan import Plan, PrefixPlan, SlicedPlan
from .treeplan import NativePlan, TreePlan

KINDS = ("input", "skew", "stage", "deskew", "control", "prefix", "result", "wire")
COLOURS = {k: REGISTER_COLOURS[k] for k in KINDS}
EXTRA_COLOURS = ("#7a7a7a", "#a39a2c", "#2b9fb3", "#9c5b3b")  # kinds the chart does not know
PAPER = "#ffffff"
CALM = "#3f5a86"  # notes that inform (banding), not warn
ENABLE = "#56606b"

MAX_COLUMNS = 72  # bit columns drawn one bit each; wider units are grouped into bands
MAX_ROWS = 48  # time bands drawn one edge each; deeper pipelines are grouped into bands
GRID_WIDTH, GRID_HEIGHT = 920, 720  # about the space the grid may take, in px
GUTTER, LANE_GAP, OUT_GAP = 96, 14, 6
LANE_WIDTH = 34  # least width of a side lane, so its name fits above it
MIN_GRID = 320  # least width of the grid, in px


# ---- what the chart says: words for each pipeline mode and unit kind ----

@dataclass(frozen=True)
class Words:
    """The chart's words for one plan: what a stage block is (in a carry-save unit's chart,
    what its rows show), what the hand-off arrow carries ("" when the stages hand nothing
    on), what each register kind holds, and the structure in a few words for the
    subtitle."""

    block: str
    handoff: str
    meanings: dict
    structure: str


CHAINS = {"carry": "carries"}  # plurals that are not the noun + s


def _input_names(plan: Plan) -> str:
    return ", ".join(p.name for p in plan.operand_inputs())


def _top_outputs(plan: Plan) -> list[str]:
    """The one-bit result ports besides the result word: what the column left of the top
    bit holds."""
    return [p.name for p in plan.ports if p.direction == "output" and p.width == 1
            and p.name not in ("out_valid", plan.unit.result)]


def _common(plan: Plan) -> dict:
    return {"input": f"input register: {_input_names(plan)} as they arrive",
            "control": f"valid bit, delayed like the data{reset_clause(plan)}"}


@singledispatch
def words(plan) -> Words:
    """The words of a plan of a mode the chart does not know: generic ones."""
    return Words("stage: its logic in one cycle", "", _common(plan),
                 plural(len(plan.stages), "stage"))


@words.register
def _(plan: SlicedPlan) -> Words:
    kind, c = plan.unit, plan.config
    chain = " and ".join(kind.chain)
    top = ", ".join(_top_outputs(plan))
    if len(plan.stages) == 1:  # the stage register is the output register
        held = (f"the running total {kind.result} (read back with the next input)"
                if kind.keeps_result else f"the {kind.result} bits" if kind.result else "")
        stage = "stage register: " + " and ".join(x for x in (held, top) if x)
        top = ""
    elif kind.result is None:
        stage = f"stage registers: {chain} of the bits so far, handed from slice to slice"
    elif kind.keeps_result:
        stage = (f"stage registers: each slice's bits of the running total {kind.result} (it "
                 f"reads them back with the next input) and the {chain} it hands on")
    else:
        stage = f"stage registers: each slice's {kind.result} bits and the {chain} it hands on"
    if top:
        stage += f"; {top} at the top"
    flags = "".join(f" and the {t} flag" for t in kind.travellers)
    common = _common(plan)
    meanings = {"input": common["input"],
                "skew": f"input skew: {', '.join(kind.operands)} bits{flags} waiting for "
                        "their slice",
                "stage": stage}
    if kind.result:
        meanings["deskew"] = (f"output deskew: finished {kind.result} bits waiting for the "
                              "upper slices")
    meanings["control"] = common["control"]
    keeps = ", keeping its bits of the total" if kind.keeps_result else ""
    return Words(f"{kind.noun} slice: {kind.verb} its bits in one cycle{keeps}",
                 f"{chain} handed to the next slice" if len(plan.stages) > 1 else "",
                 meanings, f"{c.cell} cells in {plural(len(plan.stages), 'slice')}")


@singledispatch
def _position_words(pos, plan: PrefixPlan) -> tuple[str, str, str]:
    """What the prefix ranks hold, what the result ranks hold, and the structure, by what a
    position is (one of the `positions` types)."""
    raise TypeError(f"no chart words for {type(pos).__name__}")


@_position_words.register
def _(pos: positions.Bits, plan: PrefixPlan) -> tuple[str, str, str]:
    kind, c = plan.unit, plan.config
    chain, result = kind.chain[0], kind.result
    terms = (f"prefix terms: {chain} generate/propagate of bits and groups, each kept "
             "until its last use")
    finished = f"finished {result} bits, waiting for the output register"
    if c.carry_increment:
        finished += (f"; in local blocks, {result} bits for the block's carry-in 0, "
                     "waiting for that carry")
    local = (f" (in local blocks of {c.local_width} bits first)"
             if prefix.has_local_blocks(c.local_width, plan.width) else "")
    return terms, finished, f"a {c.cell} prefix network over {plural(plan.width, 'bit')}{local}"


@_position_words.register
def _(pos: positions.Blocks, plan: PrefixPlan) -> tuple[str, str, str]:
    kind, c = plan.unit, plan.config
    chain, result = kind.chain[0], kind.result
    terms = (f"block {CHAINS.get(chain, chain + 's')}: each block's {chain} out for "
             f"{chain}-in 0 and 1, then of the groups of blocks")
    finished = (f"block {result}s for {chain}-in 0 and 1, then the selected {result} "
                "bits, waiting for the output register")
    return terms, finished, (f"{plural(len(plan.schedule.widths), 'block')} of "
                             f"{plural(c.block_width, 'bit')}, a {c.cell} network over the "
                             "blocks")


@_position_words.register
def _(pos: positions.Slices, plan: PrefixPlan) -> tuple[str, str, str]:
    terms = ("slice verdicts: a < b and a <= b of each slice, then of the groups of "
             "slices the tree has joined")
    return terms, "verdicts on their way to the output register", (
        f"{plural(len(plan.schedule.widths), 'slice')} ({plan.config.cell} cells) compared "
        "in parallel, a tree over their verdicts")


@words.register
def _(plan: PrefixPlan) -> Words:
    kind, result, w = plan.unit, plan.unit.result, plan.width
    outputs = ([f"{result} [{w - 1}:0]"] if result else []) + _top_outputs(plan)
    terms, finished, structure = _position_words(plan.schedule.positions, plan)
    common = _common(plan)
    meanings = {"input": common["input"], "prefix": terms,
                "wire": "wire copies: far operands of the longest-span levels, each in a "
                        "register of its own (no logic)",
                "result": finished,
                "skew": f"the {' and '.join(kind.travellers)} flag, travelling with the terms "
                        "to the last stage",
                "stage": "output register: " + ", ".join(outputs),
                "control": common["control"]}
    return Words("stage: its logic in one cycle, across all bits", "", meanings,
                 f"{structure}, {plural(len(plan.stages), 'stage')}")


@words.register
def _(plan: TreePlan) -> Words:
    """A carry-save unit's kinds: its tree ranks, then its final adder's kinds in the words
    of that adder's own mode, and the result bits the tree finished (`<result>_low`)."""
    common = _common(plan)
    meanings = {"input": common["input"],
                "tree": "tree ranks: the dots left after each stage's counters, by column"}
    result, r = plan.unit.result, plan.rows
    if plan.adder is not None:
        for kind, text in words(plan.numbered_adder).meanings.items():
            if kind not in meanings and kind != "control":
                meanings[kind] = "final adder: " + text
        # Its own words number its bits from 0 and name its carry out `cout`: the unit's.
        top = f"; its carry out is {result} [{r.top}]" if r.carry_out else ""
        meanings["stage"] = "final adder: " + _adder_stage(plan.adder, result, r, top)
    if plan.low_columns:
        finished = f"{result} bits the tree finished, waiting for the final adder"
        meanings["deskew"] = (meanings["deskew"] + "; " + finished if "deskew" in meanings
                              else "output deskew: " + finished)
    meanings["control"] = common["control"]
    then = ", then the final adder's registers" if plan.adder is not None else ""
    return Words(f"the dots each tree rank holds{then}", "", meanings, plan.structure())


@words.register
def _(plan: NativePlan) -> Words:
    common = _common(plan)
    return Words(f"the {plan.unit.result} as synthesis forms it, then the ranks after it",
                 "", {"input": common["input"], "stage": f"result ranks: the {plan.unit.result} "
                      "and the ranks after it, for the tools to retime into",
                      "control": common["control"]}, plan.structure())


@singledispatch
def _stage_text(plan, stage) -> str:
    """What a stage block holds, after its number: bits, or its logic."""
    return bit_span(stage.lsb, stage.msb)


@_stage_text.register
def _(plan: PrefixPlan, stage) -> str:
    return stage.logic


@singledispatch
def _runs(plan) -> bool:
    """Whether ranks are drawn as runs of each kind, not term by term: a prefix plan's."""
    return False


@_runs.register
def _(plan: PrefixPlan) -> bool:
    return True


def _shaded_runs(plan: PrefixPlan, bit_band: int) -> bool:
    """Runs shade by how full they are where one cell stands for many bits of a prefix rank,
    or where a rank's terms per position tell the structure: a block's two candidate sums
    before its select, two carries before its group reaches bit 0 (per bit, in `levels`,
    they would only flicker)."""
    return bit_band > 1 or plan.schedule.positions.shaded


@singledispatch
def _adder_stage(adder, result: str, rows, top: str) -> str:
    """What a carry-save unit's final adder holds in its `stage` registers."""
    return f"output register: {result} [{rows.top - (0 if rows.carry_out else 1)}:{rows.low}]"


@_adder_stage.register
def _(adder: SlicedPlan, result: str, rows, top: str) -> str:
    return f"stage registers: each slice's {result} bits and the carry it hands on{top}"


@singledispatch
def _boundaries(plan) -> list[int]:
    """Bit positions where a stage (slice) starts: ticks and guide lines fall there."""
    return sorted({s.lsb for s in plan.stages if 0 < s.lsb < plan.width})


@_boundaries.register
def _(plan: PrefixPlan) -> list[int]:
    sch = plan.schedule
    return sch.positions.boundaries(plan.config, sch.lsbs)


def _lane(plan: Plan, w) -> str | None:
    """The side lane of a word: `valid`, or a one-bit flag travelling with the operands."""
    if w.kind == "control":
        return "valid"
    for flag in plan.unit.travellers:
        if w.width == 1 and w.family in (flag, f"{flag}_in", f"{flag}_skew"):
            return flag
    return None


# ---- layout ----

class _Layout:
    """Where bits, lanes and time bands go on the page.

    Data bits 0 .. W-1 take `columns` columns (MSB on the left); bits at W and above (the
    chain carried out of the top) take a column of their own, left of the data and apart
    from it; side lanes (flags, valid) and the enable follow right of the data."""

    def __init__(self, plan: Plan):
        self.w = plan.width
        grid = [x for x in plan.words if x.width > 0 and _lane(plan, x) is None]
        self.top = max([self.w, *(x.lsb + x.width for x in grid)])
        self.out = self.top > self.w
        self.bit_band = band(self.w, MAX_COLUMNS)
        self.columns = math.ceil(self.w / self.bit_band)
        self.edges = max([plan.latency, *(x.edge for x in plan.words)])
        self.edge_band = band(self.edges, MAX_ROWS)
        self.rows = math.ceil(self.edges / self.edge_band)
        # Columns of 12 to 64 px, wider for the few columns of a unit of a few bits, so
        # that its stage labels fit.
        count = self.columns + self.out
        self.cw = max(min(64.0, max(12.0, GRID_WIDTH / count)), MIN_GRID / count)
        band_h = min(60.0, max(15.0, GRID_HEIGHT / self.rows))
        self.rh = round(band_h * 0.45, 2)  # register row
        self.lh = round(band_h - self.rh, 2)  # logic lane
        # Cells shade by how full they are where one cell stands for many edges, or as
        # `_runs` says.
        self.runs = _runs(plan)
        self.shaded = self.edge_band > 1 or self.runs and _shaded_runs(plan, self.bit_band)
        self.x0 = MARGIN + GUTTER
        self.data_x0 = self.x0 + (self.cw + OUT_GAP if self.out else 0)
        self.grid_w = self.columns * self.cw
        self.grid_right = self.data_x0 + self.grid_w
        order = [*plan.unit.travellers, "valid"]
        present = {_lane(plan, x) for x in plan.words} - {None}
        self.lanes = [name for name in order if name in present]
        self.lane_w = max(self.cw, LANE_WIDTH)
        self.lane_x = {name: self.grid_right + LANE_GAP + i * (self.lane_w + 6)
                       for i, name in enumerate(self.lanes)}
        right = self.grid_right + (LANE_GAP + len(self.lanes) * (self.lane_w + 6) - 6
                                   if self.lanes else 0)
        self.enable_x = right + LANE_GAP + 4 if plan.port("en") else None
        if self.enable_x is not None:
            right = self.enable_x + 12
        self.bits_x = right + LANE_GAP + 52  # right edge of each row's count of bits
        self.width = max(MIN_WIDTH, math.ceil(self.bits_x + MARGIN))

    def column_of(self, bit: int) -> int:
        return self.columns if bit >= self.w else bit // self.bit_band

    def column_bits(self, j: int) -> tuple[int, int]:
        if j == self.columns:
            return self.w, self.top - 1
        lo = j * self.bit_band
        return lo, min(self.w, lo + self.bit_band) - 1

    def _bit_x(self, bit: int) -> tuple[float, float]:
        """Left and right x of one bit: its column, split evenly among the column's bits."""
        j = self.column_of(bit)
        first, last = self.column_bits(j)
        each = self.cw / (last - first + 1)
        base = self.x0 if j == self.columns else self.data_x0 + (self.columns - 1 - j) * self.cw
        left = base + (last - bit) * each
        return left, left + each

    def centre(self, bit: int) -> float:
        left, right = self._bit_x(bit)
        return (left + right) / 2

    def x_of(self, lo: int, hi: int) -> tuple[float, float]:
        """Left x and width of bits lo..hi (MSB on the left; both on one side of W)."""
        left, right = self._bit_x(hi)[0], self._bit_x(lo)[1]
        return left, right - left

    def band_edges(self, t: int) -> tuple[int, int]:
        first = t * self.edge_band + 1
        return first, min(self.edges, first + self.edge_band - 1)


def _colours(plan: Plan) -> dict[str, str]:
    kinds = set(plan.registers.as_dict()) - {"total"}  # every word's kind is counted there
    extra = sorted(kinds - set(KINDS))
    return {**COLOURS, **{k: EXTRA_COLOURS[i % len(EXTRA_COLOURS)] for i, k in enumerate(extra)}}


def _kind_order(kind: str) -> tuple[int, str]:
    return (KINDS.index(kind), "") if kind in KINDS else (len(KINDS), kind)


# ---- register cells ----

@dataclass
class _Cell:
    """One drawn register element: bits lo..hi of one kind in one row and column (or run of
    columns, or side lane)."""

    row: int
    column: object  # a data column, or a side lane's name
    kind: str
    tag: str  # what tells it apart from its neighbours in the row: a family, or the kind
    lo: int
    hi: int
    count: int = 0
    edges: set = field(default_factory=set)
    families: set = field(default_factory=set)
    last_column: int | None = None  # the last column of a run of columns
    per: Fraction | None = None  # register bits per column of a run

    def density(self, lay: _Layout) -> Fraction:
        """Register bits per bit position and edge."""
        first, last = lay.band_edges(self.row)
        return Fraction(self.count, (self.hi - self.lo + 1) * (last - first + 1))


def _cells(plan: Plan, lay: _Layout) -> list[_Cell]:
    """Every drawn register element.

    In slices each word family (a_skew, b_skew, ...) gets a strip of its own in each column
    of each row, so the triangles show bit by bit; when rows hold several edges, one strip
    per kind.  In the prefix modes a row holds one strip per kind, in runs of adjacent
    columns that keep the same bits per position, so the structure shows instead of every
    term."""
    by_family = lay.edge_band == 1 and not lay.runs
    groups: dict = {}
    for w in plan.words:
        if w.width <= 0:
            continue
        row = (w.edge - 1) // lay.edge_band
        lane = _lane(plan, w)
        if lane is not None:
            parts = [(lane, w.lsb, w.lsb + w.width - 1)]
        else:
            msb = w.lsb + w.width - 1
            parts = []
            for j in range(lay.column_of(w.lsb), lay.column_of(msb) + 1):
                first, last = lay.column_bits(j)
                parts.append((j, max(first, w.lsb), min(last, msb)))
        tag = w.family if by_family else w.kind
        for column, lo, hi in parts:
            cell = groups.setdefault((row, column, w.kind, tag),
                                     _Cell(row, column, w.kind, tag, lo, hi))
            cell.count += hi - lo + 1
            cell.lo, cell.hi = min(cell.lo, lo), max(cell.hi, hi)
            cell.edges.add(w.edge)
            cell.families.add(w.family)
    cells = list(groups.values())
    return _join_runs(cells, lay) if lay.runs else cells


def _join_runs(cells: list[_Cell], lay: _Layout) -> list[_Cell]:
    """Adjacent data columns of one row and kind merged into runs (never across the
    carry-out column's gap): every such column when cells are not shaded, so a run shows
    where the rank holds terms of the kind; only columns of equal bits per position when
    they are, so that each run has one shade."""
    out: list[_Cell] = []
    data = sorted((c for c in cells if isinstance(c.column, int) and c.column < lay.columns),
                  key=lambda c: (c.row, _kind_order(c.kind), c.column))
    for c in data:
        first, last = lay.column_bits(c.column)
        per = Fraction(c.count, last - first + 1)
        prev = out[-1] if out else None
        same = not lay.shaded or prev is not None and prev.per == per
        if (prev is not None and (prev.row, prev.kind) == (c.row, c.kind) and same
                and prev.last_column == c.column - 1):
            prev.hi, prev.count, prev.last_column = c.hi, prev.count + c.count, c.column
            prev.edges |= c.edges
            prev.families |= c.families
        else:
            c.last_column, c.per = c.column, per
            out.append(c)
    joined = {id(c) for c in data}
    return out + [c for c in cells if id(c) not in joined]


# ---- the picture ----

@singledispatch
def svg(plan: Plan, measured: Mapping[int, float] | None = None,
        measured_source: str = "") -> str:
    """The stage chart of `plan` as SVG text.

    `measured` (optional) maps a stage index to its measured register-to-register delay in
    ns (for example the worst path that place-and-route reports inside that stage); when it
    is given the slowest stage is chosen by it, stage labels show it, and `measured_source`
    (e.g. "nextpnr, ECP5-85F") is named beside it.  Without it the unit-gate model decides.
    """
    check_measured(plan, measured)
    lay = _Layout(plan)
    said = words(plan)
    colours = _colours(plan)
    slow, slow_text = slowest(plan, measured)
    c = plan.config
    out = Svg()

    # Title and what the picture shows.
    y = MARGIN + 16
    out.text(MARGIN, y, f"{c.name} — stage chart", size=18, weight="bold")
    latency = plural(plan.latency, "cycle")
    if c.register_inputs:
        latency += " (with the input register)"
    room = lay.width - 2 * MARGIN
    y = out.paragraph(MARGIN, y + 20, f"{report.unit_phrase(plan)}; {said.structure}; "
                      f"latency {latency}", 12, room, 20, data_role="subtitle")
    shade = "; darker = more register bits per bit position" if lay.shaded else ""
    y = out.paragraph(MARGIN, y + 17, "Bits across (most significant on the left), clock "
                      "cycles down: each band is the logic of one cycle above the registers its "
                      f"edge loads{shade}.", 11, room, 14, fill=FAINT)
    notes = []
    if lay.bit_band > 1:
        notes.append(f"one column = {lay.bit_band} bits")
    if lay.edge_band > 1:
        notes.append(f"one row = {lay.edge_band} clock edges")
    if notes:
        y += 16
        out.text(MARGIN, y, f"Grouped into bands to stay readable: {'; '.join(notes)}.",
                 size=11, fill=CALM, data_role="banding")

    y += 26
    _axis(out, plan, lay, y)

    # Operands arriving.
    y += 8
    left, w = lay.x_of(0, plan.width - 1)
    _io_strip(out, lay, left, w, y, "inputs", _port_list(plan, "input"),
              " applied before edge 1", ("#eef2f8", "#b7c4da", "#3f5a86"))
    y += 20
    grid_top = y
    band_h = lay.lh + lay.rh
    grid_bottom = grid_top + lay.rows * band_h

    # Slice (block) boundaries, so each triangle's steps line up with the slice that causes
    # them.
    marks = _boundaries(plan)
    if len(marks) < MAX_COLUMNS:
        for b in marks:
            bx = lay.x_of(b, b)[0] + lay.x_of(b, b)[1]
            out.add("line", x1=bx, y1=float(grid_top), x2=bx, y2=float(grid_bottom),
                    stroke="#d9d9d9", stroke_width=0.8, stroke_dasharray="3 3",
                    class_="boundary", data_bit=b)

    # Logic lanes: what computes in each cycle, the slowest highlighted.
    by_band: dict[int, list] = {}
    for s in plan.stages:
        by_band.setdefault((plan.edge(s.index) - 1) // lay.edge_band, []).append(s)
    blocks = [(t, group) for t in range(lay.rows) for group in _groups(by_band.get(t, []))]
    labels = _block_labels(plan, lay, blocks, slow, measured)
    for t in range(lay.rows):
        ly = grid_top + t * band_h
        first, last = lay.band_edges(t)
        label = f"cycle {first - 1}" if first == last else f"cycles {first - 1}–{last - 1}"
        if lay.lh >= 12:
            out.text(MARGIN, ly + lay.lh / 2 + 4, label, size=10, fill=FAINT)
        rows_y = ly + lay.lh
        label = f"edge {first}" if first == last else f"edges {first}–{last}"
        out.text(MARGIN, rows_y + lay.rh / 2 + 4, label, size=10, weight="bold")
        out.add("line", x1=float(lay.x0), y1=rows_y + lay.rh, x2=lay.grid_right,
                y2=rows_y + lay.rh, stroke="#ececec", stroke_width=0.6)
    for (t, group), label in zip(blocks, labels):
        _stage_block(out, lay, group, grid_top + t * band_h, slow, label)
    if plan.input_cycles and lay.edge_band == 1 and lay.lh >= 12:
        x, w = lay.x_of(0, plan.width - 1)
        out.text(x + w / 2, grid_top + lay.lh / 2 + 4, "no logic: the input register loads "
                 "at edge 1", size=10, anchor="middle", fill=FAINT, font_style="italic")

    # Hand-off: the chain register of slice i feeds slice i+1 in the next cycle (only where
    # the next stage starts above this one: stages spanning every bit hand off none).
    if lay.edge_band == 1 and said.handoff:
        for s, nxt in zip(plan.stages, plan.stages[1:]):
            if nxt.lsb == s.msb + 1:
                _handoff_arrow(out, plan, lay, grid_top, plan.edge(s.index) - 1, s, nxt)

    _register_cells(out, plan, lay, colours, grid_top)
    loaded: dict[int, int] = {}
    for edge, count in plan.bits_loaded.items():
        t = (edge - 1) // lay.edge_band
        loaded[t] = loaded.get(t, 0) + count
    for t, count in sorted(loaded.items()):
        first, last = lay.band_edges(t)
        out.text(lay.bits_x, grid_top + t * band_h + lay.lh + lay.rh / 2 + 3.5,
                 thousands(count), size=9.5, anchor="end", fill=FAINT, data_role="row-bits",
                 data_edge=bits(first, last), data_count=count)

    # valid and the flags travelling beside the data; en beside the rows it holds.
    for name, x in lay.lane_x.items():
        colour = COLOURS["control"] if name == "valid" else COLOURS["skew"]
        vx = x + lay.lane_w / 2
        out.add("line", x1=vx, y1=float(grid_top - 4), x2=vx, y2=float(grid_bottom),
                stroke=colour, stroke_width=1.0, stroke_opacity=0.5)
    if lay.enable_x is not None:
        _enable(out, lay, grid_top)

    # Results leaving.
    y = grid_bottom + 4
    left = lay.x0 if lay.out else lay.data_x0
    _io_strip(out, lay, left, lay.grid_right - left, y, "outputs", _port_list(plan, "output"),
              f" ready after edge {plan.latency}", ("#eef6f2", "#b5d6c8", "#1f6b50"))
    y += 44

    y = _legend(out, plan, lay, said, colours, y, slow, slow_text, measured, measured_source)
    height = math.ceil(y + MARGIN)
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{lay.width}" height="{height}" '
            f'viewBox="0 0 {lay.width} {height}" font-family="{FONT}" '
            f'data-latency="{plan.latency}" data-bit-band="{lay.bit_band}" '
            f'data-edge-band="{lay.edge_band}" data-mode="{escape(plan.mode)}" '
            f'data-unit="{escape(plan.unit.name)}" data-width="{plan.width}" '
            f'data-stages="{len(plan.stages)}">')
    title = f"<title>{escape(c.name)}: stage chart</title>"
    background = f'<rect x="0" y="0" width="{lay.width}" height="{height}" fill="{PAPER}"/>'
    return "\n".join([head, title, background, *out.parts, "</svg>"]) + "\n"


@svg.register(TreePlan)
@svg.register(NativePlan)
def _(plan, measured: Mapping[int, float] | None = None, measured_source: str = "") -> str:
    """A carry-save unit's chart: its dot diagram (`treechart`)."""
    return treechart.svg(plan, words(plan), measured, measured_source)


def _axis(out: Svg, plan: Plan, lay: _Layout, y: float) -> None:
    """Bit numbers along the top at slice (or block) boundaries, the carry-out column's
    name, and the side lanes' names."""
    out.text(MARGIN, y, "bit", size=10, fill=FAINT)
    w, size = plan.width, 10
    for b in _ticks(plan, lay, size):  # inside the data columns, clear of the carry-out one
        half = text_width(str(b), size) / 2
        x, anchor = lay.centre(b), "middle"
        if x - half < lay.data_x0:
            x, anchor = lay.data_x0, "start"
        elif x + half > lay.grid_right:
            x, anchor = lay.grid_right, "end"
        out.text(x, y, str(b), size=size, anchor=anchor, fill=FAINT, data_role="tick",
                 data_bit=b)
    if lay.out:
        name = "/".join(_top_outputs(plan)) or "carry"
        x, cw = lay.x_of(w, lay.top - 1)
        fits = text_fits(name, size, cw)
        out.text(x + cw / 2 if fits else x + cw, y, name, size=size,
                 anchor="middle" if fits else "end", fill=INK, data_role="out-column",
                 data_bit=w)
    for name, x in lay.lane_x.items():
        out.text(x + lay.lane_w / 2, y, name, size=size, anchor="middle", fill=FAINT,
                 data_role="lane")
    if lay.enable_x is not None:
        out.text(lay.enable_x, y, "en", size=size, anchor="middle", fill=ENABLE,
                 data_role="lane")
    out.text(lay.bits_x, y, "bits", size=size, anchor="end", fill=FAINT)


def _ticks(plan: Plan, lay: _Layout, size: float) -> list[int]:
    """The bits numbered on the axis: 0, the top bit, and every k-th slice (or block)
    boundary, k the least power of two that keeps the numbers apart (without boundaries,
    every k-th bit)."""
    w = plan.width

    def apart(a, b):
        room = (text_width(str(a), size) + text_width(str(b), size)) / 2 + 10
        return abs(lay.centre(a) - lay.centre(b)) >= room

    step = 4 if w > 16 else 1  # without boundaries: multiples of a power of two
    marks = _boundaries(plan) or list(range(step, w, step))
    k = 1
    while True:
        picked = [0, *marks[k - 1::k]]
        if all(apart(a, b) for a, b in zip(picked, picked[1:])):
            break
        k *= 2
    if w - 1 not in picked:
        while len(picked) > 1 and not apart(picked[-1], w - 1):
            picked.pop()
        if apart(picked[-1], w - 1):
            picked.append(w - 1)
    return picked


def _register_cells(out: Svg, plan: Plan, lay: _Layout, colours, grid_top: float) -> None:
    cells = _cells(plan, lay)

    def shared(cell):
        """What a cell shares its strips with: its row (prefix ranks), or its column."""
        return (cell.row, "data") if lay.runs and isinstance(cell.column, int) else \
            (cell.row, cell.column)

    slots: dict = {}
    for cell in cells:
        slots.setdefault(shared(cell), set()).add((_kind_order(cell.kind), cell.tag))
    def densest(chosen) -> dict[str, Fraction]:
        out: dict[str, Fraction] = {}
        for cell in chosen:
            out[cell.kind] = max(out.get(cell.kind, Fraction(0)), cell.density(lay))
        return out

    # Full is the densest cell of a kind over the data bits (the column above the top bit
    # and the lanes hold a few one-bit registers each, not a rank's share of them).
    full = {**densest(cells), **densest(c for c in cells if c.column in range(lay.columns))}
    band_h = lay.lh + lay.rh
    for cell in sorted(cells, key=lambda k: (k.row, str(k.column), _kind_order(k.kind),
                                             k.tag)):
        key = shared(cell)
        order = sorted(slots[key])
        slot = order.index((_kind_order(cell.kind), cell.tag))
        ry = grid_top + cell.row * band_h + lay.lh + 1
        sub = (lay.rh - 2) / len(order)
        if isinstance(cell.column, str):
            x, w = lay.lane_x[cell.column], lay.lane_w
        else:
            x, w = lay.x_of(cell.lo, cell.hi)
        fullness = min(1, cell.density(lay) / full[cell.kind]) if lay.shaded else 1
        families = sorted(cell.families)
        inset = 0.0 if key[1] == "data" else 0.5  # a rank's runs abut: shade changes only
        out.add("rect", x=x + inset, y=ry + slot * sub + 0.3, width=max(0.6, w - 2 * inset),
                height=max(0.6, sub - 0.6), fill=colours[cell.kind],
                fill_opacity=round(0.3 + 0.7 * float(fullness), 2) if fullness < 1 else None,
                class_="reg", data_kind=cell.kind,
                data_name=families[0] if len(families) == 1 else cell.kind,
                data_families=" ".join(families), data_bits=f"{cell.hi}:{cell.lo}",
                data_edge=bits(min(cell.edges), max(cell.edges)), data_count=cell.count)


def _port_list(plan: Plan, direction: str) -> str:
    """The data ports of one side, wide ones with their range: `a, b [63:0] + cin`."""
    ports = [p for p in plan.ports if p.direction == direction and not p.control
             and p.name not in ("in_valid", "out_valid")]
    wide = [p.name for p in ports if p.width == plan.width]
    narrow = [p.name for p in ports if p.width != plan.width]
    text = f"{', '.join(wide)} [{plan.width - 1}:0]" if wide else ""
    return " + ".join(x for x in [text, *narrow] if x)


def _groups(stages: list) -> list[list]:
    """Stages of one time band, grouped when the band holds more than one cycle."""
    return [[s] for s in stages] if len({s.index for s in stages}) <= 1 else [stages]


def _io_strip(out: Svg, lay: _Layout, left: float, w: float, y: float, label: str,
              ports: str, when: str, colours: tuple[str, str, str]) -> None:
    """The strip above or below the grid where operands arrive or results leave."""
    fill, stroke, ink = colours
    out.add("rect", x=left, y=float(y), width=w, height=16.0, fill=fill, stroke=stroke,
            stroke_width=0.8)
    for shown in (ports + when, ports):  # the ports alone when the strip is narrow
        if text_fits(shown, 10, w - 6):
            out.text(left + w / 2, y + 12, shown, size=10, anchor="middle", fill=ink)
            break
    out.text(MARGIN, y + 12, label, size=10, fill=FAINT)
    for x in lay.lane_x.values():
        out.add("rect", x=x, y=float(y), width=lay.lane_w, height=16.0, fill="#f8eef2",
                stroke="#dab7c4", stroke_width=0.8)


@dataclass(frozen=True)
class _Label:
    text: str
    size: float
    x: float
    anchor: str


def _label_texts(plan: Plan, group: list, measured) -> list[str]:
    """A stage block's label, from the fullest to the shortest form; every form keeps what
    the stage holds (its bits, or its logic)."""
    first, last = group[0], group[-1]
    timed = [s for s in group if measured and s.index in measured]
    worst = max(timed, key=lambda s: measured[s.index]) if timed \
        else max(group, key=lambda s: s.delay)
    figure = (f"{num(measured[worst.index])} ns" if measured and worst.index in measured
              else f"delay {worst.delay}")
    if len(group) == 1:
        name, short, what = f"stage {first.index}", str(first.index), _stage_text(plan, first)
    else:
        lo, hi = min(s.lsb for s in group), max(s.msb for s in group)
        name = f"stages {first.index}–{last.index}"
        short = f"{first.index}–{last.index}"
        what = bit_span(lo, hi)
        figure = f"up to {figure}"
    return [f"{name} · {what} · {figure}", f"{short} · {what} · {figure}", f"{short} · {what}"]


def _place(text: str, size: float, x: float, w: float, lay: _Layout) -> _Label | None:
    """Inside the block when it fits, else beside it in the empty lane (the wider side)."""
    if text_fits(text, size, w - 10):
        return _Label(text, size, x + w / 2, "middle")
    left_room, right_room = x - lay.x0 - 6, lay.grid_right - (x + w) - 6
    if left_room >= right_room and text_fits(text, size, left_room):
        return _Label(text, size, x - 6, "end")
    if text_fits(text, size, right_room):
        return _Label(text, size, x + w + 6, "start")
    return None


def _block_labels(plan: Plan, lay: _Layout, blocks, slow: set[int], measured) -> list:
    """One label per stage block, all in the same form: the fullest form that fits every
    block (inside it, or beside it in its lane), so each says the same things."""
    boxes = []
    for _, group in blocks:
        lo, hi = min(s.lsb for s in group), max(s.msb for s in group)
        boxes.append((group, *lay.x_of(lo, hi)))
    forms = [_label_texts(plan, group, measured) for group, _, _ in boxes]
    for size in (11.0, 9.5):
        for level in range(3):
            placed = [_place(f[level], size, x, w, lay) for f, (_, x, w) in zip(forms, boxes)]
            if all(placed):
                break
        else:
            continue
        break
    labels = []
    few = sum(any(s.index in slow for s in group) for group, _, _ in boxes) <= 3
    for label, (group, x, w) in zip(placed, boxes):
        if label is None:  # nothing fits: the shortest form over the block
            label = _Label(_label_texts(plan, group, measured)[-1], 9.0, x + w / 2,
                           "middle")
        if few and any(s.index in slow for s in group):  # in words too, where there is room
            longer = _place(f"{label.text} · slowest", label.size, x, w, lay)
            if longer is not None and longer.anchor == label.anchor:
                label = longer
        labels.append(label)
    return labels


def _stage_block(out: Svg, lay: _Layout, group: list, ly: float, slow: set[int],
                 label: _Label) -> None:
    lo = min(s.lsb for s in group)
    hi = max(s.msb for s in group)
    x, w = lay.x_of(lo, hi)
    is_slow = any(s.index in slow for s in group)
    idle = all(s.delay == 0 for s in group)
    (fill, stroke, ink), data = stage_block(group, is_slow, idle)
    pad = min(4.0, lay.lh * 0.15)
    h = lay.lh - 2 * pad
    out.add("rect", x=x + 1.0, y=ly + pad, width=max(1.0, w - 2.0), height=h, rx=3.0,
            fill=fill, stroke=stroke, stroke_width=2.2 if is_slow else 1.0,
            stroke_dasharray="4 3" if idle and not is_slow else None, **data)
    size = min(label.size, (h if label.anchor == "middle" else lay.lh) * 0.8)
    if size >= 7:
        out.text(label.x, ly + pad + h / 2 + size * 0.36, label.text, size=size,
                 anchor=label.anchor, fill=ink,
                 weight="bold" if is_slow and label.anchor == "middle" else None,
                 data_role="stage-label", data_stage=data["data_stage"])


def _handoff_arrow(out: Svg, plan: Plan, lay: _Layout, grid_top: float, cycle: int, s, nxt):
    """From the chain register (edge cycle+1, bit nxt.lsb) down into the next slice."""
    x, w = lay.x_of(nxt.lsb, nxt.lsb)
    cx = x + w / 2 if lay.bit_band == 1 else x + w - 3
    band_h = lay.lh + lay.rh
    y1 = grid_top + cycle * band_h + lay.lh + lay.rh - 1
    y2 = grid_top + (cycle + 1) * band_h + min(4.0, lay.lh * 0.15)
    out.add("line", x1=cx, y1=y1, x2=cx, y2=y2 - 4, stroke=INK, stroke_width=1.4,
            class_="carry", data_from=s.index, data_to=nxt.index,
            data_chain=" ".join(plan.unit.chain))
    out.add("path", d=f"M{num(cx - 3.5)},{num(y2 - 5)} L{num(cx + 3.5)},{num(y2 - 5)} "
            f"L{num(cx)},{num(y2)} Z", fill=INK)


def _enable(out: Svg, lay: _Layout, grid_top: float) -> None:
    """`en`, once: a rail beside the grid that touches every register row, where it acts."""
    band_h = lay.lh + lay.rh
    x = lay.enable_x
    top, bottom = grid_top + lay.lh, grid_top + (lay.rows - 1) * band_h + lay.lh + lay.rh
    segments = " ".join(f"M{num(x)},{num(grid_top + t * band_h + lay.lh + 1)} "
                        f"V{num(grid_top + t * band_h + lay.lh + lay.rh - 1)}"
                        for t in range(lay.rows))
    out.add("line", x1=float(x), y1=float(top), x2=float(x), y2=float(bottom), stroke=ENABLE,
            stroke_width=0.8, stroke_opacity=0.6)
    out.add("path", d=segments, stroke=ENABLE, stroke_width=4.0, fill="none",
            class_="enable", data_port="en", data_edges=bits(1, lay.edges))


def _legend(out: Svg, plan: Plan, lay: _Layout, said: Words, colours, y, slow, slow_text,
            measured, source) -> float:
    regs = plan.registers.as_dict()
    order = [*said.meanings, *regs]  # the mode's own order, then any other kind
    kinds = [k for k in dict.fromkeys(order) if k != "total" and regs.get(k, 0) > 0]
    y = register_table(out, plan, kinds, colours.__getitem__, said.meanings, y, lay.width,
                       before_total=4) + 28
    y = _symbols(out, plan, lay, said, y, slow)
    y += 20
    for line in wrap(slow_text, 12, lay.width - 2 * MARGIN):
        out.text(MARGIN, y, line, size=12, weight="bold", fill=SLOW if slow else INK,
                 data_role="slowest")
        y += 16
    if measured:
        basis = measured_basis(plan, measured, source)
    else:
        basis = f"Stage delays: {report.DELAY_MODEL}; logic only, not a placed design."
    out.text(MARGIN, y, basis, size=10, fill=FAINT)
    return y


def _symbols(out: Svg, plan: Plan, lay: _Layout, said: Words, y: float, slow) -> float:
    """The key to the other marks, in a row that wraps: only marks the chart shows."""
    entries = [("block", said.block)]
    if any(s.delay == 0 for s in plan.stages):
        entries.append(("idle", "stage without logic: a register rank only"))
    if slow:
        entries.append(("slow", "slowest stage"))
    if said.handoff and lay.edge_band == 1:
        entries.append(("arrow", said.handoff))
    en = plan.port("en")
    if en is not None:
        entries.append(("enable", f"en: {en.meaning}"))
    x = MARGIN
    for what, text in entries:
        need = 28 + text_width(text, 11) + 22
        if x > MARGIN and x + need > lay.width - MARGIN:
            x, y = MARGIN, y + 20
        if what in ("block", "idle", "slow"):
            fill, stroke, _ = {"block": BLOCK, "idle": IDLE_BLOCK, "slow": SLOW_BLOCK}[what]
            out.add("rect", x=float(x), y=float(y), width=22.0, height=12.0, rx=3.0, fill=fill,
                    stroke=stroke, stroke_width=2.2 if what == "slow" else 1.0,
                    stroke_dasharray="4 3" if what == "idle" else None)
        elif what == "arrow":
            out.add("line", x1=float(x + 10), y1=float(y - 1), x2=float(x + 10),
                    y2=float(y + 9), stroke=INK, stroke_width=1.4)
            out.add("path", d=f"M{x + 6},{y + 8} L{x + 14},{y + 8} L{x + 10},{y + 13} Z",
                    fill=INK)
        else:
            out.add("line", x1=float(x + 10), y1=float(y - 2), x2=float(x + 10),
                    y2=float(y + 14), stroke=ENABLE, stroke_width=4.0)
        out.text(x + 28, y + 10, text, size=11)
        x += need
    return y + 14
