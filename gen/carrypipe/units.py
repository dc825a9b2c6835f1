"""Unit kinds: what a unit computes, chosen once by the config key `unit`.

A kind owns everything that depends on the operation: its ports (in the documented order:
clock and controls, operands, operand-side flags, results, result-side flags), its Python
reference model, its directed corner vectors, the reference of the proof's miter, its words
for the report, and the logic of one slice of the sliced pipeline.  Pipelines, emitters,
simulators and proofs read only this interface, never the kind's name.

The arithmetic kinds share one core: an adder or subtractor over operands x, y with a chain
bit (carry or borrow) handed from slice to slice.  `op` is "add" or "sub"; a subtractor's
registers hold borrows, so the `bout` port reads the chain directly.
"""

from __future__ import annotations

import random
from dataclasses import dataclass

from . import cells, prefix, reduction, reset
from . import dots as dm
from .header import plural
from .miter import chained, signed_overflow
from .netlist import Cmp, Const, Expr, Mux, Rep, bit, cat, part


CONTROL_PORTS = ("clk", *reset.NAMES, "en")  # a unit's clock, reset and enable


# The operations that form a carry-out port from the chain bit (and flags): the expression
# and its unit gates (an inverter costs none in the model).
CARRY_OUT_OPS = {"xor": (lambda chain, flag: chain ^ flag, prefix.UNIT_GATES.xor),
                 "not": (lambda chain: ~chain, 0)}


@dataclass(frozen=True)
class Port:
    name: str
    direction: str  # "input" or "output"
    width: int
    meaning: str

    @property
    def control(self) -> bool:
        """The clock, reset or enable: not data (the valid bits are data's companions)."""
        return self.name in CONTROL_PORTS


def to_signed(value: int, width: int) -> int:
    """Two's-complement reading of a `width`-bit pattern (IEEE 1364 signed arithmetic)."""
    return value - (1 << width) if value >> (width - 1) & 1 else value


class Model:
    """A reference over the accepted inputs, in order (an input with `en` low is not one).

    `step(inputs)` returns the outputs the unit shows `latency` accepted inputs later.  The
    stateless kinds compute from the inputs alone; the accumulator keeps its total.
    """

    def __init__(self, kind: "Kind", config):
        self.kind, self.config = kind, config

    def step(self, inputs: dict) -> dict:
        return self.kind.compute(self.config, inputs)


