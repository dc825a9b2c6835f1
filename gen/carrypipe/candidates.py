"""Which splits `fit` tries, in which order, and which one it picks: pure functions.

Candidates are config variants made with the public config API (`config.from_mapping` on a
normalized config), so every candidate is validated like a user's file.  Each pipeline mode
contributes a generator to `GENERATORS`; `generate` runs them all and drops duplicates.

Selection rule: among the candidates that meet the target, the least latency; ties go to
fewer register bits, then fewer LUTs.
"""

from __future__ import annotations

import json
import statistics
from dataclasses import dataclass, field

from . import config, harness
from .config import Config
from .plan import Plan

MAX_STAGES = 32  # even splits go from 1 slice up to this many (and down to 2-bit slices)
MARGIN = 0.10  # a prediction this far below the target may still meet it when measured
JUST_MISSED = 0.10  # a measured miss this close to the target gets uneven variants


def balanced(width: int, stages: int) -> tuple[int, ...]:
    """`stages` slice widths summing to `width` that differ by at most one (wider ones first)."""
    full, extra = divmod(width, stages)
    return tuple(full + 1 if i < extra else full for i in range(stages))


def variant(base: Config, **keys) -> Config:
    """`base` with some keys replaced, validated again (keys of the other modes dropped)."""
    data = {k: v for k, v in base.normalized().items()
            if k not in config.MODE_KEYS and k not in ("pipeline", "slices")}
    data.update(keys)
    return config.from_mapping(data, where="candidate")


