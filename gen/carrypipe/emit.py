"""Emit a unit: build every output file in memory first, then write them all at once.

`render` returns `{file name: text}` and touches no disk, so a failure at any step leaves
the output folder as it was; `write` then replaces the folder whole (`output.py`).
"""

from __future__ import annotations

from pathlib import Path

from . import chart, output, report, tidy
from .plan import Plan
from .testbench import testbench, vector_file
from .vectors import hex_lines, suite

DEFAULT_VECTORS = 1000
DEFAULT_SEED = 1


def unit_verilog(plan: Plan, fault: str | None = None) -> str:
    """The unit as Verilog, with the plan's header on top (deterministic: no paths, no src).

    `fault` (tests only) plants one of `unit.FAULTS` for the proof to find.  Amaranth is
    imported here, not at the top, so that commands that only plan start instantly.
    """
    from amaranth.back import verilog

    from .unit import PipelinedAdder, clock_domain

    top = PipelinedAdder(plan, fault=fault)
    text = verilog.convert(top, name=plan.config.name, ports=top.ports(),
                           emit_src=False, strip_internal_attrs=True,
                           missing_domain=clock_domain(plan))
    return report.verilog_header(plan) + tidy.drop_unread(text)


def render(plan: Plan, vectors: int = DEFAULT_VECTORS, seed: int = DEFAULT_SEED,
           measured: dict[int, float] | None = None,
           measured_source: str = "") -> dict[str, str]:
    """Every file of a build, by name; `measured` (stage -> ns, from `fit`) marks the
    chart's slowest stage by measurement instead of by the unit-gate model."""
    name = plan.config.name
    vecs = suite(plan, vectors, seed)
    files = {
        f"{name}.v": unit_verilog(plan),
        f"{name}_tb.v": testbench(plan, len(vecs)),
        vector_file(plan): hex_lines(plan, vecs),
        f"{name}.txt": report.report(plan),
        f"{name}_chart.svg": chart.svg(plan, measured, measured_source),
    }
    manifest_name = f"{name}.json"
    files[manifest_name] = report.manifest_text(plan, [*files, manifest_name])
    return files


def write(files: dict[str, str | bytes], out_dir: str | Path) -> list[Path]:
    """Make `out_dir` a folder of exactly these files, replacing it whole and atomically, so
    that a failure leaves it as it was (`output.replace_folder`; `output.FolderRefused` when
    it holds files carrypipe did not write)."""
    output.replace_folder(files, out_dir)
    return [Path(out_dir) / fname for fname in files]