class Kind:
    """The interface every unit kind offers (see the module docstring)."""

    name: str
    modes: tuple[str, ...] = ("slices", "levels", "blocks")
    refused: tuple[str, ...] = ()  # config keys that make no sense for the kind
    mode_keys: dict = {}  # key -> the pipeline modes that read it, where not as usual
    operands: tuple[str, ...] = ("a", "b")  # W-bit inputs that wait in the input skew
    travellers: tuple[str, ...] = ()  # one-bit inputs that every slice reads
    result: str | None = "sum"  # W-bit result that waits in the output deskew
    chain: tuple[str, ...] = ("carry",)  # bits handed from one slice to the next
    op: str = "add"
    verb: str = "computes"  # what a slice does to its bits, for comments
    noun: str = "unit"  # what the unit is called in texts ("adder slice", "a 64-bit adder")
    keeps_result = False  # each slice keeps its result bits and reads them back (a total)
    composable = False  # `prove --method compositional` covers its sliced units
    settle = 0  # cycles a bounded proof needs beyond latency + 1 (a state to build up)
    tree = False  # a carry-save kind: a counter tree, then a final adder (`TreePlan`)
    max_width = 4096  # `width` and `width_b` at most (config.MAX_WIDTH is the widest kind)
    # What its modes other than `slices` do, for the report's tips
    prefix_gain = ("pipelines the carry network itself, without skew or deskew triangles: "
                   "for wide units")

    # ---- ports ----
    def carry_in_port(self, c) -> str | None:
        return None

    def carry_out_port(self, c) -> str | None:
        return None

    def flag_inputs(self, c) -> list[Port]:
        """Operand-side flags (after the operands, before in_valid)."""
        return []

    def results(self, c) -> list[Port]:
        """Result ports (after the inputs, before out_valid)."""
        raise NotImplementedError

    def ports(self, c) -> list[Port]:
        ports = [Port("clk", "input", 1, "clock: every register loads on its rising edge")]
        if c.reset != "none":
            what = "every register" if c.reset_data else "the valid bits"
            how = "asynchronous" if c.reset == "async" else "synchronous"
            rst = reset.of(c)
            ports.append(Port(rst.name, "input", 1,
                              f"{how} reset, active {rst.active}: clears {what}"))
        if c.enable:
            ports.append(Port("en", "input", 1, "clock enable: while low every register holds"))
        ports += self.operand_ports(c)
        ports += self.flag_inputs(c)
        if c.valid:
            ports.append(Port("in_valid", "input", 1, "marks the inputs of this edge as valid"))
        ports += self.results(c)
        if c.valid:
            ports.append(Port("out_valid", "output", 1, "in_valid, delayed by the latency"))
        return ports

    def operand_meanings(self, c) -> list[tuple[str, str]]:
        return [("a", "first operand"), ("b", "second operand")]

    def operand_ports(self, c) -> list[Port]:
        """The operand inputs (W bits each unless the kind says otherwise)."""
        return [Port(n, "input", c.width, m) for n, m in self.operand_meanings(c)]

    # ---- reference ----
    def model(self, c) -> Model:
        return Model(self, c)

    def compute(self, c, inputs: dict) -> dict:
        raise NotImplementedError

    def directed(self, c) -> list[dict]:
        """Corner cases as input dicts (operands and flags; valid and gaps come later)."""
        raise NotImplementedError

    def random_inputs(self, c, rng: random.Random) -> dict:
        w = c.width
        top = (1 << w) - 1
        a = rng.getrandbits(w)
        pick = rng.random()
        if pick < 0.25:
            b = (top ^ a) ^ (1 << rng.randrange(w))  # one generate inside a long propagate run
        elif pick < 0.3:
            b = top ^ a
        elif pick < 0.35:
            b = a  # equal operands: the comparator's and the subtractor's corner
        else:
            b = rng.getrandbits(w)
        out = {"a": a, "b": b}
        for p in self.flag_inputs(c):
            out[p.name] = rng.getrandbits(1)
        return out

    def reference(self, c, en: str) -> list[str]:
        """Verilog lines of the proof's miter defining `ref_<output>_0` for every output but
        out_valid, from the input ports (`en` is the expression of an enabled edge)."""
        raise NotImplementedError

    def proof_sets(self, c) -> str:
        """Extra `sat` options that fix inputs of the proof (a stateful unit starts cleared)."""
        return ""

    # ---- the sliced pipeline ----
    def default_slice_width(self, width: int, mode: str) -> int:
        """The slice width when the config gives no split."""
        return width

    def has_carry_in(self, c) -> bool:
        """Whether the lowest slice's chain has an input (a port, or a flag)."""
        return False

    def has_carry_out(self, c) -> bool:
        """Whether the top slice registers its chain bit (for a port)."""
        return False

    def output_families(self, c) -> dict[str, str]:
        """One-bit output port -> the family of the top stage's register that drives it."""
        return {}

    def slice(self, ctx) -> list[tuple[tuple[str, ...], Expr]]:
        """What one slice registers: (register families, value) pairs (see `slices.py`)."""
        raise NotImplementedError

    def verdicts(self, below: int, at_most: int) -> tuple[tuple[str, str, tuple], ...]:
        """A unit without a result (a comparator's `levels` mode): each one-bit output's
        register family, operation and argument terms, from the network's top terms: the
        borrow of a - b with borrow-in 0 (`below`) and with borrow-in 1 (`at_most`)."""
        return ()

    entry_delay = 0  # unit gates in front of the adder's generate/propagate

    def slice_delay(self, c, cell: str, width: int, first: bool, top: bool, carry_in: bool,
                    carry_out: bool) -> int:
        """Unit-gate delay of one slice, register to register: its adder's network from
        operands `entry_delay` late, to the latest output the slice registers."""
        arr = prefix.arrivals(cells.STYLES[cell].carry_network(width), carry_in,
                              self.entry_delay)
        return max(self.slice_outputs(c, arr, width, first, top, carry_out))

    def slice_outputs(self, c, arr: prefix.Arrival, width: int, first: bool, top: bool,
                      carry_out: bool) -> list[int]:
        """Arrival of every output a slice registers, from its adder's arrivals."""
        return list(arr.sums) + ([arr.carry] if carry_out else [])

    # ---- words ----
    def phrase(self, c) -> str:
        raise NotImplementedError


def _operand_corners(w: int) -> list[tuple[int, int]]:
    top = (1 << w) - 1
    five = int("01" * w, 2) & top
    half = 1 << (w - 1)
    cases = [(0, 0), (top, top), (top, 1), (top, 0), (0, top), (five, top ^ five), (five, five),
             (top ^ five, top ^ five), (top ^ five, five), (half, half), (half, half - 1),
             (half - 1, half), (half - 1, half - 1), (1, 0), (0, 1)]
    cases += [((1 << k) - 1, 1) for k in range(1, w + 1)]  # a carry out of every bit in turn
    return [(a & top, b & top) for a, b in cases]


