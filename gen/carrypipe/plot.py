"""The fit plot: achieved MHz against latency for every measured candidate, PNG and SVG.

Each point is labelled with its register bits; the target is a dashed line and the chosen
candidate is ringed.  Drawn with matplotlib's Agg backend (no display needed); the SVG is
made deterministic (fixed hash salt, no date), so the same figures give the same bytes.
"""

from __future__ import annotations

import io

from .candidates import Row

MARKERS = "osD^vP*Xh<>"


def figures(rows: list[Row], target: float, chosen: Row | None, title: str) -> dict[str, bytes]:
    """{"png": bytes, "svg": bytes} of the plot."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib import pyplot as plt
    from matplotlib.figure import Figure
    from matplotlib.ticker import MaxNLocator

    with plt.rc_context({"svg.hashsalt": "carrypipe", "svg.fonttype": "none"}):
        fig = Figure(figsize=(7.5, 4.8), dpi=100)
        ax = fig.add_subplot()
        cells = sorted({r.config.cell for r in rows})
        for k, cell in enumerate(cells):
            pts = sorted((r for r in rows if r.config.cell == cell and r.mhz is not None),
                         key=lambda r: (r.latency, r.mhz))
            if not pts:
                continue
            ax.plot([r.latency for r in pts], [r.mhz for r in pts], MARKERS[k % len(MARKERS)],
                    label=cell, alpha=0.85)
            for r in pts:
                ax.annotate(f"{r.register_bits}", (r.latency, r.mhz), textcoords="offset points",
                            xytext=(4, 4), fontsize=7)
        ax.axhline(target, linestyle="--", color="black", linewidth=1,
                   label=f"target {target:g} MHz")
        if chosen is not None and chosen.mhz is not None:
            ax.plot([chosen.latency], [chosen.mhz], "o", markersize=14, markerfacecolor="none",
                    markeredgecolor="red", label=f"chosen: {chosen.label}")
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_xlabel("latency (cycles)")
        ax.set_ylabel("achieved Fmax (MHz), median of seeds")
        ax.set_title(title, fontsize=10)
        ax.grid(True, linewidth=0.3)
        ax.legend(fontsize=8, loc="best")
        fig.text(0.99, 0.01, "point labels: register bits", ha="right", fontsize=7)
        out = {}
        for fmt, meta in (("png", {"Software": None}), ("svg", {"Date": None, "Creator": None})):
            buf = io.BytesIO()
            fig.savefig(buf, format=fmt, metadata=meta)
            out[fmt] = buf.getvalue()
    return out
