"""What a position of a prefix-mode pipeline is, chosen once per unit (`positions_of`):

- `Bits` (`pipeline: levels` of an arithmetic unit): one bit, with its generate and
  propagate; a result bit is p_i ^ G_(i-1);
- `Blocks` (`pipeline: blocks`): a block of `block_width` bits with its two carry chains,
  for carry-in 0 and 1; a block's result is one of its two sums, selected by its carry-in;
- `Slices` (a comparator's `levels` mode): one of the config's slices, compared in parallel
  (a < b and a <= b); the network is a balanced tree over them and ends in the verdicts.

Each type owns what differs between them: the bits per position, the network and its wire
ranks, the leaf terms of stage 1, how a position's result is formed once its carry is final,
the overflow, the carry chains in the netlist and the words that describe its stages.  The
schedule (`schedule.py`), the builder (`leveled.py`), the report and the chart ask it.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass

from . import cells, prefix
from .config import block_count
from .netlist import Const, Expr, bit, cat, part

TREE_STYLE = "sklansky"  # a comparator's tree: Sklansky pruned to the top is a balanced tree


@dataclass
class Leaves:
    """The terms stage 1 gives each position: its group terms g and p (the network's
    operands), `own` (a position's result when no carry can reach it), `alt` (a block's sum
    for carry-in 1) and `sums`, filled in as results are formed."""

    g: list
    p: list
    own: list
    alt: list
    sums: list


class Positions(ABC):
    """A position type.  The schedule builder `b` it is handed offers `widths` and `lsbs`
    (bits per position and the first bit of each), `term(kind, pos, op, args, stage, width,
    lsb)` and `after(*terms)` (the first stage after they are final)."""

    name: str  # the schedule's shape key (fit compares candidates by it)
    first_logic: str  # what stage 1 forms
    level_word = "prefix level"
    final_logic: str  # what the last stage forms
    whole_first_stage = True  # stage 1 is taken by the chains; the network starts in stage 2
    merges_last_level = False  # the last level's nodes ride in the final stage
    group_kinds = ("grp_c0", "grp_c1")  # term kinds of a group's two terms
    p_op = "dot_g"  # how a group's second term combines: like the first (carry-select form)
    shaded = True  # the chart shades prefix ranks: terms per position tell the structure

    @abstractmethod
    def widths(self, config) -> tuple[int, ...]:
        """The bits of each position, from bit 0."""

    def network(self, config, count: int) -> prefix.Network:
        """The prefix network over the `count` positions: the config's cell."""
        return prefix.local_network(config.cell, count, 0)

    def wires(self, config) -> int:
        """How many prefix levels get a logic-free register rank in front (`wire_registers`)."""
        return config.wire_registers

    def increment_width(self, config) -> int:
        """`local_width` when the bits of local blocks wait with the carry increment."""
        return 0

    def position_offset(self, base: int) -> int:
        """What a register word's position counts from: positions are not bits here."""
        return 0

    def boundaries(self, config, lsbs) -> list[int]:
        """Bits where a position starts (ticks and guide lines of the chart)."""
        return [b for b in lsbs if 0 < b < config.width]

    def label(self, config) -> str:
        """The split in a few words, for fit's tables (after the cell, before wire ranks)."""
        return f"levels/{config.levels_per_stage}"

    @abstractmethod
    def leaves(self, b, kind, config, y_end: int) -> Leaves:
        """Stage 1's terms; operand bits from `y_end` up have no second operand."""

    @abstractmethod
    def finish(self, b, leaves: Leaves, q: int, carry) -> None:
        """Form position q's result in the stage after its carry-in `carry` is final (None:
        no carry can reach it)."""


class Results(Positions):
    """Positions that form result bits (an adder's, not a comparator's verdicts)."""

    @abstractmethod
    def overflow(self, b, leaves: Leaves, g, has_cin: bool) -> int:
        """The signed-overflow term, from stage 1's `leaves` and the group generates `g` once
        the network is done."""


