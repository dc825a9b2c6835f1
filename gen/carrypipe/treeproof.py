"""Compositional proof of a carry-save unit: the tree counter by counter, the final adder as
a pipelined adder, the wiring traced.

A direct proof of a multiplier (`prove.py`) asks the SAT solver whether the unit equals
`a * b`: two different multiplier structures, which solvers find hard past about 8 x 8 bits
(docs/verification.md).  This proof splits the claim into parts that stay small:

1. Arithmetic of the plan (here, exact, in Python).  The tree's dots after the last rank
   plus the constant left for the final adder's carry equal, as a weighted sum modulo 2^N,
   the matrix's dots plus its constant K: every counter's outputs are replaced by its inputs
   (a full adder's sum s and carry c satisfy s + 2c = x + y + z; a half adder's s + 2c =
   x + y, or x + y + 1 when it adds a one-bit of K), every register by the dot it loads,
   every constant absorbed by a dot by its complement and copy, and what is left must be
   the matrix term for term (`arithmetic`).
2. The Verilog is the plan (Yosys sat, every flip-flop cut: its output a free input, its data
   input an output).  For every stage, every register bit `row<r>_stage_<i>[k]` loads
   exactly the planned function of the registers of the rank before it (of the inputs, or
   of the input register, for stage 0): the planned counter's sum or carry, a dot passed on,
   possibly complemented, a partial product of the input bits.  The solver proves this for
   all values of every free input, so a register that read anything else would fail.
3. The final adder (Yosys sat, bounded, with the last rank's registers cut into free
   inputs): the result equals row0 + row1 (+ the constant left, + the finished low bits) of
   the rows as they were A cycles earlier, A the final adder's stages, from any state of its
   registers (`sat -seq A+1 -prove-skip A`, the argument of `prove.py`).
4. Valid and clocking (in `prove.py`): the structural check and the bounded run on
   `out_valid`, as for every unit.

Together: rank 0 holds the matrix's dots of the inputs one cycle before (2, with the input
register: a plain flip-flop per bit, traced); rank i holds the planned dots of rank i-1 one
cycle before (2); so the last rank's weighted sum, plus the constant left, is the matrix's
sum plus K of the inputs T cycles before (1), which is the exact result modulo 2^N by the
partial-product identity of the unit (the schoolbook AND array; Baugh and Wooley 1973 for
signed operands; MacSorley 1961 for radix-4 Booth; the sign-bit rule of common practice for
signed sums); and the result is that sum A cycles later (3).  The identity itself is not
re-proved per unit: the tests check it against Python's integers (exhaustively for small
operands, `tests/test_carrysave.py`).
"""

from __future__ import annotations

import json

from . import reset
from .compose import Cut, Outcome, Wiring, first_failing_part
from .header import each_of, plural
from .miter import chained
from .reduction import Dot, Tree
from .solver import FAILED, PROVED, is_ff, no_verdict, run_yosys, sat_limit
from .tools import Deadline

ADDER_MITER = "carrypipe_rows"
REST = "carrypipe_rest"


def arithmetic(tree: Tree) -> str | None:
    """Part 1: None when the planned tree preserves the weighted sum, else the problem."""
    mod = 1 << tree.width
    poly: dict[int, int] = {}  # value -> coefficient (mod 2^N)
    const = (1 << (tree.width - 1)) if tree.flip_carry else 0

    def add(d: Dot, weight: int) -> None:
        nonlocal const
        if d.invert:  # 2^k (1 - v)
            const += weight
            weight = -weight
        poly[d.value] = (poly.get(d.value, 0) + weight) % mod

    for k, col in enumerate(tree.final):
        for d in col:
            add(d, 1 << k)
    for v in reversed(tree.values):  # a value's inputs are numbered before it
        coef = poly.pop(v.index, 0)
        if v.kind == "leaf":
            if coef:
                poly[v.index] = coef
            continue
        if v.kind == "reg":
            if coef:
                add(v.source, coef)
            continue
        c = tree.counters[v.counter]
        if v.kind == "carry":  # handled with its sum, which is numbered before it
            if coef:
                poly[v.index] = coef
            continue
        carry = poly.pop(c.carry, 0) if c.carry is not None else 0
        if c.carry is not None and carry != (2 * coef) % mod:
            return (f"counter {c.index} (column {c.column}): its carry weighs {carry}, not "
                    f"twice its sum's {coef}")
        if c.carry is None and (coef * 2) % mod:
            return f"counter {c.index} drops a carry that counts (column {c.column})"
        for d in c.inputs:
            add(d, coef)
        const += coef * c.one  # a half adder's one-bit of K: s + 2c = x + y + 1
    want = {}
    for v in tree.values:
        if v.kind == "leaf":
            want[v.index] = (1 << v.column) % mod
    got = {k: c for k, c in poly.items() if c}
    if got != want:
        wrong = sorted(set(got) ^ set(want) | {k for k in got if got.get(k) != want.get(k)})
        return f"the tree's dots do not add up to the matrix (value {wrong[0]})"
    if (const - tree.matrix.constant) % mod:
        return "the tree's constants do not add up to the matrix's"
    return None


