"""A per-device delay model that predicts a candidate's Fmax before it is placed and routed.

The model reads a few figures of every pipeline stage from the plan and prices them with
coefficients fitted, per device and nextpnr placer, to measured units (`calibrate`, run by
`tests/bench_model.py`; the coefficients live in `data/delay_models.json`):

  - what synthesis makes of a slice: the LUT levels and carry-chain bits of its longest
    path, read from the family's depth tables (one slice of each kind and cell style,
    synthesized at several widths with the flow's own Yosys pass; interpolated between
    widths).  Where a stage is a carry chain (a `native` slice; the two chains of a
    `blocks` block or a comparator's compared slice) its period is chain0 (pair0 for two
    chains on the same operands) + chain_ns * bits + lut_ns * LUT levels;
  - a prefix-mode stage is one LUT level per stage plus level_ns for each further prefix
    level it evaluates (and for the add/subtract `sub` input, one LUT input too many in
    the first); a LUT-logic stage's period starts at logic0;
  - wiring: span_ns * log2(1 + the longest reach of a prefix node, in bits) and
    fanout_ns * log2(the most LUT inputs one term drives);
  - size_ns * log2(the unit's flip-flops + the harness's), for congestion;
  - a unit kind other than the adder adds a fitted offset where the operands enter (the
    add/subtract XOR, the accumulator's select) and a fitted slope per chain bit; a kind the
    calibration did not measure gets the adder's figures.  The carry-save units (sums and
    multipliers: counter trees) get no prediction yet (`describes`).

The unit's period is its slowest stage's, never below the device's register -> one LUT ->
register figure (`floor_ns`).  A device, or a placer, without a fitted entry gets no
prediction, and `fit` then searches by measurements alone.  The figures are open-tool
estimates (Yosys and nextpnr), not sign-off.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from functools import cache, singledispatch
from importlib import resources

from . import cells, devices, harness, schedule
from .plan import Plan, PrefixPlan, SlicedPlan

DATA = "delay_models.json"
DEFAULT_PLACER = "heap"  # nextpnr 0.11's placer when none is asked for, in every family
# The coefficients of the stage figures (`terms`); a unit kind adds its own two.
TERMS = ("chain0", "pair0", "chain_ns", "logic0", "lut_ns", "level_ns", "span_ns", "fanout_ns",
         "size_ns")
SLOPES = ("chain_ns", "lut_ns", "level_ns", "span_ns", "fanout_ns", "size_ns")  # never below 0


def placer(device) -> str:
    """The nextpnr placer `fit`'s flow uses on `device` (a model holds for one placer)."""
    args = list(device.pnr_args)
    return args[args.index("--placer") + 1] if "--placer" in args else DEFAULT_PLACER


@cache
def models() -> dict:
    """The model file: "devices" (device name -> placer -> fitted entry: coefficients, kind
    terms, floor, source, held-out error) and "depth" (family -> depth tables)."""
    return json.loads(resources.files(__package__).joinpath("data", DATA).read_text())


@dataclass(frozen=True)
class StageFigures:
    """What the model reads of one stage: its logic on the longest path, and its wiring."""

    chain: float = 0.0  # carry-chain bits
    luts: float = 0.0  # LUT levels
    levels: int = 0  # prefix levels past the first in one stage of a prefix mode
    pair: bool = False  # two carry chains on the same operands (carry-select blocks)
    span: int = 0  # longest reach of a prefix node, in bits
    fanout: int = 1  # most LUT inputs that one of its terms drives
    operands: bool = True  # it reads the unit's operands (where a kind's own logic sits)


@dataclass(frozen=True)
class Figures:
    """What the model reads of a plan: its stages, its size and its unit kind."""

    stages: tuple[StageFigures, ...]
    size: float  # log2 of the flip-flops, the harness's included
    kind: str


