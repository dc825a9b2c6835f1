"""Run vectors through a unit and compare every result with Python integers.

Every simulator follows one protocol (the one the emitted testbench follows): `amaranth`
runs the Amaranth design in Python; `icarus` and `verilator` compile the emitted Verilog with
the emitted testbench.  Each returns a `Result`; a mismatch names the vector, cycle, inputs, expected
and actual values.
"""

from __future__ import annotations

import re
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

from . import tools
from .plan import Plan
from .vectors import Vector, expected, output_ports

SIMULATORS = ("amaranth", "icarus", "verilator")


@dataclass(frozen=True)
class Result:
    passed: bool
    vectors: int
    simulator: str
    message: str  # PASS ... or FAIL ... (one line)


def default_simulator() -> tuple[str, str]:
    """The simulator `check` uses when none is chosen, and why (for its note)."""
    missing = [t for t in ("iverilog", "vvp") if not tools.which(t)]
    if missing:
        return "amaranth", f"{' and '.join(missing)} not found"
    return "icarus", "iverilog and vvp found"


def run(plan: Plan, vecs: list[Vector], simulator: str, timeout: float | None = None,
        unit=None) -> Result:
    """Simulate `vecs` on the unit with `simulator`."""
    if simulator == "amaranth":
        return run_amaranth(plan, vecs, unit=unit)
    return run_external(plan, vecs, simulator, timeout=timeout)


def _mismatch(plan, k: int, cycle: int, v: Vector, want: dict, got: dict) -> str:
    """The testbench's FAIL line for vector k, in the same words (the testbench's `%h` pads
    each value to its port's width; these are unpadded)."""
    shown_in = " ".join(f"{p.name}={v.inputs[p.name]:x}" for p in plan.operand_inputs())
    names = [p.name for p in output_ports(plan)] + (["valid"] if plan.config.valid else [])

    def show(d):
        return " ".join(f"{n}={d[n]:x}" for n in names)
    return f"FAIL vector {k} (cycle {cycle}): {shown_in} expected {show(want)} got {show(got)}"


def run_amaranth(plan, vecs: list[Vector], unit=None) -> Result:
    """Simulate the unit in Amaranth's Python simulator (always available)."""
    from amaranth.hdl import Module
    from amaranth.sim import Simulator

    from .hdl import Unit, clock_domain

    top = unit if unit is not None else Unit(plan)
    c, lat = plan.config, plan.latency
    ins, outs = plan.operand_inputs(), output_ports(plan)
    wants = expected(plan, vecs)
    outcome = {}

    async def bench(ctx):
        if c.reset != "none":
            ctx.set(cd.rst, 1)  # tick() refuses to wait while the domain is in reset
            for _ in range(2):
                await ctx.posedge(cd.clk)
            ctx.set(cd.rst, 0)
        taken, nxt, cycle, gap_done = 0, 0, 0, False
        while True:
            en = 1
            if nxt < len(vecs):
                v = vecs[nxt]
                values, valid = dict(v.inputs), v.valid
                if v.gap and not gap_done:  # a cycle with en low and the inputs inverted
                    values = {p.name: values[p.name] ^ ((1 << p.width) - 1) for p in ins}
                    valid, en, gap_done = valid ^ 1, 0, True
                else:
                    gap_done = False
            else:
                values, valid = {p.name: 0 for p in ins}, 0
            for p in ins:
                ctx.set(getattr(top, p.name), values[p.name])
            if c.valid:
                ctx.set(top.in_valid, valid)
            if c.enable:
                ctx.set(top.en, en)
            await ctx.tick()
            cycle += 1
            if en:
                taken += 1
                nxt = min(nxt + 1, len(vecs))
            if taken >= lat:
                k = taken - lat
                if k >= len(vecs):
                    outcome["msg"] = f"PASS {len(vecs)} vectors, latency {lat}"
                    return
                got = {p.name: ctx.get(getattr(top, p.name)) for p in outs}
                want = dict(wants[k])
                if c.valid:
                    got["valid"], want["valid"] = ctx.get(top.out_valid), vecs[k].valid
                if got != want:
                    outcome["msg"] = _mismatch(plan, k, cycle, vecs[k], want, got)
                    return
            elif c.reset != "none" and c.valid and ctx.get(top.out_valid) != 0:
                outcome["msg"] = (f"FAIL cycle {cycle}: out_valid=1 before the first result "
                                  "after reset")
                return

    harness = Module()
    harness.domains.sync = cd = clock_domain(c)
    harness.submodules.unit = top
    sim = Simulator(harness)
    sim.add_clock(1e-8)
    sim.add_testbench(bench)
    sim.run()
    msg = outcome.get("msg", "FAIL simulation ended without a verdict")
    return Result(msg.startswith("PASS"), len(vecs), "amaranth", msg)


