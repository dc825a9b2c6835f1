"""Prove that the emitted Verilog computes its unit kind's specification, with exactly the
manifest's latency, from any state.

Method (see docs/verification.md for the soundness argument):
  1. The miter (`miter.py`) compares the unit with the specification (the kind's
     reference: `a + b + cin` for the adder, `a * b` for the multiplier, ...) delayed by
     `latency` registers, `in_valid` delayed alike and cleared by the reset (`rst`, or
     `rst_n` active low).
  2. The init values of every register are removed, so the solver may start the unit (and
     the reference) in any register state.  Yosys's SAT engine then shows that `ok` holds on
     cycle L+1 for every start state and every input sequence (`sat -seq L+1 -prove-skip L`).
     That covers every cycle t > L of every run: the machine does not know the time, so the
     cycles t-L .. t of a run are a run of L+1 cycles from the state it had at t-L, which
     is one of the "any" start states.
  3. With `enable`, the SAT proof runs with `en` held high, and a structural check of the
     unit's netlist shows that every flip-flop is clocked by `clk` and enabled by `en`, that
     only flip-flops outside the cone of the results have the reset, and that
     every output bit is a flip-flop output or a constant: a run with `en` is then the
     always-enabled run with cycles repeated, so the proof carries over.
"""

from __future__ import annotations

import re
import time
from dataclasses import dataclass

from . import emit, reset, tools
from .header import plural
from .solver import FAILED, PROVED, Rejected, is_ff, netlist, no_verdict, run_yosys, sat_limit
from .miter import MITER, miter_verilog
from .plan import DIRECT_UP_TO, Plan

@dataclass(frozen=True)
class Proof:
    proved: bool
    method: str
    depth: int  # cycles unrolled (results checked from cycle latency + 1 to this one)
    message: str  # "proved ..." or a counterexample, possibly several lines
    seconds: float


_FF_TYPES = {  # flip-flop cells after `opt_dff`, by (enable, reset) they carry
    (False, None): ("$dff",), (True, None): ("$dffe",),
    (False, "sync"): ("$sdff",), (True, "sync"): ("$sdffe", "$sdffce"),
    (False, "async"): ("$adff",), (True, "async"): ("$adffe",),
}


def ports_differ(plan: Plan, net: dict) -> str | None:
    """What differs between the netlist's ports and the plan's (names, directions, widths),
    or None."""
    have = {name: (p["direction"], len(p["bits"]))
            for name, p in net["modules"][plan.config.name]["ports"].items()}
    want = {p.name: (p.direction, p.width) for p in plan.ports}
    for name, (direction, width) in want.items():
        if name not in have:
            return f"the unit has no port {name} ({direction}, {plural(width, 'bit')})"
        if have[name] != (direction, width):
            return (f"port {name} is {have[name][0]}, {plural(have[name][1], 'bit')}; "
                    f"expected {direction}, {plural(width, 'bit')}")
    extra = sorted(set(have) - set(want))
    return f"the unit has a port {extra[0]} that its manifest does not list" if extra else None