def figures(plan: Plan, depth: dict | None = None) -> Figures:
    """The plan's stages as the model sees them (every pipeline mode, every unit kind).

    `depth` holds, per "<unit kind>/<cell>", what synthesis made of one slice of each of
    several widths (the family's depth tables, synthesized by `tests/bench_model.py`);
    without it, or for a kind and cell it lacks, a slice is read from its structure."""
    flops = harness.design_flip_flops(plan)
    return Figures(stage_figures(plan, depth or {}), math.log2(max(flops, 1)),
                   plan.config.unit)


@singledispatch
def stage_figures(plan, depth: dict) -> tuple[StageFigures, ...]:
    """The stages of a plan the model reads (`describes`), as it sees them."""
    raise TypeError(f"the model does not read a {type(plan).__name__}")


@stage_figures.register
def _(plan: SlicedPlan, depth: dict) -> tuple[StageFigures, ...]:
    return tuple(_slice_figures(s, plan.config.unit, depth) for s in plan.stages)


def slice_depth(depth: dict, kind: str, cell: str, width: int) -> tuple[float, float] | None:
    """(LUT levels, carry-chain bits) of the longest path through one `width`-bit slice
    of `kind` in `cell`, interpolated between the synthesized widths (and extended along
    the last two), or None when `depth` has no table for the kind (nor the adder) and cell."""
    table = depth.get(f"{kind}/{cell}") or depth.get(f"adder/{cell}")
    if not table:
        return None
    pts = sorted(table)
    k = next((i for i in range(1, len(pts) - 1) if width < pts[i][0]), len(pts) - 1)
    (x0, *y0), (x1, *y1) = pts[max(k - 1, 0)], pts[k]
    t = (width - x0) / (x1 - x0) if x1 != x0 else 0.0
    return tuple(max(a + (b - a) * t, 0.0) for a, b in zip(y0, y1))


def _slice_figures(s, kind: str, depth: dict) -> StageFigures:
    """A slice: as synthesis made it (`slice_depth`); else from its structure: a carry chain
    (`native`: synthesis maps `+` onto the carry cells) or one LUT level per prefix level
    plus the sum XOR (a 4-input LUT holds one carry operator, g_i | p_i & g_j)."""
    behavioural = cells.STYLES[s.cell].family == "behavioural"
    span = fanout = 1
    if not behavioural:
        net = s.network()
        span = max((schedule.reach(level, range(s.width)) for level in net.levels), default=0)
        fanout = max(net.max_fanout, 1)
    found = slice_depth(depth, kind, s.cell, s.width)
    if found is not None:
        luts, chain = found
    else:
        luts, chain = (1, s.width) if behavioural else (s.network().depth + 1, 0)
    return StageFigures(chain, luts, span=0 if behavioural else span, fanout=fanout)


@stage_figures.register
def _(plan: PrefixPlan, depth: dict) -> tuple[StageFigures, ...]:
    """A prefix-mode stage: the blocks' (or compared slices') two carry chains in stage 1,
    timed as a native slice of that width; else one LUT level per prefix level evaluated
    (at least one: sums, selects, verdicts; none in a stage of wire registers only)."""
    sch = plan.schedule
    kind = plan.config.unit
    kept = sch.kept()
    out = []
    for st in sch.stages:
        first = st.index == 1
        ops = [t for t in kept if t.stage == st.index]
        chains = [sch.widths[t.pos] for t in ops if t.op.startswith(("chain", "cmp"))]
        if chains:
            width = max(chains)
            luts, chain = slice_depth(depth, kind, "native", width) or (1, width)
            out.append(StageFigures(chain, luts, pair=True, operands=first))
            continue
        span = max((schedule.reach(sch.network.levels[k], sch.lsbs) for k in st.levels),
                   default=0)
        readers: dict[int, int] = {}
        for t in ops:
            for x in t.args:
                readers[x] = readers.get(x, 0) + t.width
        logic = any(t.op != "wire" for t in ops)
        # One-bit inputs that travel with the operands (add/subtract's `sub`) enter the
        # first stage's logic too: with the first prefix level's four operand bits, one
        # more input than a 4-input LUT has.
        extra = int(first and bool(st.levels) and bool(plan.unit.travellers))
        out.append(StageFigures(0, 1 if logic else 0, max(len(st.levels) - 1, 0) + extra,
                                span=span,
                                fanout=max(readers.values(), default=1), operands=first))
    return tuple(out)


