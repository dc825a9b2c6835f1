"""The sliced pipeline as a netlist, built from the plan and nothing else.

Registers, with the names they carry into the Verilog (see `plan.SlicedPlan.words`):
  a_in, b_in, ...       the input register (with `register_inputs`)
  valid_k               the valid bit after k cycles (cleared by rst)
  a_skew_i, b_skew_i    operand bits of slices i..S-1, waiting for slice i (shrinking words)
  sub_skew_i, ...       one-bit operand flags travelling with them
  sum_stage_i           the result bits of slice i;  carry_stage_i  its chain bit
  sum_deskew_i          finished result bits below slice i, travelling on (growing words)
What each slice computes is the unit kind's (`units.Kind.slice`); the cell style is the
slice's (`cells.core`).
"""

from __future__ import annotations

from dataclasses import dataclass

from . import cells, header
from .netlist import Expr, Netlist, cat
from .pipeline import Frame


@dataclass
class SliceContext:
    """What one slice's logic may read (see `units.Kind.slice`)."""

    config: object
    s: object  # the plan's Slice
    top: bool
    slot: cells.Slot
    ops: dict  # operand name -> the slice's bits of it
    flags: dict  # traveller name -> its bit as this slice sees it; "carry_in", "valid"
    chain_in: dict  # chain family -> the register of the slice below
    state: dict  # family -> this slice's own stage register


def build(plan) -> Netlist:
    c, kind = plan.config, plan.unit
    f = Frame(plan)
    b = f.b
    waiting = {op: f.src[op] for op in kind.operands}  # operand bits of slices i.. in cycle i
    flags = {t: f.src[t] for t in kind.travellers}
    done: list[Expr] = []  # finished result bits below slice i, registered
    chain: dict[str, Expr] = {}
    last = len(plan.stages) - 1
    for s in plan.stages:
        i, top = s.index, s.index == last
        b.section(*header.slice_title(plan, s))
        families = ((kind.result,) if kind.result else ()) + plan.chain_families(top)
        state = {fam: f.reg(f"{fam}_stage_{i}") for fam in families}
        seen = dict(flags)
        if i == 0 and kind.has_carry_in(c):
            port = kind.carry_in_port(c)
            seen["carry_in"] = f.src[port] if port else None
        if c.valid:
            seen["valid"] = f.valid[plan.input_cycles + i]
        ops = {op: bits.vec[s.lsb:s.lsb + s.width] for op, bits in waiting.items()}
        ctx = SliceContext(c, s, top, cells.Slot(b, f"slice{i}", s.lsb), ops, seen, chain,
                           state)
        for fams, value in kind.slice(ctx):
            b.load(tuple(state[fam] for fam in fams), value)
        chain = {fam: state[fam].all for fam in kind.chain if fam in state}
        if top:
            break
        nxt = plan.stages[i + 1]
        for op in kind.operands:
            r = f.reg(f"{op}_skew_{i + 1}")
            b.load(r, waiting[op].vec[nxt.lsb:c.width])
            waiting[op] = r.all
        for t in kind.travellers:
            r = f.reg(f"{t}_skew_{i + 1}")
            b.load(r, flags[t])
            flags[t] = r.all
        if kind.result:
            r = f.reg(f"{kind.result}_deskew_{i + 1}")
            b.load(r, cat(*done, state[kind.result].all))
            done = [r.all]
    drives = {port: state[fam].all for port, fam in kind.output_families(c).items()}
    if kind.result:
        drives[kind.result] = cat(*done, state[kind.result].all)
    return f.finish(drives)