def _bit(mod: dict, name: str, position: int):
    """The net of bit `position` of vector `name` (a one-bit vector is declared without a
    range, so its only bit is its position)."""
    info = mod["netnames"][name]
    bits = info["bits"]
    return bits[0] if len(bits) == 1 else bits[position - info.get("offset", 0)]


class _Reference:
    """Verilog of the planned value of every dot, from the cut unit's nets."""

    def __init__(self, plan, wiring: Wiring, cut: Cut):
        self.plan, self.wiring, self.cut = plan, wiring, cut
        self.lines: list[str] = []
        self.done: set[int] = set()

    def source(self, name: str, j: int) -> str:
        """Input `name` bit j as stage 0 reads it: the port, or the input register."""
        if self.plan.config.register_inputs:
            bit, problem = self.wiring.after(name, j, 1)
            if problem:
                raise _Trouble(f"input register: {problem}")
            return self.cut.ref(bit)
        return self.cut.ref(self.wiring.port[name][j])

    def ext(self, name: str, width: int, j: int) -> str:
        """Bit j of an input extended past its top (signed: its sign bit; else 0)."""
        if j < 0 or (j >= width and not self.plan.config.signed):
            return "1'b0"
        return self.source(name, min(j, width - 1))

    def leaf(self, leaf) -> str:
        c = self.plan.config
        op, args = leaf.op, leaf.args
        if op == "bit":
            e = self.source(args[0], args[1])
        elif op == "and":
            e = f"{self.source('a', args[0])} & {self.source('b', args[1])}"
        else:
            k = args[0]
            n, m = c.width_b, c.width
            hi, mid, lo = (self.ext("b", n, j) for j in (2 * k + 1, 2 * k, 2 * k - 1))
            one = f"({mid} ^ {lo})"
            two = f"(({hi} & ~{mid} & ~{lo}) | (~{hi} & {mid} & {lo}))"
            low = f"({one} & {self.ext('a', m, 0)})"
            if op == "booth_low":
                e = low
            elif op == "booth_carry":
                e = f"{hi} & ~{low}"
            else:
                i = args[1]
                e = (f"((({one} & {self.ext('a', m, i)}) | ({two} & {self.ext('a', m, i - 1)})) "
                     f"^ {hi})")
        return f"~({e})" if leaf.invert else f"({e})"

    def value(self, index: int) -> str:
        """The name of a wire holding value `index` (defined on first use)."""
        tree: Tree = self.plan.tree
        v = tree.values[index]
        if v.kind == "reg":
            return self.cut.ref(self.q_bit(v))
        if index not in self.done:
            self.done.add(index)
            if v.kind == "leaf":
                e = self.leaf(v.leaf)
            else:
                cnt = tree.counters[v.counter]
                ins = [self.dot(d) for d in cnt.inputs]
                if v.kind == "sum":
                    e = f"~({' ^ '.join(ins)})" if cnt.one else " ^ ".join(ins)
                elif cnt.kind == "fa":
                    x, y, z = ins
                    e = f"{x} & {y} | {x} & {z} | {y} & {z}"
                else:
                    e = (" | " if cnt.one else " & ").join(ins)
            self.lines.append(f"  wire ref_v{index} = {e};")
        return f"ref_v{index}"

    def dot(self, d: Dot) -> str:
        name = self.value(d.value)
        return f"~{name}" if d.invert else name

    def q_bit(self, v):
        """The unit's net of register value v: bit `column` of `row<r>_stage_<i>`."""
        return _bit(self.wiring.mod, _reg_name(self.plan, v), v.column)


class _Trouble(Exception):
    """A structural problem found while tracing (the message says which)."""


def _reg_name(plan, v) -> str:
    """The Verilog register holding tree register value v (the plan's rank words)."""
    return plan.row_register(v.stage - 1, v.row, v.column)


def stage_files(plan, wiring: Wiring) -> tuple[dict[str, str], int]:
    """Part 2's files: per stage, every register bit against its planned value."""
    tree: Tree = plan.tree
    cut = Cut(wiring)
    ref = _Reference(plan, wiring, cut)
    body, oks = [], []
    for stage in range(1, tree.stages + 1):
        checks = []
        for col in tree.ranks[stage - 1]:
            for d in col:
                v = tree.values[d.value]
                q = ref.q_bit(v)
                if q not in wiring.d_of:
                    raise _Trouble(f"{_reg_name(plan, v)}[{v.column}] is not a plain flip-flop")
                want = ref.dot(v.source)
                checks.append(f"({cut.ref(wiring.d_of[q])} == {want})")
        body += ref.lines
        ref.lines = []
        j = stage - 1
        body.append(f"  wire [{len(checks) - 1}:0] eq_{j} = {{{', '.join(checks)}}};")
        body.append(f"  wire ok_{j} = &eq_{j};")
        oks.append(f"ok_{j}")
    return cut.files(body, oks), len(oks)