class Arithmetic(Kind):
    """Adder, subtractor, add/subtract: the W-bit result, the chain out, signed overflow."""

    chain_port = ("cin", "cout")
    # How the carry-out port is formed from the chain bit: an operation of CARRY_OUT_OPS and
    # the flag inputs it reads besides that bit; None when the port is the chain bit itself.
    carry_out_op: tuple[str, tuple[str, ...]] | None = None

    @property
    def transforms_carry_out(self) -> bool:
        return self.carry_out_op is not None

    @property
    def carry_out_gate(self) -> int:
        """Unit gates from the chain bit to the carry-out port."""
        return CARRY_OUT_OPS[self.carry_out_op[0]][1] if self.carry_out_op else 0

    def has_carry_in(self, c):
        return c.carry_in

    def has_carry_out(self, c):
        return c.carry_out

    def output_families(self, c):
        out = {self.chain_port[1]: self.chain[0]} if c.carry_out else {}
        return {**out, **({"overflow": "overflow"} if c.signed else {})}

    def slice(self, ctx):
        c, s = ctx.config, ctx.s
        x, y = ctx.ops[self.operands[0]], self.y_operand(ctx.ops[self.operands[1]], ctx.flags)
        cin = (ctx.chain_in[self.chain[0]] if s.index
               else self.core_carry_in(ctx.flags.get("carry_in"), ctx.flags))
        want = not ctx.top or c.carry_out
        total = cells.core(ctx.slot, s.cell, x, y, cin, self.op, want)
        if not (ctx.top and (c.signed or (want and self.transforms_carry_out))):
            return [((self.result,) + ((self.chain[0],) if want else ()), total)]
        t = ctx.slot.wire("total", total)  # the top slice reads bits of its total
        w, lsb = s.width, s.lsb
        loads = [((self.result,), t[lsb:lsb + w])]
        if want:
            loads.append(((self.chain[0],), self.core_carry_out(t[lsb + w], ctx.flags)))
        if c.signed:
            loads.append((("overflow",), self.overflow(bit(x, w - 1), bit(y, w - 1),
                                                      t[lsb + w - 1])))
        return loads

    def slice_outputs(self, c, arr, width, first, top, carry_out):
        g = prefix.UNIT_GATES
        gate = self.carry_out_gate if top else 0
        out = list(arr.sums) + ([arr.carry + gate] if carry_out else [])
        if top and c.signed:  # overflow: same sign & (s ^ x) on the top bits
            out.append(arr.sums[-1] + g.xor + g.and_or)
        return out

    def carry_in_port(self, c):
        return self.chain_port[0] if c.carry_in else None

    def carry_out_port(self, c):
        return self.chain_port[1] if c.carry_out else None

    def flag_inputs(self, c):
        port = self.carry_in_port(c)
        return [Port(port, "input", 1, self.carry_in_meaning)] if port else []

    def results(self, c):
        ports = [Port(self.result, "output", c.width, self.result_meaning(c))]
        if c.carry_out:
            ports.append(Port(self.chain_port[1], "output", 1, self.carry_out_meaning(c)))
        if c.signed:
            ports.append(Port("overflow", "output", 1,
                              "1 when the two's-complement result differs from the exact one"))
        return ports

    def subtracts(self, inputs: dict) -> bool:
        """Whether this input set asks for a - b - cin (else a + b + cin)."""
        return self.op == "sub"

    def compute(self, c, inputs):
        """The exact result of a +/- b +/- carry-in, as unsigned and as signed numbers: the
        result bits are it modulo 2^W; the chain out is bit W of the exact unsigned value (1
        for a carry, or for a negative difference: a borrow); overflow when the signed
        value does not survive the reduction (IEEE 1364 signed arithmetic)."""
        w, sign = c.width, -1 if self.subtracts(inputs) else 1
        cin = inputs.get(self.chain_port[0], 0)
        value = inputs["a"] + sign * (inputs["b"] + cin)
        signed_value = to_signed(inputs["a"], w) + sign * (to_signed(inputs["b"], w) + cin)
        out = {self.result: value % (1 << w)}
        if c.carry_out:
            out[self.chain_port[1]] = (value >> w) & 1
        if c.signed:
            out["overflow"] = int(to_signed(out[self.result], w) != signed_value)
        return out

    def reference(self, c, en):
        cin = self.chain_port[0] if c.carry_in else "1'b0"
        return self._reference(c, "", "+" if self.op == "add" else "-", cin)

    def _reference(self, c, tag: str, op: str, cin: str) -> list[str]:
        """`ref<tag>_x` = {chain, result} of a op b op cin, and its overflow bit."""
        w = c.width
        lines = chained(f"ref{tag}_x", "a", "b", cin, w, op)
        if c.signed:
            lines += signed_overflow(f"ref{tag}_ovf", "a", "b", cin, w, op)
        if tag:
            return lines
        lines.append(f"  wire [{w - 1}:0] ref_{self.result}_0 = ref_x[{w - 1}:0];")
        if c.carry_out:
            lines.append(f"  wire ref_{self.chain_port[1]}_0 = ref_x[{w}];")
        if c.signed:
            lines.append("  wire ref_overflow_0 = ref_ovf;")
        return lines

    def directed(self, c):
        cases = []
        for a, b in _operand_corners(c.width):
            flags = [{}]
            for p in self.flag_inputs(c):
                flags = [{**f, p.name: v} for f in flags for v in (0, 1)]
            cases += [{"a": a, "b": b, **f} for f in flags]
        return cases

    # ---- the slice core ----
    def y_operand(self, b: Expr, flags: dict) -> Expr:
        """The second operand of the adder core."""
        return b

    def core_carry_in(self, port: Expr | None, flags: dict) -> Expr | None:
        """The chain bit into the lowest slice (None: no carry, a constant 0)."""
        return port

    def core_carry_out(self, chain: Expr, flags: dict) -> Expr:
        """The `cout`/`bout` port value from the top slice's chain bit (`flags`: input name
        -> its expression)."""
        if self.carry_out_op is None:
            return chain
        op, names = self.carry_out_op
        return CARRY_OUT_OPS[op][0](chain, *(flags[n] for n in names))

    def overflow(self, x_msb: Expr, y_msb: Expr, s_msb: Expr) -> Expr:
        """Signed overflow from the top bits of the core's operands and result: an addition
        overflows when both operands share a sign the result lacks, a subtraction when the
        operands differ in sign and the result's sign is not the minuend's (common practice)."""
        same = ~(x_msb ^ y_msb) if self.op == "add" else x_msb ^ y_msb
        return same & (s_msb ^ x_msb)


