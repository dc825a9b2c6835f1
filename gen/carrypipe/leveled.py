"""The prefix pipeline modes (`levels`, `blocks`) as Amaranth logic, built from the plan's
schedule and register words and nothing else (see `schedule.py` for the structure).

Every schedule term becomes one expression in the stage that forms it; every register word
of `plan.words` becomes one reset-less register, and a term crossing rank r sits in the
word of its kind at rank r that covers its bit position.

A wire-register word (a far operand's own copy) loads the same value in the same cycle as
the local copy of that term, so synthesis would merge the two (Yosys `opt_merge` merges
equal flip-flops whatever `keep` says on their wires; it spares only cells that carry
`keep` themselves, which Verilog attributes on a `reg` do not give).  Far copies therefore
power up as ones, local copies as zeros: flip-flops with different initial values are not
equal, so both survive, and no data register's power-up value is part of the port contract.
"""

from __future__ import annotations

from amaranth.hdl import Const, Module, Mux, Signal, Value

from . import cells
from .plan import PrefixPlan


def build(m: Module, plan: PrefixPlan, a: Value, b: Value, cin, sum_out: Value, cout_out):
    """Add the pipelined prefix adder of `plan` to `m`, driving `sum_out` (and `cout_out`)."""
    sch = plan.schedule
    terms = sch.terms
    words: dict[str, list] = {}  # "<kind>_<rank>" -> [(word, register)]
    for word in plan.words:
        if word.kind in ("input", "control"):
            continue
        init = (1 << word.width) - 1 if word.kind == "wire" else 0
        reg = Signal(word.width, name=word.name, reset_less=True, init=init)
        words.setdefault(word.name.rsplit("_", 1)[0], []).append((word, reg))

    def slot(t, rank):
        """The register bits holding term `t` in rank `rank`."""
        for word, reg in words[f"{t.kind}_{rank}"]:
            if word.lsb <= t.lsb < word.lsb + word.width:
                at = t.lsb - word.lsb
                return reg[at:at + t.width]
        raise AssertionError(f"no register word for {t.kind} at bit {t.lsb}, rank {rank}")

    value: dict[int, Value] = {}  # term index -> value as formed in its own stage
    chains: dict[tuple[int, int], tuple[Value, Value]] = {}
    carried: set[tuple[int, int]] = set()  # chains whose carry-out some term reads

    def at(index, stage):
        """Term `index` as seen by logic of `stage`: its own value, or its last register copy."""
        t = terms[index]
        return value[index] if t.stage == stage else slot(t, stage - 1)

    def chain(q, plus_one):
        """Block q's sum and carry-out for carry-in 0 (block 0: cin) or, with plus_one, for 1."""
        if (q, plus_one) not in chains:
            lsb, width = sch.lsbs[q], sch.widths[q]
            carry = Const(1, 1) if plus_one else (cin if q == 0 else None)
            chains[q, plus_one] = cells.native(m, a[lsb:lsb + width], b[lsb:lsb + width], carry,
                                               f"blk{q}_c{int(plus_one)}")
        return chains[q, plus_one]

    for t in terms:
        if t.index not in sch.last:
            continue
        args = [at(x, t.stage) for x in t.args]
        i = t.pos
        if t.op == "prop":
            v = a[i] ^ b[i]
        elif t.op == "gen":
            v = a[i] & b[i]
        elif t.op == "gen_cin":
            v = (a[0] & b[0]) | ((a[0] ^ b[0]) & cin)
        elif t.op == "xor_cin":
            v = args[0] ^ cin
        elif t.op == "xor":
            v = args[0] ^ args[1]
        elif t.op == "dot_g":
            v = args[0] | (args[1] & args[2])
        elif t.op == "dot_p":
            v = args[0] & args[1]
        elif t.op == "wire":
            v = args[0]
        elif t.op == "select":
            v = Mux(args[2], args[1], args[0])
        else:  # chain<0|1>_<sum|carry>
            key = (i, t.op.startswith("chain1"))
            total, carry = chain(*key)
            v = total
            if t.op.endswith("carry"):
                v = carry
                carried.add(key)
        value[t.index] = v
        for rank in range(t.stage, min(sch.last[t.index], sch.final)):
            m.d.sync += slot(t, rank).eq(v if rank == t.stage else slot(t, rank - 1))

    for (q, plus_one), (_, carry) in chains.items():
        if (q, plus_one) not in carried:  # the top block without cout: named for lint tools
            m.d.comb += Signal(name=f"blk{q}_c{int(plus_one)}_carry_unused").eq(carry)

    (_, sum_stage), = words["sum"]
    for q, index in enumerate(sch.sums):
        lsb, width = sch.lsbs[q], sch.widths[q]
        m.d.sync += sum_stage[lsb:lsb + width].eq(at(index, sch.final))
    m.d.comb += sum_out.eq(sum_stage)
    if cout_out is not None:
        (_, carry_stage), = words["carry"]
        m.d.sync += carry_stage.eq(at(sch.cout, sch.final))
        m.d.comb += cout_out.eq(carry_stage)
