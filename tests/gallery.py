"""The chart gallery of docs/chart.md: one stage chart of each pipeline mode and unit kind,
rendered to small PNG files under docs/chart/.

    python tests/gallery.py            # rewrite docs/chart/*.png

The configs are invented examples; `tests/test_chart.py` renders every one of them (and
checks the pictures) in the default test run, so the gallery cannot silently break.
"""

from __future__ import annotations

import hashlib
import io
import re
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
FOLDER = HERE.parent / "docs" / "chart"
SCALE = 1.0  # of the SVG's size (small text must stay readable)

# file stem -> (caption, config keys)
GALLERY = {
    "sliced-narrow": (
        "16-bit adder in four 4-bit slices, with `cin`, `valid`, `en` and a reset",
        dict(width=16, slice_width=4, carry_in=True, valid=True, enable=True, reset="sync")),
    "sliced-banded": (
        "96-bit adder in uneven slices 36/36/24 behind an input register (2 bits a column)",
        dict(width=96, slices=[36, 36, 24], carry_in=True, register_inputs=True)),
    "levels": (
        "256-bit Kogge-Stone by prefix levels, 16-bit local blocks, two wire ranks",
        dict(width=256, pipeline="levels", cell="kogge-stone", local_width=16,
             wire_registers=2, valid=True, reset="sync")),
    "blocks": (
        "64-bit adder by blocks: 8-bit carry chains, a Brent-Kung network over the blocks",
        dict(width=64, pipeline="blocks", cell="brent-kung", block_width=8, valid=True)),
    "comparator-levels": (
        "64-bit signed comparator by levels: eight 8-bit slices compared at once, a tree "
        "over their verdicts",
        dict(width=64, unit="comparator", pipeline="levels", signed=True, valid=True)),
    "subtractor": (
        "32-bit subtractor in 8-bit slices, `bin` and `bout`",
        dict(width=32, unit="subtractor", slice_width=8, carry_in=True)),
    "addsub": (
        "32-bit adder/subtractor in 8-bit slices: `sub` travels beside the operands",
        dict(width=32, unit="addsub", slice_width=8, valid=True)),
    "comparator": (
        "32-bit comparator in 8-bit slices: `lt` and `eq` handed on, no deskew",
        dict(width=32, unit="comparator", slice_width=8)),
    "accumulator": (
        "48-bit accumulator in 12-bit slices, each keeping its bits of the total",
        dict(width=48, unit="accumulator", slice_width=12, valid=True, enable=True,
             reset="sync")),
    "sum6": (
        "Sum of six 12-bit operands: a Dadda tree, one counter level a stage, then a "
        "Kogge-Stone final adder by prefix levels",
        dict(width=12, unit="sum", operands=6, pipeline="levels", cell="kogge-stone",
             valid=True)),
    "mul10x8": (
        "Signed 10 × 8 multiplier with radix-4 Booth partial products, a Wallace tree and a "
        "final adder in two slices",
        dict(width=10, width_b=8, unit="multiplier", signed=True, partial_products="booth4",
             tree="wallace", slice_width=8)),
}


def plan_of(stem: str):
    from carrypipe import config, plan

    return plan.make_plan(config.from_mapping({"name": stem.replace("-", "_"),
                                               **GALLERY[stem][1]}))


def svg_digest(svg_text: str) -> str:
    """The SHA-256 of the chart a PNG was drawn from, kept in the PNG (text chunk
    `svg-sha256`) so a test can tell a gallery image drawn from an older chart: fonts make
    the pixels differ between machines, the chart's text does not."""
    return hashlib.sha256(svg_text.encode()).hexdigest()


def png(svg_text: str, scale: float = SCALE) -> bytes:
    """The chart as a small PNG: rendered by cairosvg, then each pixel mapped to the nearest
    colour of a palette of the chart's own colours (kept exact), their blends with white
    (shades, anti-aliased edges) and greys (text); `svg_digest` in a text chunk."""
    import cairosvg
    import numpy as np
    from PIL import Image
    from PIL.PngImagePlugin import PngInfo

    raw = cairosvg.svg2png(bytestring=svg_text.encode(), scale=scale)
    image = Image.open(io.BytesIO(raw)).convert("RGB")
    exact = sorted({tuple(int(h[i:i + 2], 16) for i in (0, 2, 4))
                    for h in re.findall(r"#([0-9a-fA-F]{6})", svg_text)})
    blends = [tuple(round(v + (255 - v) * t) for v in c) for c in exact
              for t in (0.25, 0.5, 0.75)]
    greys = [(g, g, g) for g in range(0, 256, 17)]
    colours = list(dict.fromkeys(exact + greys + blends))[:256]
    pixels = np.asarray(image).reshape(-1, 3)
    seen, where = np.unique(pixels, axis=0, return_inverse=True)
    distance = ((seen[:, None, :].astype(np.int32)
                 - np.array(colours, dtype=np.int32)[None, :, :]) ** 2).sum(axis=2)
    index = distance.argmin(axis=1).astype(np.uint8)[where.reshape(-1)]
    paletted = Image.frombytes("P", image.size, index.tobytes())
    paletted.putpalette([v for c in colours for v in c])
    out, info = io.BytesIO(), PngInfo()
    info.add_text("svg-sha256", svg_digest(svg_text))
    paletted.save(out, format="PNG", optimize=True, pnginfo=info)
    return out.getvalue()


def main() -> int:
    from carrypipe import chart

    FOLDER.mkdir(parents=True, exist_ok=True)
    for stem in GALLERY:
        data = png(chart.svg(plan_of(stem)))
        (FOLDER / f"{stem}.png").write_bytes(data)
        print(f"docs/chart/{stem}.png  {len(data) // 1024} KiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