def terms(fig: Figures, stage: StageFigures, kinds) -> dict[str, float]:
    """The figures that the coefficients multiply, for `fig` timed at `stage`: an intercept
    by what the stage holds (two chains, a chain, LUT logic only), its chain bits, LUT
    levels, span and fan-out, the unit's size, and its kind's offset and extra chain slope
    (`<kind>` and `<kind>:chain_ns`, for each of `kinds`)."""
    x = dict.fromkeys(TERMS, 0.0)
    x["logic0" if not stage.chain else "pair0" if stage.pair else "chain0"] = 1.0
    x.update(chain_ns=float(stage.chain), lut_ns=float(stage.luts),
             level_ns=float(stage.levels), span_ns=math.log2(1 + stage.span),
             fanout_ns=math.log2(stage.fanout), size_ns=fig.size)
    for k in kinds:  # what the kind adds to the adder's logic where operands enter, and
        mine = fig.kind == k  # to each bit of its carry chain
        x[k] = float(mine and stage.operands)
        x[k + ":chain_ns"] = x["chain_ns"] if mine else 0.0
    return x


def stage_periods(fig: Figures, entry: dict) -> list[float]:
    """Predicted period in ns of every stage (before the floor)."""
    coef = {**entry["coefficients"], **entry.get("kinds", {})}
    return [sum(coef.get(n, 0.0) * v for n, v in terms(fig, s, (fig.kind,)).items())
            for s in fig.stages]


def period(fig: Figures, entry: dict) -> tuple[float, int]:
    """Predicted period in ns (before the floor) and the index of the slowest stage."""
    per = stage_periods(fig, entry)
    slow = max(range(len(per)), key=per.__getitem__)
    return per[slow], slow


def entry_for(device: str) -> dict | None:
    """The fitted entry of `device` for the placer `fit` uses there, or None."""
    dev = devices.DEVICES.get(device)
    return models()["devices"].get(device, {}).get(placer(dev)) if dev else None


def depth_for(device: str) -> dict:
    """The depth tables of `device`'s family (empty when there are none)."""
    dev = devices.DEVICES.get(device)
    return models().get("depth", {}).get(dev.family.name, {}) if dev else {}


def describes(plan: Plan) -> bool:
    """Whether the model reads `plan`: the sliced and prefix modes of the adder kinds, not
    (yet) the carry-save units' counter trees, which `fit` bounds by measured misses."""
    return stage_figures.dispatch(type(plan)) is not stage_figures.dispatch(object)


def predict(plan: Plan, device: str) -> float | None:
    """Predicted Fmax in MHz of the unit on `device`, or None when there is no model for it
    (no entry for the device and placer, or a structure the model does not describe)."""
    entry = entry_for(device)
    if entry is None or not describes(plan):
        return None
    ns, _ = period(figures(plan, depth_for(device)), entry)
    return round(1000.0 / max(ns, entry["floor_ns"]), 1)


# How far below the target a corrected prediction may lie and the candidate still be
# measured: the model's median error on held-out units, but at least about the spread of
# nextpnr's seeds (5 %) and at most 10 % (and 10 % with no model).
MARGINS = (0.05, 0.10)


def margin(device: str) -> float:
    """The search margin on `device` (see MARGINS)."""
    entry = entry_for(device)
    if entry is None or "held_out" not in entry:
        return MARGINS[1]
    return round(min(max(entry["held_out"]["median"], MARGINS[0]), MARGINS[1]), 3)