@dataclass(frozen=True)
class _External:
    """How one event-driven simulator compiles and runs the emitted unit and testbench."""

    install: str  # how to get it, when a binary is missing
    compile: tuple[str, ...]  # {name} stands for the module name
    product: str  # what the compile step writes
    execute: tuple[str, ...]  # a first word with a "/" is the product, run from the folder


EXTERNAL = {
    "icarus": _External(
        "install Icarus Verilog (Debian/Ubuntu: apt-get install iverilog) or use --sim amaranth",
        ("iverilog", "-g2005", "-o", "{name}_tb.vvp", "{name}.v", "{name}_tb.v"),
        "{name}_tb.vvp", ("vvp", "-n", "{name}_tb.vvp")),
    "verilator": _External(
        "install Verilator 5 (Debian/Ubuntu: apt-get install verilator) or use --sim icarus "
        "/ --sim amaranth",
        ("verilator", "--binary", "--timing", "--timescale", "1ns/1ps", "-Wno-fatal", "-O1",
         "--top-module",
         "{name}_tb", "-o", "{name}_tb", "{name}.v", "{name}_tb.v"),
        "obj_dir/{name}_tb", ("obj_dir/{name}_tb",)),
}


def run_external(plan: Plan, vecs: list[Vector], simulator: str,
                 timeout: float | None = None) -> Result:
    """Compile the emitted unit and testbench with `simulator` (a key of EXTERNAL), run them
    in a temporary folder, and read the testbench's verdict.  `timeout` bounds the compile
    and the run together; a simulator that is missing, fails, hangs or gives no verdict is a
    `tools.ToolError`, not a failed check."""
    from . import emit

    tool = EXTERNAL[simulator]
    limit = tools.Deadline(timeout)
    paths = {word: tools.find(word, tool.install)
             for word in (tool.compile[0], tool.execute[0]) if "/" not in word}
    name = plan.config.name
    with tempfile.TemporaryDirectory(prefix="carrypipe-") as tmp:
        work = Path(tmp)
        for fname, text in emit.simulation_files(plan, vecs).items():
            (work / fname).write_text(text)
        out = _step(tool.compile, name, paths, work, limit)
        if out.returncode != 0:
            raise tools.ToolBroken(f"{tool.compile[0]} failed on the unit and testbench "
                                   f"({tools.exit_status(out)}): {tools.tail(out)}")
        if not (work / tool.product.format(name=name)).is_file():
            raise tools.ToolBroken(f"{tool.compile[0]} reported success but wrote no "
                                   f"{tool.product.format(name=name)}: {tools.tail(out)}")
        out = _step(tool.execute, name, paths, work, limit)
    return _result(out, len(vecs), simulator)


def _step(words: tuple[str, ...], name: str, paths: dict[str, str], work: Path,
          limit: tools.Deadline) -> subprocess.CompletedProcess:
    cmd = [paths.get(w, w.format(name=name)) for w in words]
    if "/" in cmd[0]:  # the compiled testbench, in the work folder
        cmd[0] = str(work / cmd[0])
    return tools.run(cmd, work, limit)


_VERDICT = re.compile(r"^(PASS|FAIL)\b.*$", re.M)


def _result(out: subprocess.CompletedProcess, count: int, simulator: str) -> Result:
    """Read the testbench's verdict line (the last PASS/FAIL line it printed).  No verdict,
    or PASS from a simulator that then failed, means the simulator did not do its job."""
    found = [m.group(0) for m in _VERDICT.finditer(out.stdout)]
    ran = Path(out.args[0]).name
    if not found:
        raise tools.ToolBroken(f"{ran} gave no verdict from the testbench ({tools.exit_status(out)}): "
                               f"{tools.tail(out)}")
    if found[-1].startswith("PASS") and out.returncode != 0:
        raise tools.ToolBroken(f"{ran} printed PASS but ended with {tools.exit_status(out)}: "
                               f"{tools.tail(out)}")
    return Result(found[-1].startswith("PASS"), count, simulator, found[-1])