def adder_files(plan, wiring: Wiring) -> dict[str, str]:
    """Part 3's files: the unit with the last rank's flip-flops cut into an input `rows_q`,
    and a miter of its result against the rows' sum, delayed by the final adder."""
    tree: Tree = plan.tree
    c = plan.config
    mod = dict(wiring.mod)
    regs = [tree.values[d.value] for col in tree.final for d in col]
    q_of = {}
    for v in regs:
        q_of[v.index] = _bit(mod, _reg_name(plan, v), v.column)
    rows_q = list(q_of.values())
    cells = {n: cell for n, cell in mod["cells"].items()
             if not (is_ff(cell) and any(b in rows_q for b in cell["connections"]["Q"]))}
    ports = dict(mod["ports"])
    ports["rows_q"] = {"direction": "input", "bits": rows_q}
    rest = {**mod, "cells": cells, "ports": ports}
    width = tree.width
    index = {q: i for i, q in enumerate(rows_q)}
    rows = []
    for r in (0, 1):
        bits = []
        for k in range(width):
            col = tree.final[k]
            bits.append(f"rows_q[{index[q_of[col[r].value]]}]" if len(col) > r else "1'b0")
        rows.append("{" + ", ".join(reversed(bits)) + "}")
    inputs = [n for n, p in mod["ports"].items() if p["direction"] == "input"]
    outputs = [(n, len(p["bits"])) for n, p in mod["ports"].items()
               if p["direction"] == "output"]
    lat = len(plan.adder_stages) if plan.adder else 0
    result = plan.unit.result
    flip = f"{width}'d{1 << (width - 1)}" if tree.flip_carry else f"{width}'d0"
    en = "en" if c.enable else "1'b1"
    lines = [f"module {ADDER_MITER}({', '.join(inputs + ['rows_q', 'ok'])});",
             *(f"  input [{len(mod['ports'][n]['bits']) - 1}:0] {n};" for n in inputs),
             f"  input [{len(rows_q) - 1}:0] rows_q;", "  output ok;",
             *(f"  wire [{w - 1}:0] {n};" for n, w in outputs),
             f"  {REST} unit ({', '.join(f'.{n}({n})' for n in inputs + ['rows_q'])}, "
             + ", ".join(f".{n}({n})" for n, _ in outputs) + ");",
             *chained("ref_rows", rows[0], rows[1], "1'b0", width),
             *chained("ref_all", f"ref_rows[{width - 1}:0]", flip, "1'b0", width),
             f"  wire [{width - 1}:0] ref_0 = ref_all[{width - 1}:0];"]
    for k in range(1, lat + 1):
        lines.append(f"  reg [{width - 1}:0] ref_{k};")
    if lat:
        lines += ["  always @(posedge clk) begin", f"    if ({en}) begin",
                  *(f"      ref_{k} <= ref_{k - 1};" for k in range(1, lat + 1)),
                  "    end", "  end"]
    lines += [f"  assign ok = {result} == ref_{lat};", "endmodule"]
    return {"rest.json": json.dumps({"modules": {REST: rest}}), "rows.v": "\n".join(lines) + "\n"}


def prove_tree(plan, net: dict, module: str, timeout: Deadline) -> Outcome:
    """Parts 1 to 3 (see the module docstring)."""
    tree: Tree = plan.tree
    stages = tree.stages
    last = ("the final adder proved on the cut rows" if plan.adder
            else "the result (no final adder: one bit a column) proved on the cut rows")
    method = (f"compositional: the tree's arithmetic checked exactly, "
              f"{each_of(stages, 'tree stage')} proved register by register against the plan "
              f"with every flip-flop cut, {last} (Yosys sat)")
    problem = arithmetic(tree)
    if problem:
        return Outcome(method, f"the plan's tree: {problem}")
    wiring = Wiring(net, module)
    if wiring.undefined:
        return Outcome(method, "the netlist has undefined (x) bits")
    try:
        files, count = stage_files(plan, wiring)
    except _Trouble as exc:
        return Outcome(method, str(exc))
    bad = first_failing_part(files, count, timeout)
    if bad is not None:
        return Outcome(method, f"stage {bad}: a register does not load its planned dot "
                               "(flip-flops cut)")
    c = plan.config
    lat = len(plan.adder_stages) if plan.adder else 0
    sets = ("-set en 1 " if c.enable else "") + (reset.of(c).inactive_set()
                                                 if c.reset != "none" else "")
    script = ["read_json rest.json", "read_verilog rows.v", f"hierarchy -top {ADDER_MITER} -check",
              "proc", "flatten", "async2sync", "attrmap -remove init", "opt_clean",
              f"sat -seq {lat + 1} -prove-skip {lat} -prove ok 1 {sets}{sat_limit(timeout)}"]
    log, _ = run_yosys("\n".join(script) + "\n", adder_files(plan, wiring), timeout)
    if FAILED in log:
        return Outcome(method, "the final adder: the result is not the sum of the rows "
                               f"{plural(lat, 'cycle')} before (last rank cut)")
    if PROVED not in log:
        raise no_verdict(timeout)
    return Outcome(method, None)
