"""Emit a unit: build every output file in memory first, then write them all at once.

`render` returns `{file name: text}` and touches no disk, so a failure at any step leaves
the output folder as it was; `write` then puts each file in place with an atomic rename.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from amaranth.back import verilog

from . import chart, report, tidy
from .plan import Plan
from .testbench import testbench, vector_file
from .unit import PipelinedAdder, clock_domain
from .vectors import hex_lines, suite

DEFAULT_VECTORS = 1000
DEFAULT_SEED = 1


def unit_verilog(plan: Plan, fault: str | None = None) -> str:
    """The unit as Verilog, with the plan's header on top (deterministic: no paths, no src).

    `fault` (tests only) plants one of `unit.FAULTS` for the proof to find.
    """
    top = PipelinedAdder(plan, fault=fault)
    text = verilog.convert(top, name=plan.config.name, ports=top.ports(),
                           emit_src=False, strip_internal_attrs=True,
                           missing_domain=clock_domain(plan))
    return report.verilog_header(plan) + tidy.drop_unread(text)


def render(plan: Plan, vectors: int = DEFAULT_VECTORS, seed: int = DEFAULT_SEED,
           extra: dict[str, str] | None = None) -> dict[str, str]:
    """Every file of a build, by name."""
    name = plan.config.name
    vecs = suite(plan, vectors, seed)
    files = {
        f"{name}.v": unit_verilog(plan),
        f"{name}_tb.v": testbench(plan, len(vecs)),
        vector_file(plan): hex_lines(plan, vecs),
        f"{name}.txt": report.report(plan),
        f"{name}_chart.svg": chart.svg(plan),
    }
    files.update(extra or {})
    manifest_name = f"{name}.json"
    files[manifest_name] = report.manifest_text(plan, [*files, manifest_name])
    return files


def write(files: dict[str, str | bytes], out_dir: str | Path) -> list[Path]:
    """Write all files into `out_dir`: each goes to a temporary file first, then is renamed.

    Text is written as UTF-8 with LF line ends; bytes (images) as they are.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    staged = []
    try:
        for fname, text in files.items():
            fd, tmp = tempfile.mkstemp(prefix=f".{fname}.", dir=out)
            staged.append((tmp, out / fname))  # before writing: a failed write is cleaned up too
            if isinstance(text, bytes):
                with os.fdopen(fd, "wb") as fh:
                    fh.write(text)
            else:
                with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
                    fh.write(text)
    except BaseException:
        for tmp, _ in staged:
            os.unlink(tmp)
        raise
    for tmp, dest in staged:
        os.replace(tmp, dest)
    return [dest for _, dest in staged]
