"""SVG text for the charts: one element writer (attribute names and numbers formatted in one
place, text escaped) and the inks both charts draw with."""

from __future__ import annotations

import math
from collections.abc import Mapping
from html import escape

from .header import plural, stage_list

SLOW, INK, FAINT = "#d62728", "#222222", "#8c8c8c"
REGISTER_COLOURS = {"input": "#5b7db1", "tree": "#d0762c", "skew": "#e69a28",
                    "stage": "#2a8c6a", "deskew": "#8a63c2", "control": "#c73a6f",
                    "prefix": "#3a9fc0", "result": "#9bb83a", "wire": "#b07c4f"}
MARGIN, MIN_WIDTH = 24, 820  # page margin and least page width, in px
BLOCK = ("#e3f1ec", "#2a8c6a", "#17553f")  # a stage's logic: fill, outline, text
SLOW_BLOCK = ("#fde4e1", SLOW, SLOW)
IDLE_BLOCK = ("#ffffff", "#9aa9a3", "#5d6b66")  # a stage without logic (a wire rank)
FONT = "DejaVu Sans, Lato, Helvetica, Arial, sans-serif"


def stage_block(group, hot: bool, idle: bool, timed: bool = True
                ) -> tuple[tuple[str, str, str], dict]:
    """The colours (fill, outline, text) and the data attributes of the block drawn for
    one stage or a run of stages (`group`) in either chart, the same for every unit kind:
    `hot` the slowest, `idle` a rank without logic, `timed` false when the plan has no
    unit-gate delays (no `data-delay` then)."""
    first, last = group[0], group[-1]
    levels = sorted({k for s in group for k in getattr(s, "levels", ())})
    logic = "; ".join(s.logic for s in group if getattr(s, "logic", ""))
    data = dict(class_="slice",
                data_stage=str(first.index) if len(group) == 1 else f"{first.index}–{last.index}",
                data_bits=f"{max(s.msb for s in group)}:{min(s.lsb for s in group)}",
                data_slowest="1" if hot else "0",
                data_delay=max(s.delay for s in group) if timed else None,
                data_logic=logic or None,
                data_levels=" ".join(map(str, levels)) if levels else None)
    return (SLOW_BLOCK if hot else IDLE_BLOCK if idle else BLOCK), data


CHAR = 0.55  # average glyph width of the font, in ems, for fitting labels


def text_width(text: str, size: float) -> float:
    return len(text) * size * CHAR


def text_fits(text: str, size: float, room: float) -> bool:
    return text_width(text, size) <= room


def wrap(text: str, size: float, room: float) -> list[str]:
    """`text` broken at spaces into lines that fit `room` px."""
    lines: list[str] = []
    for word in text.split(" "):
        if lines and text_fits(f"{lines[-1]} {word}", size, room):
            lines[-1] += f" {word}"
        else:
            lines.append(word)
    return lines


def band(count: int, limit: int) -> int:
    """The smallest power of two that groups `count` items into at most `limit` bands."""
    size = 1
    while math.ceil(count / size) > limit:
        size *= 2
    return size


def thousands(n: int) -> str:
    return f"{n:,}".replace(",", " ")


def register_table(out: "Svg", plan, kinds, colour, meanings: Mapping[str, str], y: float,
                   width: float, before_total: float = 0) -> float:
    """Both charts' table of register bits: a swatch, the kind, its bits and what it holds
    (wrapped to the page `width`) for each of `kinds`, then the total and the latency;
    returns the y of the total's line."""
    regs = plan.registers.as_dict()
    out.text(MARGIN, y, "Register bits by kind", size=13, weight="bold")
    y += 8
    for kind in kinds:
        out.add("rect", x=float(MARGIN), y=float(y), width=14.0, height=12.0,
                fill=colour(kind), class_="key", data_kind=kind)
        out.text(MARGIN + 20, y + 10, kind, size=11, weight="bold")
        out.text(MARGIN + 140, y + 10, thousands(regs[kind]), size=11, anchor="end",
                 data_role="bits", data_kind=kind)
        meaning = meanings.get(kind, f"register of kind '{kind}'")
        for i, line in enumerate(wrap(meaning, 11, width - 2 * MARGIN - 150)):
            out.text(MARGIN + 150, y + 10 + 14 * i, line, size=11, fill="#444444",
                     data_role="meaning" if i == 0 else None)
            y += 14 if i else 0
        y += 20
    y += before_total
    out.text(MARGIN + 20, y + 10, "total", size=11, weight="bold")
    out.text(MARGIN + 140, y + 10, thousands(regs["total"]), size=11, anchor="end",
             weight="bold", data_role="total")
    out.text(MARGIN + 150, y + 10, f"register bits; latency {plural(plan.latency, 'cycle')}",
             size=11)
    return y