class Plain(Arithmetic):
    """The adder ({cout, sum} = a + b + cin) and the subtractor ({bout, diff} = a - b - bin,
    the borrow being bit W of the two's-complement difference)."""

    composable = True

    def __init__(self, name: str, verb: str, op: str, result: str, chain: str,
                 chain_port: tuple[str, str], carry_in_meaning: str, carry_out_meaning: str):
        self.name, self.verb, self.op, self.result = name, verb, op, result
        self.noun = "adder" if op == "add" else "subtractor"
        self.chain, self.chain_port = (chain,), chain_port
        self.carry_in_meaning, self._carry_out_meaning = carry_in_meaning, carry_out_meaning

    def carry_out_meaning(self, c) -> str:
        return self._carry_out_meaning.replace(" + bin", " + bin" if c.carry_in else "")

    def _rhs(self, c) -> str:
        sym = "+" if self.op == "add" else "-"
        return f"a {sym} b" + (f" {sym} {self.chain_port[0]}" if c.carry_in else "")

    def result_meaning(self, c):
        return f"({self._rhs(c)}) mod 2^{c.width}"

    def phrase(self, c):
        lhs = f"{{{self.chain_port[1]}, {self.result}}}" if c.carry_out else self.result
        return f"{c.width}-bit {'signed ' if c.signed else ''}{self.noun}, {lhs} = {self._rhs(c)}"


class AddSub(Arithmetic):
    """sum = a + b + cin when sub = 0, a - b - cin when sub = 1: the adder core adds
    b ^ sub with carry-in cin ^ sub (two's complement), and cout is the core's carry out
    when adding and its complement, the borrow, when subtracting."""

    name = "addsub"
    verb = "adds or subtracts"
    noun = "adder/subtractor"
    result = "sum"
    chain = ("carry",)
    travellers = ("sub",)
    carry_in_meaning = "carry into bit 0 when adding, borrow when subtracting"

    def carry_out_meaning(self, c):
        return ("carry out when adding, borrow out (a < b" + (" + cin" if c.carry_in else "")
                + ") when subtracting")

    def flag_inputs(self, c):
        return [Port("sub", "input", 1, "0: add, 1: subtract (travels with its operands)"),
                *super().flag_inputs(c)]

    def result_meaning(self, c):
        cin = " + cin" if c.carry_in else ""
        return f"(a + b{cin}) or, with sub, (a - b{cin.replace('+', '-')}), mod 2^{c.width}"

    def subtracts(self, inputs):
        return bool(inputs["sub"])

    # cout = chain ^ sub: the borrow is the complement of the carry (in a prefix schedule
    # formed with the carry itself, g | p & g' ^ sub: four inputs, one LUT4)
    carry_out_op = ("xor", ("sub",))
    entry_delay = prefix.UNIT_GATES.xor  # b ^ sub

    def has_carry_in(self, c):
        return True  # sub is the carry into the two's-complement negation

    def y_operand(self, b, flags):
        return b ^ Rep(flags["sub"], b.width) if b.width > 1 else b ^ flags["sub"]

    def reference(self, c, en):
        w, cin = c.width, "cin" if c.carry_in else "1'b0"
        lines = self._reference(c, "_add", "+", cin) + self._reference(c, "_sub", "-", cin)
        lines.append(f"  wire [{w - 1}:0] ref_sum_0 = sub ? ref_sub_x[{w - 1}:0] : "
                     f"ref_add_x[{w - 1}:0];")
        if c.carry_out:
            lines.append(f"  wire ref_cout_0 = sub ? ref_sub_x[{w}] : ref_add_x[{w}];")
        if c.signed:
            lines.append("  wire ref_overflow_0 = sub ? ref_sub_ovf : ref_add_ovf;")
        return lines

    def core_carry_in(self, port, flags):
        return flags["sub"] if port is None else port ^ flags["sub"]

    def phrase(self, c):
        cin = " + cin" if c.carry_in else ""
        return (f"{c.width}-bit {'signed ' if c.signed else ''}{self.noun}, sum = "
                f"a + b{cin} (sub = 0) or a - b{cin.replace('+', '-')} (sub = 1)")