@dataclass(frozen=True)
class Sample:
    """One measured unit: its figures, its Fmax, and the stage where the measured critical
    path ended (None when the path's end names no stage)."""

    figures: Figures
    mhz: float
    stage: int | None = None


def calibrate(samples: list[Sample], floor_ns: float, rounds: int = 20) -> dict:
    """Coefficients fitted to measured units.

    Least squares on the relative error of the period (each residual divided by the measured
    period).  Each unit is timed at the stage where its measured critical path ended; where
    the path names no stage, at the stage the current coefficients find slowest, the fit
    being repeated until that choice settles.  A slope that comes out negative (a figure
    that would make a unit faster) is fixed at 0 and the rest fitted again.  Each unit kind
    in the samples other than the adder gets an offset and an extra chain slope; a kind the
    samples do not hold gets the adder's figures.
    """
    kinds = sorted({s.figures.kind for s in samples} - {"adder"})
    names = [*TERMS, *(n for k in kinds for n in (k, k + ":chain_ns"))]
    slopes = set(SLOPES)
    # Without a measured stage, start from the deepest one (8 chain bits taken as one LUT).
    choice = [s.stage if s.stage is not None else
              max(range(len(s.figures.stages)), key=lambda i: (s.figures.stages[i].chain / 8
                                                               + s.figures.stages[i].luts))
              for s in samples]
    xs = lambda: [terms(s.figures, s.figures.stages[i], kinds)  # noqa: E731
                  for s, i in zip(samples, choice)]
    fixed: set[str] = set()
    coef: dict[str, float] = {}
    for _ in range(rounds):
        rows = xs()
        free = [n for n in names if n not in fixed and any(r[n] for r in rows)]
        a = [[r[n] * s.mhz / 1000.0 for n in free] for r, s in zip(rows, samples)]
        y = [1.0] * len(samples)
        sol = dict(zip(free, _least_squares(a, y)))
        negative = [n for n in free if n in slopes and sol[n] < 0]
        if negative:
            fixed.add(min(negative, key=sol.__getitem__))
            continue
        coef = sol
        entry = _entry(coef, kinds, floor_ns)
        new = [s.stage if s.stage is not None else period(s.figures, entry)[1]
               for s in samples]
        if new == choice:
            break
        choice = new
    return _entry(coef, kinds, floor_ns)


def _entry(coef: dict, kinds: list[str], floor_ns: float) -> dict:
    return {"coefficients": {t: round(coef.get(t, 0.0), 5) for t in TERMS},
            "kinds": {n: round(coef.get(n, 0.0), 5) for k in kinds
                      for n in (k, k + ":chain_ns")},
            "floor_ns": round(floor_ns, 4)}


def _least_squares(rows: list[list[float]], ys: list[float]) -> list[float]:
    """x minimising |A x - y|^2 by the normal equations (a few unknowns; a tiny ridge term
    keeps a column the samples never exercise from making the system singular)."""
    n = len(rows[0]) if rows else 0
    a = [[sum(r[i] * r[j] for r in rows) + (1e-9 if i == j else 0.0) for j in range(n)]
         for i in range(n)]
    b = [sum(r[i] * y for r, y in zip(rows, ys)) for i in range(n)]
    for col in range(n):  # Gaussian elimination with partial pivoting
        piv = max(range(col, n), key=lambda r: abs(a[r][col]))
        a[col], a[piv], b[col], b[piv] = a[piv], a[col], b[piv], b[col]
        for r in range(col + 1, n):
            f = a[r][col] / a[col][col]
            a[r] = [x - f * y for x, y in zip(a[r], a[col])]
            b[r] -= f * b[col]
    x = [0.0] * n
    for r in range(n - 1, -1, -1):
        x[r] = (b[r] - sum(a[r][c] * x[c] for c in range(r + 1, n))) / a[r][r]
    return x
