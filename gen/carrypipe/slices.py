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
from .netlist import Const, Expr, Netlist, cat
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
    f = Frame(plan)
    return f.finish(stages(plan, f, f.src))


def stages(plan, f: Frame, src: dict[str, Expr]) -> dict[str, Expr]:
    """Build the slices of `plan` into the netlist of frame `f` and return the expressions
    of its outputs, by port name.

    `src` gives each operand (and flag) as slice 0 sees it: a port, the input register, or
    (for a tree's final adder, `plan.nest`) a register of the tree's last rank holding bits
    `plan.base` and up.  An operand narrower than the slices is 0 above its top bit: no
    register holds those bits.  The frame owns the ports, the valid chain and the output
    section; the registers come from its words (which include `plan.words`)."""
    c, kind = plan.config, plan.unit
    b = f.b
    # Operand bits of slices i.. in cycle i (None once an operand has no bits left).
    waiting: dict[str, Expr | None] = {op: src[op] for op in kind.operands}
    flags = {t: src[t] for t in kind.travellers}
    done: list[Expr] = []  # finished result bits below slice i, registered
    chain: dict[str, Expr] = {}
    last = len(plan.stages) - 1
    for s in plan.stages:
        i, top, n = s.index, s.index == last, plan.number(s.index)
        b.section(*header.slice_title(plan, s))
        families = ((kind.result,) if kind.result else ()) + plan.chain_families(top)
        state = {fam: f.reg(f"{fam}_stage_{n}") for fam in families}
        seen = dict(flags)
        if i == 0 and kind.has_carry_in(c):
            port = kind.carry_in_port(c)
            seen["carry_in"] = src[port] if port else None
        if c.valid:
            seen["valid"] = f.valid[plan.input_cycles + i]
        ops = {op: _bits(bits, s.lsb, s.width) for op, bits in waiting.items()}
        ctx = SliceContext(c, s, top, cells.Slot(b, f"slice{i}", s.lsb), ops, seen, chain,
                           state)
        for fams, value in kind.slice(ctx):
            b.load(tuple(state[fam] for fam in fams), value)
        chain = {fam: state[fam].all for fam in kind.chain if fam in state}
        if top:
            break
        nxt = plan.stages[i + 1]
        for op in kind.operands:
            if plan.operand_end(op) <= nxt.lsb:
                waiting[op] = None
                continue
            r = f.reg(f"{op}_skew_{n + 1}")
            b.load(r, waiting[op].vec[nxt.lsb:])
            waiting[op] = r.all
        for t in kind.travellers:
            r = f.reg(f"{t}_skew_{n + 1}")
            b.load(r, flags[t])
            flags[t] = r.all
        if kind.result:
            r = f.reg(f"{kind.result}_deskew_{n + 1}")
            b.load(r, cat(*done, state[kind.result].all))
            done = [r.all]
    drives = {port: state[fam].all for port, fam in kind.output_families(c).items()}
    if kind.result:
        drives[kind.result] = cat(*done, state[kind.result].all)
    return drives


def _bits(bits: Expr | None, lsb: int, width: int) -> Expr:
    """Bits lsb.. lsb+width-1 of an operand held in a vector from some bit up to its top,
    0 above its top (or all 0 when it has no bits left)."""
    if bits is None:
        return Const(0, width)
    have = min(width, bits.vec.msb + 1 - lsb)
    held = bits.vec[lsb:lsb + have]
    return held if have == width else cat(held, Const(0, width - have))