class Comparator(Kind):
    """lt, eq, gt of a and b.  Slice by slice: lt is the borrow of a - b (a subtractor's
    chain) and eq the AND of the slices' equalities; signed operands compare as unsigned
    ones with their sign bits inverted (common practice)."""

    name = "comparator"
    verb = "compares"
    noun = "comparator"
    modes = ("slices", "levels")
    refused = ("carry_in", "carry_out")
    # In levels mode the slices are compared in parallel and a tree combines their verdicts.
    mode_keys = {"slice_width": ("slices", "levels"), "slices": ("slices", "levels"),
                 "block_width": (), "wire_registers": (), "local_width": (),
                 "carry_increment": ()}
    TREE_SLICE = 8  # default slice width of the levels mode
    prefix_gain = ("compares all slices in parallel and joins their verdicts in a tree, "
                   "without the skew triangle")

    def default_slice_width(self, width, mode):
        return min(width, self.TREE_SLICE) if mode == "levels" else width
    result = None
    chain = ("lt", "eq")
    op = "sub"

    def results(self, c):
        how = "signed" if c.signed else "unsigned"
        return [Port("lt", "output", 1, f"a < b ({how})"),
                Port("eq", "output", 1, "a == b"),
                Port("gt", "output", 1, f"a > b ({how})")]

    def has_carry_out(self, c):
        return True  # the top slice's borrow is lt

    def slice_outputs(self, c, arr, width, first, top, carry_out):
        g = prefix.UNIT_GATES
        # eq: the bits' XNORs, an AND tree over them, and the slice below's eq
        eq = g.xor + (width - 1).bit_length() * g.and_or + (0 if first else g.and_or)
        lt = arr.carry
        return [lt, eq] + ([max(lt, eq) + g.and_or] if top else [])  # gt = ~(lt | eq)

    def output_families(self, c):
        return {"lt": "lt", "eq": "eq", "gt": "gt"}

    def verdicts(self, below, at_most):
        return (("lt", "copy", (below,)), ("eq", "and_not", (at_most, below)),
                ("gt", "not", (at_most,)))

    def slice(self, ctx):
        c, s = ctx.config, ctx.s
        x, y = ctx.ops["a"], ctx.ops["b"]
        eq = Cmp("==", x, y)
        if c.signed and ctx.top:  # signed order is unsigned order with the sign bits inverted
            w = s.width
            x, y = (cat(part(v, 0, w - 1), ~bit(v, w - 1)) if w > 1 else ~v for v in (x, y))
        lt = cells.core(ctx.slot, s.cell, x, y, ctx.chain_in.get("lt"), "sub", True, False)
        if "eq" in ctx.chain_in:
            eq = eq & ctx.chain_in["eq"]
        if not ctx.top:
            return [(("lt",), lt), (("eq",), eq)]
        lt, eq = ctx.slot.wire("lt", lt, 0).all, ctx.slot.wire("eq", eq, 0).all
        return [(("lt",), lt), (("eq",), eq), (("gt",), ~(lt | eq))]

    def reference(self, c, en):
        a, b = ("$signed(a)", "$signed(b)") if c.signed else ("a", "b")
        return [f"  wire ref_lt_0 = {a} < {b};", "  wire ref_eq_0 = a == b;",
                f"  wire ref_gt_0 = {a} > {b};"]

    def compute(self, c, i):
        a, b = i["a"], i["b"]
        if c.signed:
            a, b = to_signed(a, c.width), to_signed(b, c.width)
        return {"lt": int(a < b), "eq": int(a == b), "gt": int(a > b)}

    def directed(self, c):
        return [{"a": a, "b": b} for a, b in _operand_corners(c.width)]

    def phrase(self, c):
        return (f"{c.width}-bit {'signed' if c.signed else 'unsigned'} {self.noun}, lt/eq/gt of "
                "a, b")


