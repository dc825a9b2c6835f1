"""A per-device delay model that predicts a candidate's Fmax before it is placed and routed.

Model: period = base_ns + per_unit_ns * x, per cell style, where x is read from the plan's
slowest stage: its width for `native` (the carry chain grows with every bit) and its
unit-gate delay for the other styles (LUT logic grows with logic levels).  The constants
per device live in `data/delay_models.json`, fitted by least squares (`calibrate`) to
measurements of `tests/bench_fit.py`; the file names the run they come from.  A plan of a
pipeline mode the model does not describe gets no prediction, and `fit` measures it.
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
    """The model's x for a plan (None for a structure it does not describe)."""
    if plan.config.normalized().get("pipeline", "slices") != "slices":
        return None
    slow = plan.slowest
    return float(slow.width if plan.config.cell == "native" else slow.delay)


def predict(plan: Plan, device: str) -> float | None:
    """Predicted Fmax in MHz of the unit on `device`, or None when there is no model for it."""
    x = feature(plan)
    styles = models().get(device, {}).get("styles", {})
    coef = styles.get(plan.config.cell) or styles.get("default")
    if x is None or coef is None:
        return None
    return round(1000.0 / (coef["base_ns"] + coef["per_unit_ns"] * x), 1)


def calibrate(points: list[tuple[float, float]]) -> dict:
    """Least-squares base_ns, per_unit_ns from (x, measured MHz) points of one style."""
    if not points:
        raise ValueError("calibrate needs at least one point")
    xs = [x for x, _ in points]
    ys = [1000.0 / mhz for _, mhz in points]
    n, mx, my = len(xs), sum(xs) / len(xs), sum(ys) / len(ys)
    sxx = sum((x - mx) ** 2 for x in xs)
    slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sxx if sxx else 0.0
    slope = max(slope, 0.0)
    base = my - slope * mx
    return {"base_ns": round(base, 4), "per_unit_ns": round(slope, 5), "points": n}