def slice_candidates(base: Config, cells: tuple[str, ...]) -> list[Config]:
    """Even splits from one slice up to MAX_STAGES slices, slices at least 2 bits wide."""
    top = max(1, min(MAX_STAGES, base.width // 2))
    return [variant(base, cell=cell, slices=list(balanced(base.width, s)))
            for cell in cells for s in range(1, top + 1)]


LEVELS_PER_STAGE = (1, 2, 3)
LOCAL_WIDTH, LOCAL_FROM = 16, 64  # `local_width` tried for units this wide (docs/modes.md)
BLOCK_WIDTHS = (8, 16, 32)


# Prefix styles tried in the prefix modes when `--cells` names none: the two that measured
# fastest in `levels` mode on ECP5-85F at 64 and 256 bits (docs/modes.md).
DEFAULT_PREFIX_STYLES = ("kogge-stone", "han-carlson")


def prefix_candidates(base: Config, cells: tuple[str, ...]) -> list[Config]:
    """levels x prefix style x levels per stage (and, from 64 bits, 16-bit local networks
    with 0-2 wire-register ranks); blocks x prefix style x block width.

    The prefix styles among `cells`, else DEFAULT_PREFIX_STYLES.  Over two blocks every
    style is the same single node, so such a block width is tried with one style only."""
    styles = [c for c in cells if c in config.PREFIX_CELLS] or list(DEFAULT_PREFIX_STYLES)
    out = [variant(base, pipeline="levels", cell=cell, levels_per_stage=n)
           for cell in styles for n in LEVELS_PER_STAGE]
    if base.width >= LOCAL_FROM:  # local networks kept wiring short at 64 and 256 bits
        out += [variant(base, pipeline="levels", cell=cell, local_width=LOCAL_WIDTH,
                        wire_registers=wires)
                for cell in styles for wires in (0, 1, 2)]
    for k in BLOCK_WIDTHS:
        blocks = -(-base.width // k)
        if blocks >= 2:
            out += [variant(base, pipeline="blocks", cell=cell, block_width=k)
                    for cell in (styles if blocks > 2 else styles[:1])]
    return out


GENERATORS = (slice_candidates, prefix_candidates)  # each: (base config, cells) -> configs


def identity(cfg: Config) -> str:
    """A stable text key of a candidate (its normalized config)."""
    return json.dumps(cfg.normalized(), sort_keys=True)


def generate(base: Config, cells: tuple[str, ...]) -> list[Config]:
    seen, out = set(), []
    for gen in GENERATORS:
        for cfg in gen(base, cells):
            if identity(cfg) not in seen:
                seen.add(identity(cfg))
                out.append(cfg)
    return out


def narrowed(cfg: Config, stage: int, bits: int) -> Config | None:
    """The same latency with `bits` fewer bits in slice `stage`, one more in each of `bits`
    other slices (the narrowest first, then the ones farthest from `stage`)."""
    split = list(cfg.slices)
    if len(split) < 2 or not 0 <= stage < len(split) or split[stage] <= bits \
            or bits > len(split) - 1:
        return None
    others = sorted((i for i in range(len(split)) if i != stage),
                    key=lambda i: (split[i], -abs(i - stage), i))[:bits]
    split[stage] -= bits
    for i in others:
        split[i] += 1
    return variant(cfg, slices=split)


@dataclass
class Row:
    """One candidate as `fit` sees it: its plan, the prediction, the measurements."""

    plan: Plan
    origin: str = "even"  # even, or "uneven of <label>"
    predicted: float | None = None
    fits: bool = True  # room on the device (from the plan's flip-flops, or nextpnr)
    size: str = ""  # what it needs, when it does not fit
    measured: list = field(default_factory=list)  # Measurement per seed
    forced: bool = False  # measure even when the prediction is low (uneven variants)
    spawned: bool = False  # its uneven variants have been added

    @property
    def config(self) -> Config:
        return self.plan.config

    @property
    def latency(self) -> int:
        return self.plan.latency

    @property
    def register_bits(self) -> int:
        return self.plan.registers.total

    @property
    def label(self) -> str:
        c = self.config
        if c.pipeline == "levels":
            local = f" local {c.local_width}" if 0 < c.local_width < c.width else ""
            return f"{c.cell} levels/{c.levels_per_stage}{local}{_wired(c)}"
        if c.pipeline == "blocks":
            return f"{c.cell} blocks of {c.block_width}{_wired(c)}"
        split = self.config.slices
        shape = (f"{split[0]}x{len(split)}" if len(set(split)) == 1
                 else "+".join(map(str, split)))
        return f"{self.config.cell} {shape}"

    @property
    def ok(self) -> list:
        return [m for m in self.measured if m.status == "ok"]

    @property
    def mhz(self) -> float | None:
        """Median measured Fmax over the seeds that placed and routed."""
        return round(statistics.median(m.mhz for m in self.ok), 2) if self.ok else None

    @property
    def luts(self) -> int | None:
        return self.measured[0].luts if self.measured else None

    @property
    def measured_stage(self) -> int | None:
        """The stage whose register ends the measured critical path, when its name tells."""
        for m in self.ok:
            stage = harness.stage_of(m.end, len(self.plan.slices))
            if stage is not None:
                return stage
        return None

    @property
    def slowest_stage(self) -> int:
        """Where the measured critical path ends, else where the plan expects it."""
        stage = self.measured_stage
        return self.plan.slowest[0].index if stage is None else stage

    @property
    def done(self) -> bool:
        return bool(self.measured) or not self.fits


def _wired(c: Config) -> str:
    return f" wired {c.wire_registers}" if c.wire_registers else ""


def meets(row: Row, target: float) -> bool:
    return row.mhz is not None and row.mhz >= target


def rank(row: Row) -> tuple:
    """Order of preference among candidates that meet the target."""
    return (row.latency, row.register_bits, row.luts if row.luts is not None else 1 << 62)


def select(rows: list[Row], target: float) -> Row | None:
    """The selection rule: least latency meeting target; then fewer register bits, LUTs."""
    winners = [r for r in rows if meets(r, target)]
    return min(winners, key=rank) if winners else None


def best(rows: list[Row]) -> Row | None:
    """The fastest measured candidate (shown when none meets the target)."""
    measured = [r for r in rows if r.mhz is not None]
    return max(measured, key=lambda r: (r.mhz, [-x for x in rank(r)])) if measured else None


def scale(rows: list[Row]) -> dict[str, float]:
    """Per cell style: median of measured / predicted, to correct the model as results come."""
    ratios: dict[str, list[float]] = {}
    for r in rows:
        if r.mhz is not None and r.predicted:
            ratios.setdefault(r.config.cell, []).append(r.mhz / r.predicted)
    return {cell: statistics.median(v) for cell, v in ratios.items()}


def promising(row: Row, target: float, factors: dict[str, float]) -> bool:
    """Could this unmeasured candidate meet the target? (No prediction: assume it could.)"""
    if row.forced or row.predicted is None:
        return True
    return row.predicted * factors.get(row.config.cell, 1.0) >= target * (1 - MARGIN)


def next_batch(rows: list[Row], target: float, size: int) -> list[Row]:
    """The candidates to place and route next; empty when the answer is confirmed.

    Confirmed: a measured candidate meets the target and every candidate the rule would
    prefer is measured or predicted to miss by more than MARGIN.  With no promising
    candidate left and nothing measured, the best `size` predictions are measured so the
    table can show how far off the target is.
    """
    factors = scale(rows)
    chosen = select(rows, target)
    open_rows = [r for r in rows if not r.done]
    todo = [r for r in open_rows if promising(r, target, factors)
            and (chosen is None or rank(r) < rank(chosen))]
    if not todo and not any(r.measured for r in rows):
        todo = sorted(open_rows, key=lambda r: -(r.predicted or 0))[:max(size, 1)]
    return sorted(todo, key=rank)[:max(size, 1)]


def uneven_rows(rows: list[Row], target: float, make_row) -> list[Row]:
    """New uneven variants of even candidates that just missed: narrow the slowest stage.

    The slowest stage is where the measured critical path ends (`stage` of the first seed),
    or the plan's slowest stage.  `make_row(config, origin)` builds the Row.
    """
    known = {identity(r.config) for r in rows}
    new = []
    for r in rows:
        if r.origin != "even" or r.config.pipeline != "slices" or r.mhz is None or r.mhz >= target \
                or r.mhz < target * (1 - JUST_MISSED) or r.spawned:
            continue
        r.spawned = True
        stage = r.slowest_stage
        for bits in (1, 2):
            cfg = narrowed(r.config, stage, bits)
            if cfg is not None and identity(cfg) not in known:
                known.add(identity(cfg))
                row = make_row(cfg, f"uneven of {r.label}")
                row.forced = True
                new.append(row)
    return new