class Accumulator(Kind):
    """acc_n = x_n when clear_n, else acc_(n-1) + x_n (mod 2^W), over accepted valid inputs.

    Each slice keeps its own bits of the total and takes the carry of the slice below one
    cycle later, with the same operand skew and result deskew as the adder; an input with
    in_valid low changes nothing (acc and cout repeat their last values)."""

    name = "accumulator"
    verb = "accumulates"
    noun = "accumulator"
    keeps_result = True
    settle = 8  # the bounded proof checks eight totals after the first clear
    modes = ("slices",)
    refused = ("carry_in", "signed")
    operands = ("x",)
    travellers = ("clear",)
    entry_delay = prefix.UNIT_GATES.and_or  # clear ? 0 : acc, one AND in front of the total
    result = "acc"
    chain = ("carry",)

    def operand_meanings(self, c):
        return [("x", "value to add")]

    def flag_inputs(self, c):
        return [Port("clear", "input", 1, "start a new total: acc = x (travels with x)")]

    def results(self, c):
        ports = [Port("acc", "output", c.width,
                      f"the running total (clear ? x : acc + x) mod 2^{c.width}")]
        if c.carry_out:
            ports.append(Port("cout", "output", 1, "carry out of that addition"))
        return ports

    def model(self, c):
        return _AccumulatorModel(self, c)

    def has_carry_out(self, c):
        return c.carry_out

    def output_families(self, c):
        return {"cout": "carry"} if c.carry_out else {}

    def proof_sets(self, c):
        return "-set-at 1 clear 1 " + ("-set-at 1 in_valid 1 " if c.valid else "")

    def reference(self, c, en):
        """The running total as one register, updated on every accepted valid input."""
        w = c.width
        take = f"{en} && in_valid" if c.valid else en
        lines = [f"  reg [{w - 1}:0] ref_total;", "  reg ref_carry;",
                 *chained("ref_next", f"clear ? {w}'d0 : ref_total", "x", "1'b0", w),
                 f"  wire ref_take = {take};",
                 f"  wire [{w - 1}:0] ref_acc_0 = ref_take ? ref_next[{w - 1}:0] : ref_total;",
                 "  always @(posedge clk) begin", "    if (ref_take) begin",
                 f"      ref_total <= ref_next[{w - 1}:0];", f"      ref_carry <= ref_next[{w}];",
                 "    end", "  end"]
        if c.carry_out:
            lines.append(f"  wire ref_cout_0 = ref_take ? ref_next[{w}] : ref_carry;")
        return lines

    def slice(self, ctx):
        c, s = ctx.config, ctx.s
        total = ctx.state["acc"].all
        base = Mux(ctx.flags["clear"], Const(0, s.width), total)
        want = not ctx.top or c.carry_out
        value = cells.core(ctx.slot, s.cell, ctx.ops["x"], base, ctx.chain_in.get("carry"),
                           "add", want)
        families = ("acc", "carry") if want else ("acc",)
        if "valid" in ctx.flags:  # an invalid input changes nothing
            value = Mux(ctx.flags["valid"], value, cat(*(ctx.state[f].all for f in families)))
        return [(families, value)]

    def slice_outputs(self, c, arr, width, first, top, carry_out):
        out = super().slice_outputs(c, arr, width, first, top, carry_out)
        mux = 2 * prefix.UNIT_GATES.and_or if c.valid else 0  # valid ? new : held
        return [t + mux for t in out]

    def directed(self, c):
        w = c.width
        top = (1 << w) - 1
        out = [{"x": top, "clear": 1}, {"x": 1, "clear": 0}, {"x": top, "clear": 0},
               {"x": top, "clear": 0}, {"x": 0, "clear": 1}, {"x": 0, "clear": 0}]
        out += [{"x": (1 << k) - 1, "clear": k == 1} for k in range(1, w + 1)]
        out += [{"x": 1, "clear": 0}, {"x": top, "clear": 0}, {"x": 1 << (w - 1), "clear": 1},
                {"x": 1 << (w - 1), "clear": 0}]
        return [{"x": v["x"] & top, "clear": int(v["clear"])} for v in out]

    def random_inputs(self, c, rng):
        return {"x": rng.getrandbits(c.width), "clear": int(rng.random() < 0.1)}

    def phrase(self, c):
        cout = ", cout = its carry out" if c.carry_out else ""
        return f"{c.width}-bit {self.noun}, acc = clear ? x : acc + x{cout}"


