"""The bytes `build` writes for a fixed corpus of configs, as SHA-256 digests per file.

`tests/data/render_digests.json` holds the digests of every bundled config and of a sweep of
unit kinds, pipeline modes, cell styles and options.  `tests/test_render_stable.py` renders
them again and compares, so a refactor of the builders shows at once whether any emitted
file changed.  When a change of the output is intended, regenerate the file and say so in
the commit:

    python tests/render_digest.py --write
"""

from __future__ import annotations

import hashlib
import itertools
import json
import sys
from pathlib import Path

HERE = Path(__file__).parent
sys.path.insert(0, str(HERE.parent / "gen"))

from carrypipe import config, emit  # noqa: E402
from carrypipe.plan import make_plan  # noqa: E402

DIGESTS = HERE / "data" / "render_digests.json"
VECTORS = 40  # enough to cover the directed corners and some random vectors

OPTION_SETS = [
    {},
    {"carry_in": True, "signed": True, "valid": True, "reset": "sync"},
    {"carry_out": False, "enable": True, "register_inputs": True},
    {"valid": True, "reset": "async", "reset_data": True, "enable": True},
]
REFUSED = {"comparator": ("carry_in", "carry_out"), "accumulator": ("carry_in", "signed")}
MODES = {"adder": ("slices", "levels", "blocks"), "subtractor": ("slices", "levels", "blocks"),
         "addsub": ("slices", "levels", "blocks"), "comparator": ("slices", "levels"),
         "accumulator": ("slices",)}
CELLS = ("native", "ripple", "kogge-stone", "brent-kung")


def sweep() -> list[tuple[str, dict]]:
    """Unit kinds x modes x cells x option sets at two widths (the older kinds only)."""
    out = []
    for (unit, modes), cell, (n, opts), width in itertools.product(
            MODES.items(), CELLS, enumerate(OPTION_SETS), (7, 20)):
        for mode in modes:
            keys = {k: v for k, v in opts.items() if k not in REFUSED.get(unit, ())}
            if keys.get("reset", "none") != "none" and not (keys.get("valid")
                                                            or keys.get("reset_data")):
                keys["valid"] = True
            if mode == "slices":
                keys["slice_width"] = 3
            elif unit == "comparator":
                keys.update(pipeline=mode, slice_width=4, levels_per_stage=1 + n % 2)
            else:
                if cell in ("native", "ripple"):
                    continue
                keys.update(pipeline=mode, levels_per_stage=1 + n % 2)
                if mode == "blocks":
                    keys["block_width"] = 4
                elif n == 3:
                    keys.update(local_width=4, wire_registers=1)
            out.append((f"{unit}-{mode}-{cell}-w{width}-o{n}",
                        {"name": "u", "unit": unit, "width": width, "cell": cell, **keys}))
    return out


def corpus() -> list[tuple[str, dict]]:
    """The bundled configs, the lint cases of `test_lint.py`, then the sweep."""
    sys.path.insert(0, str(HERE))
    from test_lint import CASES, IDS

    bundled = sorted((HERE.parent / "configs").glob("*.yaml"))
    return ([(f"configs/{p.name}", config.load(p).normalized()) for p in bundled]
            + [(f"lint/{i}", {"name": "u", **keys}) for i, keys in zip(IDS, CASES)] + sweep())


def digests(ids=None) -> dict[str, dict[str, str]]:
    out = {}
    for key, keys in corpus():
        if ids is not None and key not in ids:
            continue
        files = emit.render(make_plan(config.from_mapping(keys)), vectors=VECTORS)
        out[key] = {name: hashlib.sha256(text.encode()).hexdigest()
                    for name, text in sorted(files.items())}
    return out


if __name__ == "__main__":
    found = digests()
    if sys.argv[1:] == ["--write"]:
        DIGESTS.write_text(json.dumps(found, indent=1, sort_keys=True) + "\n")
        print(f"wrote {len(found)} configs to {DIGESTS}")
    else:
        known = json.loads(DIGESTS.read_text())
        changed = [k for k in known if found.get(k) != known[k]]
        print(f"{len(known)} configs, {len(changed)} changed: {changed[:20]}")
        sys.exit(1 if changed else 0)
