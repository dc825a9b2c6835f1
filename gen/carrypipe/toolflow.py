"""Synthesize and place-and-route one candidate: Yosys, then nextpnr, once per seed.

Tools come from the `yowasp-*` pip wheels (WebAssembly builds, `pip install
'carrypipe[fit]'`) or, with `tools="system"`, from `yosys` / `nextpnr-*` on PATH.  The
WebAssembly tools only see files under their working directory, so every run writes its
files into one temporary folder, passes relative names and runs there.

`measure` is the unit of work every executor runs: it takes plain data (a `Job`) and returns
plain data (one `Measurement` per seed), so it can run in another process or on a cluster.
"""

from __future__ import annotations

import importlib.metadata
import json
import re
import tempfile
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

from . import config, devices, emit, harness, timing, tools
from .plan import make_plan
from .tools import ToolBroken, ToolTimeout

TOOLS = ("wheel", "system")
FLOW_VERSION = 10  # bump when the harness, scripts, arguments, path reading or the
# emitted Verilog change a result
FREQ_MHZ = 500  # the clock constraint nextpnr optimizes for, above any reachable figure
PINS = "pins"  # the harness's pin file, `pins.cst` or `pins.pdc` (devices.pin_constraints)
INSTALL_HINT = "pip install 'carrypipe[fit]'"


def executable(tool: str, kind: str) -> str:
    """The command that runs `tool` ("yosys", "nextpnr-ice40", ...) from the `kind` of
    tools ("wheel" or "system"), or `tools.ToolMissing`."""
    if kind == "wheel":
        name = f"yowasp-{tool}"
        return tools.find(name, f"install the {name} wheel with {INSTALL_HINT}, or use "
                                f"--tools system with {tool} on PATH")
    packages = " ".join(dict.fromkeys(("yosys", tool)))  # yosys once, with nextpnr-* beside
    return tools.find(tool, f"install it (Debian/Ubuntu: apt-get install {packages}), or "
                            f"use --tools wheel after {INSTALL_HINT}")


def versions(family: devices.Family, kind: str, timeout: float | None = None) -> dict:
    """Versions of the two tools a device needs (part of every cache key)."""
    found = {tool: executable(tool, kind) for tool in ("yosys", family.pnr)}
    out = {}
    for tool, cmd in found.items():
        if kind == "wheel":
            out[tool] = f"yowasp-{tool} " + importlib.metadata.version(f"yowasp-{tool}")
        else:
            flag = "-V" if tool == "yosys" else "--version"
            run = tools.run([cmd, flag], None, timeout)
            if run.returncode < 0:  # killed: a broken tool, before any candidate is run
                raise tools.ToolBroken(f"{cmd} {flag} failed ({tools.exit_status(run)})")
            lines = (run.stdout + run.stderr).strip().splitlines()
            out[tool] = lines[0] if lines else f"{tool} (version not reported)"
    return out


@dataclass(frozen=True)
class Job:
    """One candidate on one device, for the seeds not yet in the cache."""

    config: dict  # Config.normalized()
    device: str
    seeds: tuple[int, ...]
    tools: str = "wheel"
    timeout: float | None = None


@dataclass
class Measurement:
    """What one place-and-route seed of one candidate gave (figures of the unit alone)."""

    seed: int
    status: str  # ok, no-fit, error (the tool named one), broken (see `_failure`) or timeout
    mhz: float | None = None
    luts: int | None = None
    carry: int | None = None
    flip_flops: int | None = None
    logic_used: int | None = None  # the device's LUT sites used, harness included
    start: str = ""
    end: str = ""
    logic_ns: float | None = None  # the critical path's cell delays (clock-to-out, setup in)
    routing_ns: float | None = None  # and its routed nets'
    inside: bool | None = None  # the critical path ends inside the unit
    message: str = ""
    seconds: float = field(default=0.0, compare=False)

    def as_dict(self) -> dict:
        return asdict(self)

    @property
    def routing_share(self) -> int | None:
        """The routed nets' share of the critical path's delay, in percent (None: not read)."""
        if self.logic_ns is None or self.routing_ns is None or self.total_ns <= 0:
            return None
        return round(100 * self.routing_ns / self.total_ns)

    @property
    def total_ns(self) -> float:
        return (self.logic_ns or 0.0) + (self.routing_ns or 0.0)


