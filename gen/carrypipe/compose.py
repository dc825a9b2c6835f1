"""Compositional proof of a sliced unit: each slice's logic against `+`, then the structure.

The direct proof (`prove.py`) unrolls the whole unit for L + 1 cycles, so its size grows
with the latency times the register bits (the triangles grow as W^2 / k).  This proof splits
the claim into parts that each stay small at any width:

1. Structure (here, in Python, on the netlist of `solver.netlist`).  A *plain* flip-flop is
   one clocked by the rising edge of `clk`, enabled by `en` alone if the unit has `en`, and
   without reset.  For slice j (bits lo..hi, k bits) with entry cycle e_j (the input
   register plus its skew wait, from the plan) it finds
     A_j[i], B_j[i]  the one net that carries a[i], b[i] through exactly e_j plain
                     flip-flops (it must exist and be unique);
     C_j             cin through e_0 plain flip-flops for j = 0 (0 without `carry_in`), else
                     the output of the plain flip-flop `carry_stage_{j-1}`;
     S_j[i]          the net that reaches sum[i] through exactly L - e_j plain flip-flops;
     K_j             the data input of `carry_stage_j`, or for the last slice the net that
                     reaches cout through L - e_j plain flip-flops;
     V               of a signed unit, the net that reaches overflow through L - e_j plain
                     flip-flops of the last slice j;
   and checks e_{j+1} = e_j + 1.
2. Cells (Yosys sat, combinational).  Every flip-flop is cut: its output becomes a free
   input and its data input an output.  Then `{K_j, S_j} == A_j + B_j + C_j` is proved for
   every slice, for all values of all free inputs (the unit's inputs and every cut output):
   a slice whose logic reads anything but its own A_j, B_j, C_j fails here.  Of a signed
   unit the last slice also proves V == the signed overflow of A_j op B_j op C_j taken as
   numbers of the slice's k bits (`miter.signed_overflow`).
3. Valid (in `prove.py`): the direct bounded proof with only `out_valid` compared, which is
   tiny because the data path drops out.

Why 1 and 2 prove `{cout, sum}(t) = (a + b + cin)(t - L)` for every t >= L from any start
state: a chain of n plain flip-flops shows at cycle t its input of cycle t - n once t >= n.
So A_j(t) = a[lo..hi](t - e_j) for t >= e_j.  By induction over j, C_j(t) is the carry into
bit lo of a + b + cin of cycle t - e_j: for j = 0 by the chain; for j > 0, C_j(t) =
K_{j-1}(t - 1), which by part 2 is the carry out of bits lo'..hi' of slice j - 1 added with
its carry-in, at cycle t - 1 = (t - e_j) + e_{j-1}; the schoolbook rule (common practice)
makes that the carry into bit lo.  Then S_j(t) holds bits lo..hi of the sum of cycle t - e_j,
and sum[i](t) = S_j(t - (L - e_j)) holds bit i of the sum of cycle t - L.  The same holds
for cout.  The overflow of a W-bit signed operation depends only on the operands' top bits
and the carry (borrow) into the top bit (their exclusive or with the carry out of it, common
practice); the top slice's k-bit operation has the same top bits and, by the induction, the
same carry into them, so its overflow is the unit's.  With `enable`, the structural check
of `prove.py` adds what the direct proof adds.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass

from .header import each_of, plural
from .miter import chained, signed_overflow
from .plan import Plan
from .solver import FAILED, PROVED, is_ff, no_verdict, run_yosys, sat_limit
from .tools import Deadline

CHECK = "carrypipe_slices"
CUT = "carrypipe_cut"


@dataclass(frozen=True)
class Outcome:
    method: str
    problem: str | None  # None when every slice and the structure check out


class Wiring:
    """The flip-flop chains of a netlist: which net carries which input, how late."""

    def __init__(self, net: dict, module: str):
        self.mod = mod = net["modules"][module]
        self.port = {n: p["bits"] for n, p in mod["ports"].items()}
        self.inputs = {bit: f"{n}[{i}]" for n, p in mod["ports"].items()
                       if p["direction"] == "input" for i, bit in enumerate(p["bits"])}
        clk = self.port["clk"][0]
        en = self.port["en"][0] if "en" in self.port else None
        self.d_of: dict[int, object] = {}  # output bit of a plain flip-flop -> its data bit
        self.cut: set[int] = set()  # output bits of every flip-flop
        self.undefined = any("x" in bits for cell in mod["cells"].values()
                             for bits in cell["connections"].values())
        for cell in mod["cells"].values():
            if not is_ff(cell):
                continue
            con, par = cell["connections"], cell["parameters"]
            self.cut.update(b for b in con["Q"] if isinstance(b, int))
            plain = (con.get("CLK") == [clk] and int(par.get("CLK_POLARITY", "0"), 2) == 1
                     and (cell["type"] == "$dff" if en is None else
                          cell["type"] == "$dffe" and con["EN"] == [en]
                          and int(par["EN_POLARITY"], 2) == 1))
            if plain:
                self.d_of.update(zip(con["Q"], con["D"]))
        self._back: dict = {}
        self.late: dict[tuple, list] = {}  # (source bit, flip-flops) -> nets carrying it
        for bit in list(self.inputs) + list(self.d_of):
            self.late.setdefault(self.back(bit), []).append(bit)

    def back(self, bit) -> tuple:
        """(source, n): the net that reaches `bit` through n plain flip-flops and no logic."""
        path = []
        while bit in self.d_of and bit not in self._back:
            path.append(bit)
            bit = self.d_of[bit]
        src, n = self._back.get(bit, (bit, 0))
        for step in reversed(path):
            n += 1
            self._back[step] = (src, n)
        return src, n

    def after(self, port: str, index: int, cycles: int) -> tuple[object, str | None]:
        """The one net carrying port[index] after `cycles` plain flip-flops, or a problem."""
        found = self.late.get((self.port[port][index], cycles), [])
        if len(found) == 1:
            return found[0], None
        if not found:
            return None, (f"{port}[{index}] does not reach its slice through exactly "
                          f"{plural(cycles, 'plain flip-flop')}")
        return None, f"{port}[{index}] reaches its slice along {len(found)} different nets"

    def before(self, port: str, index: int, cycles: int) -> tuple[object, str | None]:
        """The net that reaches port[index] through exactly `cycles` plain flip-flops and no
        logic, or a problem (a constant, or another number of flip-flops)."""
        src, n = self.back(self.port[port][index])
        name = f"{port}[{index}]" if len(self.port[port]) > 1 else port
        if src in ("0", "1"):
            return None, f"{name} is the constant {src}, not a result of its slice"
        if n != cycles:
            return None, (f"{name} leaves its slice through {plural(n, 'plain flip-flop')}, "
                          f"not the {cycles} the latency requires")
        return src, None

    def register(self, name: str) -> int | None:
        """The output bit of the one-bit plain register `name`, if there is one."""
        info = self.mod["netnames"].get(name)
        if info and len(info["bits"]) == 1 and info["bits"][0] in self.d_of:
            return info["bits"][0]
        return None


def _has_overflow(plan: Plan) -> bool:
    """Whether the unit has a signed-overflow output (a signed adder or subtractor)."""
    return any(p.name == "overflow" for p in plan.ports)


@dataclass
class SliceNets:
    index: int
    a: list
    b: list
    c: object
    s: list
    k: object | None  # None: the last slice of a unit without carry_out
    v: object | None = None  # the overflow net of a signed unit's last slice


def trace(plan: Plan, wiring: Wiring) -> tuple[list[SliceNets], str | None]:
    """Part 1: the nets of every slice, or the first structural problem found."""
    if wiring.undefined:
        # Yosys sat (without undef modelling) reads an x as 0, which would prove too much.
        return [], "the netlist has undefined (x) bits"
    lat, cfg = plan.latency, plan.config
    entry = [plan.input_cycles + s.wait_before for s in plan.slices]
    found = []
    for s, e in zip(plan.slices, entry):
        j = s.index
        if j and entry[j] != entry[j - 1] + 1:
            return [], f"the plan's slice {j} does not enter one cycle after slice {j - 1}"
        if lat - e != 1 + s.wait_after:
            return [], f"the plan's slice {j} waits do not add up to the latency"
        nets = SliceNets(j, [], [], None, [], None)
        for i in range(s.lsb, s.msb + 1):
            for port, into in zip(plan.unit.operands, (nets.a, nets.b)):
                bit, problem = wiring.after(port, i, e)
                if problem:
                    return [], f"slice {j}: {problem}"
                into.append(bit)
            bit, problem = wiring.before(plan.unit.result, i, lat - e)
            if problem:
                return [], f"slice {j}: {problem}"
            nets.s.append(bit)
        if j == 0:
            nets.c = "0"
            port = plan.unit.carry_in_port(cfg)
            if port:
                nets.c, problem = wiring.after(port, 0, e)
                if problem:
                    return [], f"slice 0: {problem}"
        else:
            chain = f"{plan.unit.chain[0]}_stage_{j - 1}"
            nets.c = wiring.register(chain)
            if nets.c is None:
                return [], f"slice {j}: no plain one-bit register {chain}"
            found[-1].k = wiring.d_of[nets.c]
        problem = None
        if j == len(plan.slices) - 1 and cfg.carry_out:
            nets.k, problem = wiring.before(plan.unit.carry_out_port(cfg), 0, lat - e)
        if j == len(plan.slices) - 1 and _has_overflow(plan) and not problem:
            nets.v, problem = wiring.before("overflow", 0, lat - e)
        if problem:
            return [], f"slice {j}: {problem}"
        found.append(nets)
    return found, None


class Cut:
    """The unit with every flip-flop cut, and a checker module around it: each flip-flop's
    output becomes a free input (`cut_q`), its data input an output (`cut_d`); `ref(bit)`
    names a net of the unit in the checker (an input port bit, a cut output or a cut data
    input), adding it to the cut as it is first named."""

    def __init__(self, wiring: Wiring):
        self.wiring = wiring
        self.cut_q: list = []
        self.cut_d: list = []
        self.names: dict = {}

    def ref(self, bit) -> str:
        if bit in ("0", "1"):
            return f"1'b{bit}"
        if bit not in self.names:
            if bit in self.wiring.inputs:
                self.names[bit] = self.wiring.inputs[bit]
            elif bit in self.wiring.cut:
                self.names[bit] = f"cut_q[{len(self.cut_q)}]"
                self.cut_q.append(bit)
            else:
                self.names[bit] = f"cut_d[{len(self.cut_d)}]"
                self.cut_d.append(bit)
        return self.names[bit]

    def cat(self, bits) -> str:
        return "{" + ", ".join(self.ref(b) for b in reversed(bits)) + "}"

    def files(self, body: list[str], oks: list[str]) -> dict[str, str]:
        """cut.json (the cut unit) and check.v (module CHECK: `body`, then output `oks`,
        bit j of it the wire oks[j]); name every net in `body` first."""
        cut_q, cut_d = self.cut_q, self.cut_d
        mod = dict(self.wiring.mod)
        inputs = {n: p for n, p in mod["ports"].items() if p["direction"] == "input"}
        mod["cells"] = {n: c for n, c in mod["cells"].items() if not is_ff(c)}
        mod["netnames"] = {}  # the ports and cells name every net that matters; saves time
        mod["ports"] = {**inputs, "cut_q": {"direction": "input", "bits": cut_q or ["0"]},
                        "cut_d": {"direction": "output", "bits": cut_d or ["0"]}}
        decl = [f"  input [{len(p['bits']) - 1}:0] {n};" for n, p in inputs.items()]
        conns = [f".{n}({n})" for n in inputs] + [".cut_q(cut_q)", ".cut_d(cut_d)"]
        # `oks` is an output so that no pass drops the comparisons; one bit per part, no
        # wide AND (a 1024-deep expression would exhaust the Verilog front end's stack).
        check = [f"module {CHECK}({', '.join(list(inputs) + ['cut_q', 'oks'])});", *decl,
                 f"  input [{max(len(cut_q), 1) - 1}:0] cut_q;",
                 f"  output [{len(oks) - 1}:0] oks;",
                 f"  wire [{max(len(cut_d), 1) - 1}:0] cut_d;",
                 f"  {CUT} unit ({', '.join(conns)});", *body,
                 *(f"  assign oks[{j}] = {ok};" for j, ok in enumerate(oks)), "endmodule"]
        return {"cut.json": json.dumps({"modules": {CUT: mod}}),
                "check.v": "\n".join(check) + "\n"}


def cut_design(wiring: Wiring, nets: list[SliceNets], op: str) -> dict[str, str]:
    """Part 2's files: the unit with every flip-flop cut (JSON) and the checker (Verilog)."""
    cut = Cut(wiring)
    body = []
    for n in nets:
        k = len(n.s)
        body += chained(f"ref_{n.index}", cut.cat(n.a), cut.cat(n.b), cut.ref(n.c), k, op)
        got = cut.cat(n.s) if n.k is None else "{" + f"{cut.ref(n.k)}, " + cut.cat(n.s)[1:]
        want = f"ref_{n.index}[{k - 1}:0]" if n.k is None else f"ref_{n.index}"
        body.append(f"  wire ok_{n.index} = ({got} == {want});")
    oks = [f"ok_{n.index}" for n in nets]
    top = nets[-1]
    if top.v is not None:  # one part more: the overflow, after the slices' parts
        k = len(top.s)
        body += [f"  wire [{k - 1}:0] top_a = {cut.cat(top.a)};",
                 f"  wire [{k - 1}:0] top_b = {cut.cat(top.b)};"]
        body += signed_overflow("ovf", "top_a", "top_b", cut.ref(top.c), k, op)
        body.append(f"  wire ok_{len(nets)} = ({cut.ref(top.v)} == ovf);")
        oks.append(f"ok_{len(nets)}")
    return cut.files(body, oks)