def structure(plan: Plan, net: dict) -> str | None:
    """The structural check of clocking, enable and reset; returns what is wrong, or None.

    Every flip-flop is clocked by the rising edge of clk and (with `enable`) enabled by en
    alone; a flip-flop with a reset is reset by the reset port, in the config's way (sync or
    async, active high or low), to 0; with `reset_data` every flip-flop has that reset, else
    none in the fan-in of a data output does (the valid bits have it); every output bit is a
    flip-flop output or a constant.
    """
    c = plan.config
    mod = net["modules"][c.name]
    port = {name: p["bits"] for name, p in mod["ports"].items()}
    clk = port["clk"][0]
    en = port["en"][0] if "en" in port else None
    rst_port = reset.of(c)
    rst = port[rst_port.name][0] if rst_port.name in port else None
    driver, ffs = {}, {}
    for name, cell in mod["cells"].items():
        for pin, bits in cell["connections"].items():
            if cell["port_directions"].get(pin) == "output":
                for bit in bits:
                    driver[bit] = name
        if is_ff(cell):
            ffs[name] = cell
    regs = {}  # flip-flop cell -> the register name it drives
    for net_name, info in mod["netnames"].items():
        if not info.get("hide_name"):
            for bit in info["bits"]:
                regs.setdefault(driver.get(bit), net_name)
    kind = None if c.reset == "none" else c.reset
    # Without `en` a flip-flop may still hold by itself (an accumulator slice on an invalid
    # input): that is function, which the proof covers with every input free.
    holds = (True,) if en is not None else (False, True)
    allowed = {t for h in holds for r in (None, kind) if (h, r) in _FF_TYPES
               for t in _FF_TYPES[h, r]}
    for cell_name, cell in ffs.items():
        name = regs.get(cell_name, cell_name)
        par, con = cell["parameters"], cell["connections"]
        if cell["type"] not in allowed:
            return (f"flip-flop {name} is a {cell['type']}, not a flip-flop "
                    + ("enabled by en" if en is not None else "without enable")
                    + (f" with the {kind} reset {rst_port.name} or none" if kind
                       else " without reset"))
        if con["CLK"] != [clk] or int(par["CLK_POLARITY"], 2) != 1:
            return f"flip-flop {name} is not clocked by the rising edge of clk"
        if en is not None and not _gated_by(con["EN"], int(par["EN_POLARITY"], 2), en,
                                            mod["cells"], driver):
            return f"flip-flop {name} may load while en is low"
        reset_pin = "SRST" if cell["type"].startswith("$sdff") else "ARST"
        if reset_pin in con:
            value = par["SRST_VALUE" if reset_pin == "SRST" else "ARST_VALUE"]
            if con[reset_pin] != [rst] \
                    or int(par[f"{reset_pin}_POLARITY"], 2) != rst_port.level(True) \
                    or int(value, 2) != 0:
                return f"flip-flop {name} has a reset other than {rst_port.words()}, to 0"
        elif c.reset_data:
            return f"flip-flop {name} is not cleared by {rst_port.name} (reset_data: true)"
    outputs = [p.name for p in plan.ports if p.direction == "output"]
    for out in outputs:
        for bit in port.get(out, []):
            if bit not in ("0", "1") and driver.get(bit) not in ffs:
                return f"output {out} is not driven by a flip-flop"
    if c.reset_data:
        return None
    # Every flip-flop in the fan-in of a data output must be without reset.  Each cell is
    # walked through once, not once per output bit: a wide cell (a 4096-bit `$add` of a
    # multi-operand sum) has thousands of output bits and as many inputs.
    todo = [b for out in outputs if out != "out_valid" for b in port.get(out, [])]
    seen, walked = set(), set()
    while todo:
        bit = todo.pop()
        if bit in seen or bit in ("0", "1", "x"):
            continue
        seen.add(bit)
        if bit == rst:
            return f"a data output depends on {rst_port.name}"
        name = driver.get(bit)
        if name is None or name in walked:
            continue
        walked.add(name)
        cell = mod["cells"][name]
        if name in ffs and cell["type"] not in _FF_TYPES[True, None] + _FF_TYPES[False, None]:
            return f"a data output depends on flip-flop {regs.get(name, name)} with a reset"
        pins = ("D",) if name in ffs else [p for p, d in cell["port_directions"].items()
                                           if d == "input"]
        for pin in pins:
            todo += cell["connections"][pin]
    return None


def _gated_by(enable: list, polarity: int, en, cells: dict, driver: dict) -> bool:
    """Whether a flip-flop's enable is en, or an AND of en and other terms (an accumulator
    slice also holds on an invalid input): either way it holds while en is low."""
    if polarity != 1 or len(enable) != 1:
        return False
    if enable == [en]:
        return True
    cell = cells.get(driver.get(enable[0]), {})
    if cell.get("type") == "$reduce_and":
        return en in cell["connections"]["A"]
    if cell.get("type") in ("$and", "$logic_and"):
        return en in cell["connections"]["A"] + cell["connections"]["B"]
    return False


