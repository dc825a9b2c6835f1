"""A per-device delay model that predicts a candidate's Fmax before it is placed and routed.

Model, per cell style: x is read from the plan's slowest stage (its width for `native`,
where the carry chain grows with every bit; its unit-gate delay for the other styles, whose
LUT logic grows with logic levels), and the period is read from a table of measured
(x, period_ns) points, interpolated piecewise linearly and extended along the end segments,
never below the device's floor_ns (register -> one LUT -> register).  The tables per device
live in `data/delay_models.json`, made by `calibrate` from the measurements of
`tests/bench_fit.py`; the file names the run they come from.  A plan of a pipeline mode
the model does not describe gets no prediction, and `fit` measures it.
"""

from __future__ import annotations

import json
from functools import cache
from importlib import resources

from .plan import Plan

DATA = "delay_models.json"


@cache
def models() -> dict:
    return json.loads(resources.files(__package__).joinpath("data", DATA).read_text())


def feature(plan: Plan) -> float | None:
    """The model's x for a plan (None for a structure it does not describe: the prefix
    modes, and the carry-save units' trees)."""
    if plan.mode != "slices":
        return None
    slow = plan.slowest[0]
    return float(slow.width if plan.config.cell == "native" else slow.delay)


def predict(plan: Plan, device: str) -> float | None:
    """Predicted Fmax in MHz of the unit on `device`, or None when there is no model for it."""
    x = feature(plan)
    styles = models().get(device, {}).get("styles", {})
    coef = styles.get(plan.config.cell) or styles.get("default")
    if x is None or coef is None:
        return None
    period = interpolate(coef["points"], x)
    return round(1000.0 / max(period, models()[device].get("floor_ns", 0.0)), 1)

def interpolate(points: list, x: float) -> float:
    """Piecewise-linear through sorted (x, y) points, extended along the end segments."""
    pts = sorted(points)
    if len(pts) == 1:
        return pts[0][1]
    k = next((i for i in range(1, len(pts) - 1) if x < pts[i][0]), len(pts) - 1)
    (x0, y0), (x1, y1) = pts[k - 1], pts[k]
    return y0 + (y1 - y0) * (x - x0) / (x1 - x0) if x1 != x0 else y0


def calibrate(points: list[tuple[float, float]]) -> dict:
    """A table model from (x, measured MHz) points: the median period at each x."""
    by_x: dict[float, list[float]] = {}
    for x, mhz in points:
        by_x.setdefault(x, []).append(1000.0 / mhz)
    return {"points": [[x, round(sorted(v)[len(v) // 2], 4)] for x, v in sorted(by_x.items())]}