def first_failing_part(files: dict[str, str], count: int, timeout: Deadline) -> int | None:
    """Prove `ok_j` of the checker for every part j, one solver run per part on its cone
    only (one run over every part at once is several times slower: the solver must refute
    every part's miter together).  The checker names part j's comparison `ok_j`.  Returns
    the first part whose proof fails, or None when all hold; a solver that ends without a
    verdict for each part is the environment's failure (`no_verdict`)."""
    limit = sat_limit(timeout)
    script = ["read_json cut.json", "read_verilog check.v", f"hierarchy -top {CHECK} -check",
              "proc", "flatten", "opt_clean"]
    script += [f"sat {limit}-prove ok_{j} 1 w:ok_{j} %ci*" for j in range(count)]
    log, _ = run_yosys("\n".join(script) + "\n", files, timeout)
    verdicts = re.findall(f"({re.escape(PROVED)}|{re.escape(FAILED)})", log)
    if len(verdicts) != count:
        raise no_verdict(timeout)
    return next((j for j, v in enumerate(verdicts) if v == FAILED), None)


def prove_slices(plan: Plan, net: dict, module: str, timeout: Deadline) -> Outcome:
    """Parts 1 and 2 for the unit whose netlist is `net` (see the module docstring)."""
    count = len(plan.slices)
    op = "+" if plan.unit.op == "add" else "-"
    spec = f"a {op} b {op} c"  # c: the carry (borrow) into the slice
    signed = _has_overflow(plan)
    method = (f"compositional: structure traced, {each_of(count, 'slice')} proved "
              f"against {spec}" + (", the last with its signed overflow," if signed else "")
              + " with every flip-flop cut (Yosys sat)")
    wiring = Wiring(net, module)
    nets, problem = trace(plan, wiring)
    if problem:
        return Outcome(method, problem)
    files = cut_design(wiring, nets, op)
    bad = first_failing_part(files, count + signed, timeout)
    if bad == count:
        return Outcome(method, f"slice {count - 1}: its logic does not give the signed "
                               f"overflow of {spec} on its own operand bits and carry-in "
                               "(cell check, flip-flops cut)")
    if bad is not None:
        return Outcome(method, f"slice {bad}: its logic does not compute {spec} on its own "
                               "operand bits and carry-in (cell check, flip-flops cut)")
    return Outcome(method, None)
