"""The fit plot's geometry, read from the rendered figure (matplotlib's own text extents)."""

import itertools
import random

from carrypipe import candidates, config, plot
from carrypipe.candidates import Row
from carrypipe.plan import make_plan
from carrypipe.toolflow import Measurement


def crowded(seed=3):
    """Every candidate of a 32-bit unit in three styles and all modes, with invented figures
    that put many points at the same or nearly the same place (demo data)."""
    rng = random.Random(seed)
    rows = []
    for cfg in candidates.generate(config.from_mapping({"name": "acc", "width": 32}),
                                   ("native", "kogge-stone", "brent-kung")):
        row = Row(make_plan(cfg))
        mhz = 200 + 15 * min(row.latency, 10) + rng.choice([0, 0, 0.4, 3])
        row.measured = [Measurement(1, "ok", mhz=round(mhz, 1), luts=1)]
        rows.append(row)
    return rows


def test_labels_neither_overlap_nor_leave_the_axes():
    rows = crowded()
    chosen = candidates.select(rows, 300)
    fig = plot.draw(rows, 300, chosen, "acc: ecp5-85k, target 300 MHz")
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    frame = ax.get_window_extent(renderer)
    labels = [t for t in ax.texts if t.get_gid() == plot.LABEL_GID]
    boxes = [t.get_window_extent(renderer) for t in labels]
    # One label per distinct point position: equal points share one label.
    assert len(labels) == len({(r.latency, r.mhz) for r in rows})
    for a, b in itertools.combinations(boxes, 2):
        assert not a.overlaps(b), (a, b)
    for box in boxes:
        assert frame.contains(box.x0, box.y0) and frame.contains(box.x1, box.y1)
    # The title and the legend lie outside the axes' data area: nothing drawn over points.
    title = ax.title.get_window_extent(renderer)
    assert title.y0 >= frame.y1 - 1
    legend = fig.legends[0].get_window_extent(renderer)
    assert legend.x0 >= frame.x1


def test_marker_shape_by_mode_and_colour_by_cell():
    rows = crowded()
    fig = plot.draw(rows, 300, None, "t")
    seen = {}
    for line in fig.axes[0].lines:
        x, y = line.get_xdata(), line.get_ydata()
        if len(x) == 1:
            seen.setdefault((x[0], y[0]), set()).add((line.get_marker(), line.get_color()))
    for r in rows:
        style = (plot.MODE_MARKERS[r.config.pipeline], plot.CELL_COLOURS[r.config.cell])
        assert style in seen[(r.latency, r.mhz)]
    assert len(set(plot.MODE_MARKERS.values())) == len(config.PIPELINES)
    assert len(set(plot.CELL_COLOURS.values())) == len(config.CELLS)


def test_latency_ticks_are_whole_cycles_even_for_one_latency():
    # Every point at latency 4 gave ticks at 3.2, 3.4, ... (fractional cycles).
    rows = [r for r in crowded() if r.latency == 4]
    fig = plot.draw(rows, 300, None, "t")
    ticks = [t for t in fig.axes[0].get_xticks() if 3.2 <= t <= 4.8]
    assert ticks == [4.0]
