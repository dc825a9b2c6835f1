"""Emit a unit: build every output file in memory first, then write them all at once.

`render` returns `{file name: text}` and touches no disk, so a failure at any step leaves
the output folder as it was; `write` then puts each file in place with an atomic rename.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

from . import chart, report, tidy
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
    """Write all files into `out_dir`, so that a failure leaves it as it was.

    A new folder is filled under a temporary name beside it and renamed into place at the
    end; in an existing folder each file goes to a temporary file first and all are renamed
    once every one is written.  Text is written as UTF-8 with LF line ends; bytes (images)
    as they are.
    """
    out = Path(out_dir)
    if not out.exists():
        out.parent.mkdir(parents=True, exist_ok=True)
        fresh = out.parent / f".{out.name}.{os.getpid()}.tmp"
        fresh.mkdir()
        try:
            for tmp, dest in _stage(files, fresh):
                os.replace(tmp, dest)
            os.rename(fresh, out)
        except BaseException:
            shutil.rmtree(fresh, ignore_errors=True)
            raise
        return [out / fname for fname in files]
    staged = _stage(files, out)
    for tmp, dest in staged:
        os.replace(tmp, dest)
    return [dest for _, dest in staged]


def _stage(files: dict[str, str | bytes], folder: Path) -> list[tuple[str, Path]]:
    """Write each file to a temporary name in `folder`; return (temporary, final) pairs.

    On a failure the temporary files written so far are removed before the error goes on.
    """
    staged = []
    mode = 0o666 & ~_umask()  # what a plain open() would give, not mkstemp's 0600
    try:
        for fname, text in files.items():
            fd, tmp = tempfile.mkstemp(prefix=f".{fname}.", dir=folder)
            staged.append((tmp, folder / fname))  # before writing: a failed write is cleaned up
            if isinstance(text, bytes):
                with os.fdopen(fd, "wb") as fh:
                    fh.write(text)
            else:
                with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
                    fh.write(text)
            os.chmod(tmp, mode)
    except BaseException:
        for tmp, _ in staged:
            os.unlink(tmp)
        raise
    return staged


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