class _AccumulatorModel(Model):
    def __init__(self, kind, config):
        super().__init__(kind, config)
        self.total, self.cout = None, 0

    def step(self, inputs):
        c = self.config
        if inputs.get("in_valid", 1):
            base = 0 if inputs["clear"] else self.total
            if base is None:
                raise ValueError("an accumulator's first valid input must clear it")
            value = base + inputs["x"]
            self.total, self.cout = value % (1 << c.width), value >> c.width
        out = {"acc": self.total}
        if c.carry_out:
            out["cout"] = self.cout
        return out


class FinalAdder(Plain):
    """The final adder of a carry-save unit: the two rows of the tree's last rank added
    (`row0` holds every column's first dot, `row1` the second, where there is one), the
    result bits named as the unit's.  `flip`: the constant 2^(N-1) of a signed unit met no
    dot of the tree, so the carry out, the result's top bit, is complemented."""

    operands = ("row0", "row1")

    def __init__(self, result: str, flip: bool):
        super().__init__("final adder", "adds", "add", result, "carry", ("cin", "cout"),
                         "carry into bit 0", "carry out of the top bit")
        self.carry_out_op = ("not", ()) if flip else None


def _clog2(n: int) -> int:
    return (n - 1).bit_length()


class CarrySave(Kind):
    """What the sum and the multiplier share: a counter tree, then a final adder (the
    modes are the final adder's), carry-in and carry-out refused."""

    tree = True
    verb = "adds"
    operator = "+"  # the Verilog operator of `tree: native`

    def adder_width(self, values) -> int:
        """The final adder's width for a config (or its values): what `slices` sums to."""
        return self.counter_tree(values).rows.adder_width

    def counter_tree(self, values) -> reduction.Tree:
        """The counter tree of a config (or its values)."""
        return reduction.tree_of(self, values)

    def matrix(self, width: int, width_b: int, operands: int, signed: bool,
               partial_products: str) -> dm.Matrix:
        """The dot matrix the tree reduces (whose sum and constant are the result)."""
        raise NotImplementedError

    def tree_phrase(self, c) -> str:
        """What the tree reduces, for the report ("8 operands of 32 bits")."""
        raise NotImplementedError

    def result_width(self, c) -> int:
        raise NotImplementedError

    def results(self, c):
        return [Port(self.result, "output", self.result_width(c), self.result_meaning(c))]

    def value(self, c, inputs: dict) -> int:
        """The exact result as an integer (signed operands read as two's complement)."""
        raise NotImplementedError

    def compute(self, c, inputs):
        return {self.result: self.value(c, inputs) % (1 << self.result_width(c))}

    def _extend(self, c, name: str, width: int, to: int) -> str:
        """Verilog of input `name`, `width` bits, extended to `to` bits (sign or zero)."""
        if to == width:
            return name
        top = f"{name}[{width - 1}]" if width > 1 else name
        pad = f"{{{to - width}{{{top}}}}}" if c.signed else f"{to - width}'d0"
        return f"{{{pad}, {name}}}"


class Sum(CarrySave):
    """sum = x0 + x1 + ... exactly: W + ceil(log2 N) bits for N operands of W bits."""

    name = "sum"
    refused = ("carry_in", "carry_out", "width_b", "partial_products")
    operands = ()
    result = "sum"

    def operand_ports(self, c):
        kind = "two's-complement operand" if c.signed else "operand"
        return [Port(f"x{i}", "input", c.width, f"{kind} {i}") for i in range(c.operands)]

    def result_width(self, c):
        return c.width + _clog2(c.operands)

    def result_meaning(self, c):
        how = "two's complement" if c.signed else "unsigned"
        return f"x0 + ... + x{c.operands - 1}, exact ({how})"

    def value(self, c, inputs):
        xs = [inputs[f"x{i}"] for i in range(c.operands)]
        return sum(to_signed(x, c.width) if c.signed else x for x in xs)

    def reference(self, c, en):
        n, w = self.result_width(c), c.width
        lines = [f"  wire [{n - 1}:0] ref_acc0 = {self._extend(c, 'x0', w, n)};"]
        for i in range(1, c.operands):
            lines += chained(f"ref_add{i}", f"ref_acc{i - 1}", self._extend(c, f"x{i}", w, n),
                             "1'b0", n)
            lines.append(f"  wire [{n - 1}:0] ref_acc{i} = ref_add{i}[{n - 1}:0];")
        lines.append(f"  wire [{n - 1}:0] ref_sum_0 = ref_acc{c.operands - 1};")
        return lines

    def directed(self, c):
        w, k = c.width, c.operands
        top, low = (1 << w) - 1, 1 << (w - 1)
        five = int("01" * w, 2) & top
        rows = [[top] * k, [0] * k, [1] * k, [low] * k, [low - 1] * k,
                [top] + [0] * (k - 1), [0] * (k - 1) + [top], [five, top ^ five] * k,
                [low] + [low - 1] * (k - 1), [top] + [1] * (k - 1)]
        rows += [[(1 << j) - 1] * k for j in range(1, w + 1)]  # a carry out of each column
        return [{f"x{i}": r[i] & top for i in range(k)} for r in rows]

    def random_inputs(self, c, rng):
        w = c.width
        picks = (0, (1 << w) - 1, 1 << (w - 1))
        return {f"x{i}": rng.choice(picks) if rng.random() < 0.15 else rng.getrandbits(w)
                for i in range(c.operands)}

    def matrix(self, width, width_b, operands, signed, partial_products):
        return dm.sum_matrix(operands, width, signed)

    def tree_phrase(self, c):
        return f"{c.operands} operands of {plural(c.width, 'bit')}"

    def phrase(self, c):
        how = "signed " if c.signed else ""
        return (f"{how}sum of {c.operands} {c.width}-bit operands, sum = x0 + ... + "
                f"x{c.operands - 1} ({self.result_width(c)} bits)")