class Chains(Positions):
    """Positions that stage 1 forms with carry chains (a block's, or a slice's borrow)."""

    @abstractmethod
    def chain(self, nb, config, kind, q: int, lsb: int, x, y, carry, plus_one: bool,
              want: bool) -> Expr:
        """Position q's chain in netlist builder `nb`: operands `x`, `y` (its bits from `lsb`),
        carry-in `carry` (or 1 with `plus_one`); its result bits and, when `want`, its chain
        bit on top."""


class Bits(Results):
    name = "bits"
    first_logic, final_logic = "generate/propagate", "sum"
    whole_first_stage = False  # g/p and the first levels share stage 1
    merges_last_level = True  # s_i = p_i ^ (G_h | P_h & G_l): four inputs, one LUT4
    group_kinds = ("grp_gen", "grp_prop")
    p_op = "dot_p"
    shaded = False  # per bit, a rank's shading would only flicker

    def widths(self, config):
        return (1,) * config.width

    def network(self, config, count):
        return prefix.local_network(config.cell, count, config.local_width)

    def increment_width(self, config):
        return config.local_width if config.carry_increment else 0

    def position_offset(self, base):
        return base  # a position is a bit

    def boundaries(self, config, lsbs):
        local, w = config.local_width, config.width
        return list(range(local, w, local)) if prefix.has_local_blocks(local, w) else []

    def label(self, config):
        local = (f" local {config.local_width}"
                 if prefix.has_local_blocks(config.local_width, config.width) else "")
        increment = " increment" if config.carry_increment else ""
        return f"levels/{config.levels_per_stage}{local}{increment}"

    def leaves(self, b, kind, config, y_end):
        has_cin = kind.has_carry_in(config)
        prop = [b.term("prop", i, "prop" if i < y_end else "pass", (), 1, lsb=i)
                for i in range(config.width)]
        g = [b.term("gen", i, "gen_cin" if has_cin and i == 0 else "gen", (), 1)
             if i < y_end else None for i in range(config.width)]
        sums: list = [None] * config.width
        if has_cin:
            sums[0] = b.term("sum", 0, "sum_cin", (prop[0],), 1, lsb=0)
        elif kind.op == "sub":  # a difference bit is the complement of the borrow propagate
            sums[0] = b.term("sum", 0, "sum", (prop[0],), 1, lsb=0)
        else:
            sums[0] = prop[0]
        return Leaves(g, list(prop), prop, [], sums)

    def finish(self, b, leaves, q, carry):
        if carry is None:  # no carry can reach it: its result is its own
            leaves.sums[q] = leaves.own[q]
            return
        leaves.sums[q] = b.term("sum", q, "sum", (leaves.own[q], carry), b.after(carry),
                                lsb=q)

    def overflow(self, b, leaves, g, has_cin: bool) -> int:
        """The carry into the top bit XOR the carry out of it (for a borrow chain, the
        borrows: common practice), formed once both are final."""
        top = len(g) - 1
        if top == 0:  # one bit: the carry into it is the carry-in itself
            return b.term("ovf", 0, "ovf_cin" if has_cin else "ovf_gen", (g[0],), 1)
        return b.term("ovf", top, "xor", (g[top], g[top - 1]), b.after(g[top], g[top - 1]))