def slowest(plan, measured: Mapping[int, float] | None) -> tuple[set[int], str]:
    """Indices of the slowest stage(s) to highlight and the sentence that names them all
    (both charts), by the `measured` figures when given (checked), else the plan's delays."""
    check_measured(plan, measured)
    if not measured and not plan.timed:
        return set(), "No stage delays: synthesis chooses the logic."
    if measured:
        top = max(measured.values())
        slow = {i for i, v in measured.items() if v == top}
        figure, basis = f"{num(top)} ns", "measured"
    else:
        top = plan.slowest[0].delay
        slow = {s.index for s in plan.slowest}
        figure, basis = f"delay {top}", "unit-gate model"
    if len(plan.stages) == 1:
        return set(), f"One stage: {figure} ({basis})."
    if len(slow) == len(plan.stages):
        return set(), f"All {len(slow)} stages tie at {figure} ({basis}): no single slowest."
    if len(slow) == 1:
        return slow, f"Slowest: stage {next(iter(slow))} at {figure} ({basis}), highlighted."
    return slow, (f"Slowest: {len(slow)} of {len(plan.stages)} stages tie at {figure} "
                  f"({basis}), highlighted: stages {stage_list(slow)}.")


def measured_basis(plan, measured: Mapping[int, float], source: str) -> str:
    """A chart's footnote when stages carry measured figures (both charts): which stages
    have one, and what the others show."""
    where = f" ({source})" if source else ""
    if len(measured) == len(plan.stages):
        return (f"Stage figures measured{where}: worst register-to-register delay inside "
                "each stage, in ns.")
    rest = "their unit-gate delay" if plan.timed else "no figure"
    return (f"Measured{where}: the worst register-to-register delay, in ns, of "
            f"{'stage' if len(measured) == 1 else 'stages'} {stage_list(sorted(measured))}; "
            f"the other stages show {rest}.")


def check_measured(plan, measured) -> None:
    if measured is None:
        return
    stages = {s.index for s in plan.stages}
    for key, value in measured.items():
        if key not in stages:
            raise ValueError(f"measured figure for stage {key!r}: the plan has stages "
                             f"0..{len(plan.stages) - 1}")
        if (isinstance(value, bool) or not isinstance(value, (int, float))
                or not math.isfinite(value) or value < 0):
            raise ValueError(f"measured figure for stage {key}: {value!r} is not a "
                             "non-negative number of ns")


def num(value: float) -> str:
    """A coordinate or figure with at most two decimals and no trailing zeros."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text == "-0" else text


class Svg:
    """An ordered list of SVG elements with attribute formatting in one place."""

    def __init__(self):
        self.parts: list[str] = []

    def add(self, tag: str, body: str | None = None, **attrs) -> None:
        items = []
        for key, value in attrs.items():
            if value is None:
                continue
            key = key.rstrip("_").replace("_", "-")
            shown = num(value) if isinstance(value, float) else str(value)
            items.append(f'{key}="{escape(shown, quote=True)}"')
        head = f"<{tag} {' '.join(items)}" if items else f"<{tag}"
        self.parts.append(f"{head}/>" if body is None else f"{head}>{escape(body)}</{tag}>")

    def text(self, x, y, body, size=11.0, anchor="start", fill=INK, weight=None, **attrs):
        self.add("text", body, x=float(x), y=float(y), font_size=float(size),
                 text_anchor=anchor, fill=fill, font_weight=weight, **attrs)

    def paragraph(self, x, y, body, size, room, step, **attrs) -> float:
        """`body` wrapped to `room` px, a line every `step` px from baseline y; returns the
        last line's baseline."""
        for k, line in enumerate(wrap(body, size, room)):
            self.text(x, y + k * step, line, size=size, **attrs)
        return y + k * step