def scripts(plan, device: devices.Device, seed: int) -> tuple[list[str], list[str]]:
    """The Yosys and nextpnr argument lists (relative file names, run in the work folder)."""
    top = harness.top_name(plan)
    name = plan.config.name
    synth = ["-q", "-p", f"read_verilog {name}.v {top}.v; {device.family.synth} -top {top} "
             f"-json {top}.json; tee -q -o stat.json stat -json"]
    pins = f"{PINS}.{device.family.pin_file}"
    pin_args = {"cst": ["--vopt", f"cst={pins}"], "pdc": ["--pdc", pins]}.get(
        device.family.pin_file, [])
    pnr = [*device.pnr_args, *pin_args, "--json", f"{top}.json", "--report",
           f"report_{seed}.json", "--timing-allow-fail", "--seed", str(seed),
           "--freq", str(freq_mhz(device.name))]
    return synth, pnr


def freq_mhz(device: str) -> int:
    """The clock constraint nextpnr optimizes for on the device called `device` (part of
    every cache key): above any figure the device reaches, so timing-driven placement works."""
    return devices.DEVICES[device].family.freq_mhz if device in devices.DEVICES else FREQ_MHZ


def untie_carry_in(netlist: str) -> str:
    """The Yosys JSON netlist with every CCU2 carry-in that a constant-0 cell drives left
    unconnected.

    synth_nexus feeds each carry chain through a first CCU2 whose CIN it ties to a VLO
    (constant 0) cell, and nextpnr-nexus 0.11 refuses a chain that starts at a cell not of
    type CCU2 ("CIN net ... driven by non-CCU2 cell").  An unconnected CIN starts the chain
    with a carry of 0, the same value, so the logic is unchanged.
    """
    data = json.loads(netlist)
    for module in data["modules"].values():
        cells = module["cells"].values()
        low = {bit for c in cells if c["type"] == "VLO" for bit in c["connections"]["Z"]}
        for c in cells:
            if c["type"] == "CCU2" and c["connections"].get("CIN", [None])[0] in low:
                del c["connections"]["CIN"]
    return json.dumps(data)


def measure(job: Job) -> list[Measurement]:
    """Synthesize the candidate once, then place and route it once per seed."""
    plan = make_plan(config.from_mapping(job.config))
    return place_and_route(plan, emit.unit_verilog(plan), devices.get(job.device), job.seeds,
                           job.tools, job.timeout)


UNIT_MODULE = "carrypipe_unit"  # the unit's module name inside the work folder