class Multiplier(CarrySave):
    """product = a * b exactly, a of W bits and b of width_b bits."""

    name = "multiplier"
    refused = ("carry_in", "carry_out", "operands")
    result = "product"
    operator = "*"
    max_width = 256

    def operand_ports(self, c):
        kind = "two's-complement " if c.signed else ""
        return [Port("a", "input", c.width, f"{kind}multiplicand"),
                Port("b", "input", c.width_b, f"{kind}multiplier")]

    def result_width(self, c):
        return c.width + c.width_b

    def result_meaning(self, c):
        return f"a * b, exact ({'two' + chr(39) + 's complement' if c.signed else 'unsigned'})"

    def value(self, c, inputs):
        a, b = inputs["a"], inputs["b"]
        if c.signed:
            a, b = to_signed(a, c.width), to_signed(b, c.width_b)
        return a * b

    def reference(self, c, en):
        n = self.result_width(c)
        a, b = self._extend(c, "a", c.width, n), self._extend(c, "b", c.width_b, n)
        return [f"  wire [{n - 1}:0] ref_product_0 = {a} * {b};"]

    def directed(self, c):
        m, n = c.width, c.width_b
        ta, tb = (1 << m) - 1, (1 << n) - 1
        na, nb = 1 << (m - 1), 1 << (n - 1)  # the most negative values, read signed
        fa, fb = int("01" * m, 2) & ta, int("01" * n, 2) & tb
        pairs = [(ta, tb), (na, nb), (0, 0), (1, 1), (0, tb), (ta, 0), (1, tb), (ta, 1),
                 (na, tb), (ta, nb), (na, 1), (1, nb), (na - 1, nb - 1), (fa, fb),
                 (ta ^ fa, tb ^ fb), (fa, tb), (na, nb - 1)]
        pairs += [(1 << j, tb) for j in range(m)] + [(ta, 1 << j) for j in range(n)]
        return [{"a": a & ta, "b": b & tb} for a, b in pairs]

    def random_inputs(self, c, rng):
        def pick(w):
            r = rng.random()
            if r < 0.08:
                return rng.choice((0, (1 << w) - 1, 1 << (w - 1), 1))
            return rng.getrandbits(w)
        return {"a": pick(c.width), "b": pick(c.width_b)}

    def matrix(self, width, width_b, operands, signed, partial_products):
        make = dm.booth_matrix if partial_products == "booth4" else dm.and_matrix
        return make(width, width_b, signed)

    def tree_phrase(self, c):
        booth = c.partial_products == "booth4"
        mixed = " (Baugh-Wooley)" if c.signed and not booth else ""
        return f"the {c.width} x {c.width_b} {'Booth radix-4' if booth else 'AND'} array{mixed}"

    def phrase(self, c):
        how = "signed " if c.signed else ""
        return (f"{c.width} x {c.width_b}-bit {how}multiplier, product = a * b "
                f"({self.result_width(c)} bits)")


ADDER = Plain("adder", "adds", "add", "sum", "carry", ("cin", "cout"), "carry into bit 0",
              "carry out of the top bit")
SUBTRACTOR = Plain("subtractor", "subtracts", "sub", "diff", "borrow", ("bin", "bout"),
                   "borrow into bit 0", "borrow out: 1 when a < b + bin as unsigned numbers")
KINDS = {k.name: k for k in (ADDER, SUBTRACTOR, AddSub(), Comparator(), Accumulator(), Sum(),
                             Multiplier())}