# A row of `sat -show`: step, signal, decimal, hex, binary; past 32 bits Yosys prints `--`
# for the decimal and the hex, so the binary is the value.
_ROW = re.compile(r"^\s+(init|\d+)\s+\\(\S+)\s+\S+\s+(\S+)\s+([01x]+)\s*$", re.M)


def _hex(binary: str) -> str:
    """Binary digits as hex, one digit per 4 bits (an `x` where any of the 4 is unknown)."""
    bits = binary.zfill(-(-len(binary) // 4) * 4)
    return "".join("x" if "x" in bits[i:i + 4] else f"{int(bits[i:i + 4], 2):x}"
                   for i in range(0, len(bits), 4))


def _counterexample(log: str, plan: Plan, compare: tuple[str, ...]) -> str:
    """The failing trace as one line per cycle of concrete inputs, then the mismatch."""
    steps: dict[int, dict[str, str]] = {}
    for step, signal, _, binary in _ROW.findall(log):
        if step != "init":
            steps.setdefault(int(step), {})[signal] = _hex(binary)
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
    outs = [p.name for p in plan.ports if p.direction == "output" and p.name in compare]
    got = " ".join(f"{n}={last.get(n, '?')}" for n in outs)
    want = " ".join(f"{n}={last.get(_ref(n, lat), '?')}" for n in outs)
    lines.append(f"  after cycle {max(steps) - 1}'s edge the unit shows {got}; its "
                 f"specification for the inputs of cycle {max(steps) - lat} gives {want}")
    return "\n".join(lines)


def _ref(output: str, lat: int) -> str:
    """The miter's name of an output's reference after `lat` enabled edges."""
    return f"ref_{'valid' if output == 'out_valid' else output}_{lat}"


METHODS = ("auto", "direct", "compositional")
COMPOSABLE = ("sliced adders and subtractors, and sums and multipliers whose final adder has "
              f"at most {DIRECT_UP_TO} bits, without reset_data")


def prove(plan: Plan, depth: int | None = None, timeout: float | None = None,
          verilog: str | None = None, method: str = "auto") -> Proof:
    """Prove the unit of `plan` (or the given Verilog text of it) against the specification,
    all within `timeout` seconds (`tools.ToolTimeout` when they run out).

    `direct` unrolls the whole unit against the reference; `compositional` (sliced units
    of the kinds that offer it, see `compose.py`) proves each slice's logic against `+` and
    the pipeline structure apart, which stays fast at any width; `auto` takes the direct
    proof where the plan says it stays fast (`Plan.composes_by_default`) and the
    compositional one above.
    """
    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}, not {method!r}")
    if method == "compositional" and not plan.can_compose:
        raise ValueError(f"the compositional proof covers {COMPOSABLE}; use --method direct")
    start = time.monotonic()
    limit = tools.Deadline(timeout)  # one limit for the whole proof, shared by every run
    c, lat = plan.config, plan.latency
    depth = depth or lat + 1 + plan.unit.settle
    if depth <= lat:
        raise ValueError(f"depth {depth} must exceed the latency ({lat})")
    text = verilog if verilog is not None else emit.unit_verilog(plan)
    if method == "auto":
        method = "compositional" if plan.composes_by_default else "direct"
    try:
        net = netlist(c.name, text, limit)
    except Rejected as exc:  # the unit on disk, as edited, is not a unit Yosys can read
        return Proof(False, "structural check", 0, f"not proved: Yosys cannot read the unit "
                     f"{c.name}: {exc}", time.monotonic() - start)
    problem = ports_differ(plan, net) or structure(plan, net)
    if problem:
        return Proof(False, "structural check", 0, f"not proved: {problem}",
                     time.monotonic() - start)
    outputs = tuple(p.name for p in plan.ports if p.direction == "output")
    done, data = "", tuple(o for o in outputs if o != "out_valid")
    if method == "compositional":
        found = plan.prove_parts(net, c.name, limit)
        if found.problem:
            return Proof(False, found.method, 0, f"not proved: {found.problem}",
                         time.monotonic() - start)
        done, data = f"{found.method}; ", ()
    log, runs = PROVED, _runs(c, data, plan.unit.keeps_result)
    for compare, hold_rst in runs:
        log = _bounded(plan, text, depth, compare, hold_rst, limit)
        if PROVED not in log:
            break
    ranged = f"cycle{'s' if depth > lat + 1 else ''} {lat + 1}" + (
        f"..{depth}" if depth > lat + 1 else "")
    start_state = ("after a clear from an arbitrary register state" if plan.unit.settle
                   else "from an arbitrary register state")
    done += (f"bounded check of {depth} cycles {start_state} (Yosys sat), "
             f"{', '.join(o for outs, _ in runs for o in outs)} compared on {ranged}"
             if runs else "")
    done = done.removesuffix("; ")
    if c.enable:
        done += "; en held high, every flip-flop enabled by en (structural check)"
    if c.reset != "none":
        done += (f"; {c.reset} reset {reset.of(c).name} clears "
                 + ("every flip-flop" if c.reset_data else "only flip-flops outside the data "
                    "path") + " (structural check)")
        if plan.unit.keeps_result and not c.reset_data and data:
            done += (f"; the total proved with {reset.of(c).held()} (a reset of the valid "
                     "bits leaves it undefined until the next clear)")
    seconds = time.monotonic() - start
    if PROVED in log:
        return Proof(True, done, depth, f"proved: {done}; {seconds:.1f} s", seconds)
    if FAILED in log:
        return Proof(False, done, depth, "FAILED: " + _counterexample(log, plan, compare),
                     seconds)
    raise no_verdict(limit)


def _runs(c, data: tuple[str, ...], total: bool) -> list[tuple[tuple[str, ...], bool]]:
    """The bounded runs: (outputs compared, rst held low).  The valid chain is compared with
    rst free; the data outputs too, unless `reset_data` clears them (the structural check
    shows that rst clears every register) or they are a running `total` that a reset of
    the valid bits leaves undefined until the next clear (README): then rst is held low
    for them."""
    if not c.reset_data and not (total and c.reset != "none"):
        return [(data + (("out_valid",) if c.valid else ()), False)] if data or c.valid else []
    runs = [(data, True)] if data else []
    return runs + ([(("out_valid",), False)] if c.valid else [])


def _bounded(plan: Plan, verilog: str, depth: int, compare: tuple[str, ...], hold_rst: bool,
             timeout: tools.Deadline) -> str:
    """The direct proof: `sat -seq depth -prove-skip lat` on the miter; returns Yosys's log."""
    c, lat = plan.config, plan.latency
    name = c.name
    files = {f"{name}.v": verilog, "miter.v": miter_verilog(plan, compare)}
    shows = ["ok"] + [o for o in compare]
    shows += [_ref(o, lat) for o in compare]
    sets = ("-set en 1 " if c.enable else "") + (reset.of(c).inactive_set() if hold_rst else "")
    sets += plan.unit.proof_sets(c)
    script = [f"read_verilog {name}.v", "read_verilog miter.v",
              f"hierarchy -top {MITER} -check", "proc", "flatten", "async2sync",
              "attrmap -remove init", "opt_clean",
              f"sat -seq {depth} -prove-skip {lat} -prove ok 1 " + sets
              + sat_limit(timeout) + "-show-inputs " + " ".join(f"-show {s}" for s in shows)]
    log, _ = run_yosys("\n".join(script) + "\n", files, timeout)
    return log