class Blocks(Results, Chains):
    name = "chains"
    first_logic, final_logic = "block carry chains", "block select"

    def label(self, config):
        return f"blocks of {config.block_width}"

    def widths(self, config):
        w, k = config.width, config.block_width
        return tuple(min(k, w - k * q) for q in range(block_count(w, k)))

    def leaves(self, b, kind, config, y_end):
        count = len(b.widths)
        s0 = [b.term("blk_s0", q, "chain0_sum", (), 1, b.widths[q], b.lsbs[q])
              for q in range(count)]
        g = [b.term("blk_c0", q, "chain0_carry", (), 1) if b.lsbs[q] < y_end else None
             for q in range(count)]
        s1 = [None] + [b.term("blk_s1", q, "chain1_sum", (), 1, b.widths[q], b.lsbs[q])
                       for q in range(1, count)]
        # Block 0 takes the unit's carry-in into its one chain: no carry-in-1 term.
        p = [None] + [b.term("blk_c1", q, "chain1_carry", (), 1) for q in range(1, count)]
        sums: list = [s0[0]] + [None] * (count - 1)
        return Leaves(g, p, s0, s1, sums)

    def finish(self, b, leaves, q, carry):
        if carry is None:  # no carry can reach it: its sum for carry-in 0 is its own
            leaves.sums[q] = leaves.own[q]
            return
        leaves.sums[q] = b.term("sum", q, "select", (leaves.own[q], leaves.alt[q], carry),
                                b.after(carry), b.widths[q], b.lsbs[q])

    def overflow(self, b, leaves, g, has_cin: bool) -> int:
        """The top block's two chains give an overflow bit each, selected like its sum.  A
        1-bit top block above block 0 overflows for carry-in 0 exactly when it carries out, so
        its carry is that overflow bit."""
        top = len(g) - 1
        if top > 0 and b.widths[top] == 1:
            v0 = leaves.g[top]
        else:
            v0 = b.term("blk_v0", top, "chain0_ovf", (), 1, 1, b.lsbs[top])
        if top == 0:
            return v0
        v1 = b.term("blk_v1", top, "chain1_ovf", (), 1, 1, b.lsbs[top])
        return b.term("ovf", top, "select", (v0, v1, g[top - 1]), b.after(g[top - 1]))

    def chain(self, nb, config, kind, q, lsb, x, y, carry, plus_one, want):
        """One wire of the block's sum bits and chain bit: behavioural, so that synthesis
        puts it on the fabric's carry chain."""
        slot = cells.Slot(nb, f"blk{q}_c{int(plus_one)}", lsb)
        total = cells.core(slot, "native", x, y, carry, kind.op, want)
        return slot.wire("total", total).all


class Slices(Chains):
    name = "compare"
    first_logic, final_logic = "slice comparisons", "verdicts"
    level_word = "tree level"
    merges_last_level = True  # lt, eq, gt read the last node's four inputs

    def widths(self, config):
        return tuple(config.slices)

    def network(self, config, count):
        return prefix.network(TREE_STYLE, count)

    def wires(self, config):
        return 0

    def leaves(self, b, kind, config, y_end):
        count = len(b.widths)
        g = [b.term("blk_c0", q, "cmp0_carry", (), 1) for q in range(count)]
        # Every slice has both verdicts: the lowest has no borrow-in to fold.
        p = [b.term("blk_c1", q, "cmp1_carry", (), 1) for q in range(count)]
        return Leaves(g, p, [None] * count, [None] * count, [None] * count)

    def finish(self, b, leaves, q, carry):
        """A comparator's slices have no results of their own: only the verdicts."""

    def chain(self, nb, config, kind, q, lsb, x, y, carry, plus_one, want):
        """The slice's borrow alone, by the config's cell: a < b, or a <= b with borrow-in 1
        (its wires named from bit 0 of the slice); the top slice of a signed comparator
        compares with its sign bits inverted (signed order as unsigned order)."""
        if config.signed and q == len(config.slices) - 1:
            x, y = (_flip_top(v) for v in (x, y))
        slot = cells.Slot(nb, f"blk{q}_c{int(plus_one)}", 0)
        return cells.core(slot, config.cell, x, y, Const(int(plus_one), 1), "sub", True, False)


def _flip_top(v: Expr) -> Expr:
    """An operand with its top bit inverted."""
    w = v.width
    return ~v if w == 1 else cat(part(v, 0, w - 1), ~bit(v, w - 1))


BITS, BLOCKS, SLICES = Bits(), Blocks(), Slices()


BY_MODE = {"levels": BITS, "blocks": BLOCKS}  # an arithmetic unit's positions, by mode


def positions_of(config, kind) -> Positions:
    """The position type of a prefix-mode config of unit kind `kind` (a comparator's are
    its slices)."""
    return SLICES if kind.result is None else BY_MODE[config.pipeline]
