"""Emit a unit: build every output file in memory first, then write them all at once.

`render` returns `{file name: text}` and touches no disk, so a failure at any step leaves
the output folder as it was; `write` then replaces the folder whole (`output.py`).
"""

from __future__ import annotations

from pathlib import Path

from . import chart, flowfiles, output, report, verilog, vhdl
from .plan import Plan
from .testbench import testbench, vector_file
from .vectors import hex_lines, suite

DEFAULT_VECTORS = 1000
DEFAULT_SEED = 1


def unit_verilog(plan: Plan) -> str:
    """The unit as readable Verilog-2001 (deterministic: no paths, no dates)."""
    return verilog.write(plan.netlist())


def simulation_files(plan: Plan, vecs) -> dict[str, str]:
    """What a simulator needs, by file name: the unit, its testbench and the vectors."""
    return {f"{plan.config.name}.v": unit_verilog(plan),
            f"{plan.config.name}_tb.v": testbench(plan, len(vecs)),
            vector_file(plan): hex_lines(plan, vecs)}


def render(plan: Plan, vectors: int = DEFAULT_VECTORS, seed: int = DEFAULT_SEED,
           measured: dict[int, float] | None = None,
           measured_source: str = "") -> dict[str, str]:
    """Every file of a build, by name; `measured` (stage -> ns, from `fit`) marks the
    chart's slowest stage by measurement instead of by the unit-gate model."""
    name = plan.config.name
    vecs = suite(plan, vectors, seed)
    package = vhdl.files(plan)
    files = {
        **simulation_files(plan, vecs),
        f"{name}.txt": report.report(plan),
        f"{name}_chart.svg": chart.svg(plan, measured, measured_source),
        **flowfiles.files(plan, sorted(package)),
        **package,
    }
    manifest_name = f"{name}.json"
    files[manifest_name] = report.manifest_text(plan, [*files, manifest_name])
    return files


MAX_MANIFEST_BYTES = 1 << 26  # a 4096-bit unit's manifest is a few MiB at most
MAX_UNIT_BYTES = 1 << 30  # the unit's Verilog, read back by `prove DIR`


class BuildFolderError(ValueError):
    """A folder is not a complete carrypipe build (the message is one line)."""


def read_build(folder: Path):
    """(plan, unit Verilog text) of a build folder: the plan from its manifest's config, the
    text of the `.v` file as it is on disk.  The manifest must agree with its config."""
    import json

    from .config import ConfigError, from_mapping, read_regular
    from .plan import make_plan

    manifests, others = [], []
    for path in sorted(folder.glob("*.json")):
        try:  # a regular file only (a FIFO would block), of a manifest's size
            raw = read_regular(path, MAX_MANIFEST_BYTES)
            doc = json.loads(raw.decode("utf-8")) if len(raw) <= MAX_MANIFEST_BYTES else None
        except (OSError, ValueError, RecursionError):  # ValueError: not UTF-8 or not JSON
            doc = None
        if doc is None:
            others.append(f"{path.name}: not readable JSON")
            continue
        if isinstance(doc, dict) and isinstance(doc.get("generator"), dict) \
                and doc["generator"].get("name") == "carrypipe" \
                and "config" in doc and "module" in doc:
            manifests.append((path, doc))
        else:
            others.append(f"{path.name}: JSON, but not a carrypipe manifest")
    if len(manifests) != 1:
        seen = f" ({'; '.join(others)})" if others and not manifests else ""
        raise BuildFolderError(f"{folder}: expected one carrypipe manifest (<name>.json) in "
                               f"the folder, found {len(manifests)}{seen}")
    path, doc = manifests[0]
    try:
        plan = make_plan(from_mapping(doc["config"], where=path.name))
    except ConfigError as exc:
        raise BuildFolderError(f"{path}: the manifest's config is not valid: {exc}") from None
    ports = report.port_entries(plan)
    if doc.get("latency") != plan.latency or doc.get("ports") != ports \
            or doc["module"] != plan.config.name:
        raise BuildFolderError(f"{path}: the manifest's module, latency or ports do not match "
                               "its config; rebuild the folder")
    unit = folder / f"{plan.config.name}.v"
    try:
        raw = read_regular(unit, MAX_UNIT_BYTES)
        if len(raw) > MAX_UNIT_BYTES:
            raise ValueError(f"larger than {MAX_UNIT_BYTES} bytes")
        text = raw.decode("utf-8")
    except (OSError, ValueError) as exc:
        raise BuildFolderError(f"{unit}: cannot read the unit: "
                               f"{getattr(exc, 'strerror', None) or exc}") from None
    return plan, text


def write(files: dict[str, str | bytes], out_dir: str | Path, option: str = "-o") -> list[Path]:
    """Make `out_dir` a folder of exactly these files, replacing it whole and atomically, so
    that a failure leaves it as it was (`output.replace_folder`; `output.FolderRefused`,
    naming `option`, when it holds files carrypipe did not write)."""
    output.replace_folder(files, out_dir, option)
    return [Path(out_dir) / fname for fname in files]