def place_and_route(plan, unit_text: str, device: devices.Device, seeds, kind: str = "wheel",
                    timeout: float | None = None) -> list[Measurement]:
    """Measure Verilog `unit_text` (a module with `plan`'s name and ports) in the harness.
    A tool that times out or fails gives measurements with status `timeout`, `error` or
    `broken`."""
    fam = device.family
    yosys, pnr = executable("yosys", kind), executable(fam.pnr, kind)
    results = []
    with tempfile.TemporaryDirectory(prefix="carrypipe-fit-") as tmp:
        work = Path(tmp)
        # The unit under a name of carrypipe's own (the reserved prefix): a unit named after
        # one of the device's cells (`LUT4`, `SB_CARRY`, ...) must not meet its library.
        unit_text = re.sub(rf"^module\s+{re.escape(plan.config.name)}\b", f"module {UNIT_MODULE}",
                           unit_text, count=1, flags=re.M)
        (work / f"{plan.config.name}.v").write_text(unit_text)
        (work / f"{harness.top_name(plan)}.v").write_text(
            harness.harness_verilog(plan, UNIT_MODULE))
        if fam.pin_file:
            (work / f"{PINS}.{fam.pin_file}").write_text(devices.pin_constraints(device))
        start = time.monotonic()
        synth_args = scripts(plan, device, 0)[0]
        try:
            run = tools.run([yosys, *synth_args], work, timeout)
        except ToolTimeout as exc:
            return [Measurement(s, "timeout", message=str(exc)) for s in seeds]
        except ToolBroken as exc:
            return [Measurement(s, "broken", message=str(exc)) for s in seeds]
        netlist = work / f"{harness.top_name(plan)}.json"
        if run.returncode != 0 or not (work / "stat.json").is_file() or not netlist.is_file():
            status, msg = _failure("yosys", run, "its netlist and statistics")
            return [Measurement(s, status, message=msg) for s in seeds]
        if fam.untie_carry_in:
            netlist.write_text(untie_carry_in(netlist.read_text()))
        cells = timing.cell_counts((work / "stat.json").read_text(), fam)
        unit = dict(luts=cells.luts - harness.luts(plan), carry=cells.carry,
                    flip_flops=cells.flip_flops - harness.flip_flops(plan))
        synth_time = time.monotonic() - start
        for seed in seeds:
            t0 = time.monotonic()
            results.append(_place(pnr, plan, device, seed, work, timeout, unit))
            results[-1].seconds = time.monotonic() - t0 + synth_time / len(seeds)
    return results


def _place(pnr, plan, device, seed, work, timeout, unit) -> Measurement:
    args = scripts(plan, device, seed)[1]
    try:
        run = tools.run([pnr, *args], work, timeout)
    except ToolTimeout as exc:
        return Measurement(seed, "timeout", message=str(exc), **unit)
    except ToolBroken as exc:
        return Measurement(seed, "broken", message=str(exc), **unit)
    log = run.stdout + run.stderr
    full = timing.no_room(log) if run.returncode != 0 else None
    if full:
        use = timing.utilisation(log, device.family.logic_bel)
        size = f" ({use[0]} of {use[1]} {device.family.logic_bel})" if use else ""
        return Measurement(seed, "no-fit", message=full + size,
                           logic_used=use[0] if use else None, **unit)
    report = work / f"report_{seed}.json"
    if run.returncode != 0 or not report.is_file():
        status, msg = _failure("nextpnr", run, "its timing report")
        return Measurement(seed, status, message=msg, **unit)
    try:
        rep = timing.place_report(report.read_text(), device.family)
    except (OSError, ValueError, timing.ReportError) as exc:  # ValueError: not JSON
        return Measurement(seed, "error", message=f"nextpnr's report: {exc}", **unit)
    path = rep.path  # without one, the fields keep their defaults ("", None)
    read = dict(start=path.start, end=path.end, logic_ns=round(path.logic_ns, 3),
                routing_ns=round(path.routing_ns, 3),
                inside=harness.inside_unit(path.end, plan)) if path else {}
    return Measurement(seed, "ok", mhz=round(rep.mhz, 2), logic_used=rep.logic_used, **read,
                       **unit)


def _failure(tool: str, run, wanted: str) -> tuple[str, str]:
    """Status and message of a tool run that did not give `wanted`.  `error` when the tool
    exited naming an error (a verdict on this design: cached like a result); `broken` when it
    was killed by a signal, failed without naming an error, or exited 0 without writing
    `wanted` (the environment's fault: never cached, like a timeout)."""
    lines = [ln.strip() for ln in (run.stdout + run.stderr).splitlines() if ln.strip()]
    errors = [ln for ln in lines if "ERROR" in ln or "rror:" in ln]
    if run.returncode > 0 and errors:
        return "error", f"{tool} failed: " + " | ".join(errors[-2:])[:300]
    what = "failed" if run.returncode else f"ended without writing {wanted}"
    return "broken", f"{tool} {what} ({tools.exit_status(run)}): {tools.tail(run)}"
