"""The prefix pipeline modes (`levels`, `blocks`, a comparator's `levels`) as a netlist, built
from the plan's schedule and register words and nothing else (see `schedule.py`).

Every schedule term becomes one expression in the stage that forms it: inline in the register
that holds it when only registers read it, or a wire (named after its kind and prefix level,
`grp_gen_l3`) when logic of the same stage reads it too.  Every register word of
`plan.words` becomes one register, and a term crossing rank r sits in the word of its kind at
rank r that covers its bit position.  Bits of a word that follow one pattern (a prefix level
over a run of bits) are written as one vector assignment.

A wire-register word (a far operand's own copy) loads the same value in the same cycle as the
local copy of that term, so synthesis would merge the two; both carry `keep` (see
`schedule.Schedule.kept_ranks`), which Yosys honours on the flip-flops of a `(* keep *)`
always block whatever the registers' initial values.
"""

from __future__ import annotations

from . import header
from .netlist import Const, Expr, Mux, Netlist, Ref, bit, cat, part
from .pipeline import Frame


def build(plan) -> Netlist:
    f = Frame(plan)
    return f.finish(stages(plan, f, f.src))


def stages(plan, f: Frame, src: dict[str, Expr]) -> dict[str, Expr]:
    """Build the stages of `plan` into the netlist of frame `f` and return the expressions
    of its outputs, by port name.

    `src` gives each operand (and flag) as the first stage sees it: a port, the input
    register, or (for a tree's final adder, `plan.nest`) a register of the tree's last rank
    holding bits `plan.base` and up.  The frame owns the ports, the valid chain and the
    output section; the registers come from its words (which include `plan.words`)."""
    c, kind, sch = plan.config, plan.unit, plan.schedule
    b, base = f.b, plan.base
    terms = sch.terms
    sub = kind.op == "sub"
    x_name, y_name = kind.operands[0], kind.operands[-1]
    a_in, b_in = src.get(x_name), src.get(y_name)
    flags = {t: src[t] for t in kind.travellers}
    port = kind.carry_in_port(c)
    c0 = kind.core_carry_in(src[port] if port else None, flags) \
        if kind.has_carry_in(c) else None
    if b_in is not None and b_in.width < c.width:  # a narrower second operand: 0 above
        b_in = cat(b_in, Const(0, c.width - b_in.width))
    y_in = kind.y_operand(b_in, flags) if kind.result else b_in

    regs: dict[tuple[str, int], list] = {}  # (term kind, rank) -> [(word, register)]
    owner: dict[tuple[str, int, int], int] = {}  # (term kind, rank, bit) -> index in regs
    value: dict[int, Expr] = {}  # term -> its value in the stage that forms it
    chains: dict[tuple[int, int], Ref] = {}  # (block, carry-in) -> its chain's wire
    readers = {x for t in terms if t.index in sch.last for x in t.args
               if terms[x].stage == t.stage}

    def held(x: int, rank: int) -> Expr:
        t = terms[x]
        at = base + t.lsb
        word, r = regs[(t.kind, rank)][owner[(t.kind, rank, at)]]
        return r[at:at + t.width]

    def at(x: int, stage: int) -> Expr:
        """Term x as the logic of `stage` sees it: its own value, or its last register."""
        return value[x] if terms[x].stage == stage else held(x, stage - 1)

    def operands(q: int):
        lsb, width = sch.lsbs[q], sch.widths[q]
        return a_in.vec[base + lsb:base + lsb + width], _slice(y_in, lsb, width)

    def chain(q: int, plus_one: bool) -> Ref:
        """Position q's chain for carry-in 0 (block 0: the unit's carry-in) or 1, as a wire
        of its result bits and (when read) its chain bit on top (see `positions`)."""
        if (q, plus_one) not in chains:
            x, y = operands(q)
            carry = Const(1, 1) if plus_one else (c0 if q == 0 else None)
            want = any(t.op == f"chain{int(plus_one)}_carry" and t.pos == q
                       and t.index in sch.last for t in terms)
            chains[q, plus_one] = sch.positions.chain(b, c, kind, q, base + sch.lsbs[q], x, y,
                                                      carry, plus_one, want)
        return chains[q, plus_one]

    def form(t) -> Expr:
        args = [at(x, t.stage) for x in t.args]
        i, op = t.pos, t.op
        if op == "flag":
            return flags[t.kind]
        if op == "pass":  # the second operand has no bit here: the first passes
            return bit(a_in, i)
        if op in ("prop", "gen", "gen_cin"):
            xi, yi = bit(a_in, i), bit(y_in, i)
            prop = ~(xi ^ yi) if sub else xi ^ yi
            if op == "prop":
                return prop
            gen = (~xi if sub else xi) & yi
            return gen if op == "gen" else gen | prop & c0
        if op == "sum":
            p = args[0]
            s = p if len(args) == 1 else p ^ args[1]
            return ~s if sub else s
        if op == "sum_flip":  # carry_increment: s0 ^ P & C, the sum for the block's carry
            s = args[0] ^ args[1] & args[2]
            return ~s if sub else s
        if op == "sum_cin":
            return ~(args[0] ^ c0) if sub else args[0] ^ c0
        if op == "dot_g":
            return args[0] | args[1] & args[2]
        if op == "dot_p":
            return args[0] & args[1]
        if op in ("wire", "copy", "ovf_gen"):
            return args[0]
        if op == "not":
            return ~args[0]
        if op in ("xor", "ovf_cin"):
            return args[0] ^ (args[1] if op == "xor" else c0)
        if op == "select":
            return Mux(args[2], args[1], args[0])
        if op == "and_not":
            return args[0] & ~args[1]
        total = chain(i, op.startswith(("chain1", "cmp1")))
        if op.startswith("cmp"):
            return total
        w = sch.widths[i]
        if op.endswith("_sum"):
            return part(total, 0, w)
        if op.endswith("_carry"):
            return bit(total, w)
        x, y = operands(i)  # chain<k>_ovf: the sign rule on the chain's top bits
        return kind.overflow(bit(x, w - 1), bit(y, w - 1), bit(total, w - 1))

    first = plan.input_cycles
    for st in plan.stages:
        stage = st.index + 1
        b.section(*header.stage_title(plan, st))
        if stage < sch.final:
            for word in plan.words:
                if word.stage == plan.number(stage) and word.kind not in ("input", "control"):
                    found = regs.setdefault((word.family, stage), [])
                    owner.update(((word.family, stage, i), len(found))
                                 for i in range(word.lsb, word.lsb + word.width))
                    found.append((word, f.reg(word.name)))
        else:
            outs = {w.family: f.reg(w.name) for w in plan.words
                    if w.kind == "stage" and w.edge == first + stage}
        # Terms that same-stage logic reads become wires, one family per kind and level,
        # declared (packed into runs) just before their first reader.
        pending: dict[tuple, dict[int, tuple[int, Expr]]] = {}
        waiting: dict[int, tuple] = {}  # term -> its pending family

        def flush(key):
            group = pending.pop(key)
            name = key[0] if key[1] is None else f"{key[0]}_l{key[1] + 1}"
            wires = b.wire_runs(name, {base + pos: e for pos, (_, e) in group.items()})
            for pos, (x, _) in group.items():
                value[x] = wires[base + pos]
                del waiting[x]

        for t in terms:
            if t.stage != stage or t.index not in sch.last:
                continue
            for x in t.args:
                if x in waiting:
                    flush(waiting[x])
            e = form(t)
            if t.index in readers and t.width == 1 and not isinstance(e, Ref):
                key = (t.kind, t.level)
                pending.setdefault(key, {})[t.lsb] = (t.index, e)
                waiting[t.index] = key
            else:
                value[t.index] = e
        for key in list(pending):
            flush(key)

        if stage < sch.final:
            inside: dict[tuple[str, int], list] = {}  # (kind, index in regs) -> its terms
            for t in sch.crossing(stage):
                inside.setdefault((t.kind, owner[(t.kind, stage, base + t.lsb)]), []).append(t)
            for (family, rank), found in regs.items():
                if rank != stage:
                    continue
                for n, (word, r) in enumerate(found):
                    _load(b, r, inside.get((family, n), []), lambda t: at(t.index, stage), base)
        else:
            for family, x in sch.outputs.items():
                if family == "result":
                    _load(b, outs[f"{kind.result}_stage"], [terms[t] for t in x],
                          lambda t: at(t.index, stage), base)
                else:
                    b.load(outs[f"{family}_stage"], at(x, stage))
    drives = {}
    for port_name, family in kind.output_families(c).items():
        drives[port_name] = b.names[f"{family}_stage"].all
    if kind.result:
        drives[kind.result] = b.names[f"{kind.result}_stage"].all
    return drives


def _slice(e: Expr, lsb: int, width: int) -> Expr:
    return part(e, lsb, width)


def _load(b, reg, inside, value_of, base: int) -> None:
    """Load register `reg` from the terms it holds (at bit `base` and up): one-bit terms
    packed into runs, wider terms (block sums) one load each."""
    bits = {}
    for t in inside:
        if t.width == 1:
            bits[base + t.lsb] = value_of(t)
        else:
            b.load(reg[base + t.lsb:base + t.lsb + t.width], value_of(t))
    if bits:
        b.load_bits(reg, bits)

