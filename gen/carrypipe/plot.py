"""The fit plot: achieved MHz against latency for every measured candidate, PNG and SVG.

Marker shape tells the pipeline mode, colour the cell style; each point is labelled with its
register bits (points at the same place share one label), placed where it overlaps no other
label or marker and stays inside the axes.  The target is a dashed line, the chosen
candidate is ringed, and the legend sits beside the axes.  Drawn with matplotlib's Agg
backend (no display needed); the SVG is made deterministic (fixed hash salt, no date), so
the same figures give the same bytes.
"""

from __future__ import annotations

import importlib.util
import io

from .candidates import Row
from .config import CELLS, PIPELINES

MODE_MARKERS = dict(zip(PIPELINES, "os^"))  # slices: circle, levels: square, blocks: triangle
COLOURS = ("#1f77b4", "#ff7f0e", "#2ca02c", "#d62728", "#9467bd", "#8c564b", "#e377c2")
CELL_COLOURS = dict(zip(CELLS, COLOURS))
LABEL_SIZE = 7
LABEL_GID = "point-label"  # every point label carries this gid (tests read the geometry)
# Label offsets from the point, in points, tried in this order at growing distances.
DIRECTIONS = ((1, 1), (1, -1), (-1, 1), (-1, -1), (0, 1.4), (0, -1.4), (1.4, 0), (-1.4, 0))


MISSING = ("matplotlib is not installed: fit.png and fit.svg are not written (pip install "
           "'carrypipe[fit]')")


def available() -> bool:
    """Whether the plot library is installed: without it `fit` writes everything else and
    says that the plot was skipped (`MISSING`)."""
    return importlib.util.find_spec("matplotlib") is not None


def draw(rows: list[Row], target: float, chosen: Row | None, title: str):
    """The plot as a matplotlib Figure (with an Agg canvas), labels placed."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.ticker import MaxNLocator

    fig = Figure(figsize=(8.4, 4.8), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.09, 0.11, 0.62, 0.8))
    pts = [r for r in rows if r.mhz is not None]
    for r in pts:
        ax.plot([r.latency], [r.mhz], MODE_MARKERS[r.config.pipeline],
                color=CELL_COLOURS[r.config.cell], alpha=0.85, markersize=6)
    ax.axhline(target, linestyle="--", color="black", linewidth=1)
    if chosen is not None and chosen.mhz is not None:
        ax.plot([chosen.latency], [chosen.mhz], "o", markersize=14, markerfacecolor="none",
                markeredgecolor="red")
    ys = [r.mhz for r in pts] + [target]
    xs = [r.latency for r in pts] or [1]
    span = max(ys) - min(ys) or max(ys) or 1.0
    ax.set_ylim(min(ys) - 0.12 * span, max(ys) + 0.18 * span)
    ax.set_xlim(min(xs) - 0.8, max(xs) + 0.8)
    ax.xaxis.set_major_locator(MaxNLocator(integer=True, min_n_ticks=1))  # whole cycles only
    ax.set_xlabel("latency (cycles)")
    ax.set_ylabel("achieved Fmax (MHz), median of seeds")
    ax.set_title(title, fontsize=10)
    ax.grid(True, linewidth=0.3)
    handles = [Line2D([], [], linestyle="none", marker="o", color=CELL_COLOURS[c], label=c)
               for c in CELLS if any(r.config.cell == c for r in pts)]
    handles += [Line2D([], [], linestyle="none", marker=MODE_MARKERS[m], color="grey",
                       label=f"mode {m}")
                for m in PIPELINES if any(r.config.pipeline == m for r in pts)]
    handles.append(Line2D([], [], linestyle="--", color="black", label=f"target {target:g} MHz"))
    if chosen is not None and chosen.mhz is not None:
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=10,
                              markerfacecolor="none", markeredgecolor="red",
                              label=f"chosen: {chosen.label}"))
    fig.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(0.73, 0.91),
               frameon=False)
    fig.text(0.99, 0.01, "point labels: register bits", ha="right", fontsize=7)
    _place_labels(fig, ax, pts)
    return fig


def _place_labels(fig, ax, pts: list[Row]) -> None:
    """One label per point position, each where it overlaps no placed label or marker and
    stays inside the axes; a label with no such place is left out (the CSV has every row)."""
    renderer = fig.canvas.get_renderer()
    groups: dict[tuple, list[int]] = {}
    for r in pts:
        groups.setdefault((r.latency, r.mhz), []).append(r.register_bits)
    frame = ax.get_window_extent(renderer)
    scale = fig.dpi / 72.0  # points -> pixels
    marks = []
    for (x, y) in groups:
        px, py = ax.transData.transform((x, y))
        marks.append((px - 4 * scale, py - 4 * scale, px + 4 * scale, py + 4 * scale))
    placed: list[tuple] = []
    for (x, y), bits in sorted(groups.items(), key=lambda g: (-g[0][1], g[0][0])):
        text = ",".join(str(b) for b in sorted(set(bits)))
        label = ax.annotate(text, (x, y), textcoords="offset points", xytext=(0, 0),
                            fontsize=LABEL_SIZE, gid=LABEL_GID, annotation_clip=False,
                            ha="left", va="bottom")
        ext = label.get_window_extent(renderer)
        w, h = ext.width / scale, ext.height / scale  # points
        spot = None
        for reach in (5, 9, 14, 20):
            for dx, dy in DIRECTIONS:
                ox = dx * reach - (w if dx < 0 else w / 2 if dx == 0 else 0)
                oy = dy * reach - (h if dy < 0 else h / 2 if dy == 0 else 0)
                px, py = ax.transData.transform((x, y))
                box = (px + ox * scale, py + oy * scale, px + (ox + w) * scale,
                       py + (oy + h) * scale)
                inside = (box[0] >= frame.x0 + 1 and box[2] <= frame.x1 - 1
                          and box[1] >= frame.y0 + 1 and box[3] <= frame.y1 - 1)
                if inside and not any(_overlap(box, o) for o in placed + marks):
                    spot = (ox, oy, box)
                    break
            if spot:
                break
        if spot is None:
            label.remove()
            continue
        label.set_position((spot[0], spot[1]))
        placed.append(spot[2])


def _overlap(a: tuple, b: tuple) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def figures(rows: list[Row], target: float, chosen: Row | None, title: str) -> dict[str, bytes]:
    """{"png": bytes, "svg": bytes} of the plot."""
    from matplotlib import pyplot as plt

    with plt.rc_context({"svg.hashsalt": "carrypipe", "svg.fonttype": "none"}):
        fig = draw(rows, target, chosen, title)
        out = {}
        for fmt, meta in (("png", {"Software": None}), ("svg", {"Date": None, "Creator": None})):
            buf = io.BytesIO()
            fig.savefig(buf, format=fmt, metadata=meta)
            out[fmt] = buf.getvalue()
    return out
