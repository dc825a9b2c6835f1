"""Pipeline schedules for the prefix modes: which term is computed in which stage, and which
terms cross which register rank.

Both prefix modes are one prefix network over "positions" with a register rank after every
stage; all positions advance together, so there are no skew or deskew triangles.

- `levels`: a position is one bit.  Stage 1 forms the bit generate g_i = a_i & b_i and
  propagate p_i = a_i ^ b_i (a carry-in is folded into g_0) and evaluates the first
  `levels_per_stage` prefix levels; every later stage evaluates the next `levels_per_stage`
  levels; the last stage forms s_i = p_i ^ G_(i-1).  When the network ends with a fill-in
  level (every node (i, i-1): Brent-Kung, Han-Carlson, Ladner-Fischer), that level moves into
  the sum stage: s_(i+1) = p_(i+1) ^ (G_i | P_i & G_(i-1)) has four inputs, so in a 4-input
  LUT fabric it costs no extra logic level and saves a cycle.
- `blocks`: a position is a block of `block_width` bits.  Stage 1 runs each block's two carry
  chains: its sum for carry-in 0 and for carry-in 1 (block 0 takes `cin` instead and needs
  only one).  Their carry-outs (c0, c1) are the block's group terms; the prefix operator on
  them is c0 <- c0_i | c1_i & c0_j, c1 <- c0_i | c1_i & c1_j (carry-select form).  The
  network over the blocks follows, `levels_per_stage` levels per stage, and the last stage
  selects each block's sum by its carry-in.
- A comparator's `levels` mode: a position is one of the config's slices.  Stage 1 compares
  every slice in parallel, c0 = a < b and c1 = a <= b (the borrows of a - b with borrow-in 0
  and 1), the same carry-select operator combines them, pruned to the top position's cone
  (a balanced tree of the Sklansky network), and the last stage forms lt = c0, eq = c1 & ~c0
  and gt = ~c1.

Subtracting units keep borrows where adding ones keep carries (generate ~a & b, propagate
~(a ^ b)): the same networks, and the registers hold what the ports show.

A finished result does not wait for the last stage: a sum bit (or block select) is formed in
the stage after its carry-in is final, in parallel with that stage's prefix logic, and then
travels on as one bit (or one block sum) instead of its inputs.  `wire_registers: n` puts a
logic-free stage in front of the n prefix levels with the longest span; there the far
operand of every node gets its own register, apart from the local copy of that term (one
copy per term and level, shared by the term's far readers), which placement can put
half-way along the long wire.

With `local_width` and `carry_increment` (the carry-increment form; Zimmermann 1997),
bit i + 1 of a local block, once the network within the block has given it G and P of bits
k..i of its block (k the block's lowest bit), waits for the block's carry C = G_(k-1) with
two terms instead of three: its sum for carry-in 0, s0 = p_(i+1) ^ G (kind `csum`, formed
with the block's last level: four inputs), and P.  The fill-in node (i, k - 1) of the last
level becomes the sum itself, s = s0 ^ P & C (G and P are never both 1, so G | P & C =
G ^ P & C).

Every term knows the stage that computes it and the last stage that reads it (the output
register counts as stage final + 1); terms no output needs are pruned, so a propagate term
travels only up to its last use and complete groups drop their propagate.  A term computed
in stage s and last read in stage t sits in the register ranks s .. t-1: register counts
are exact counts from this pruned schedule.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

from . import cells, prefix, units
from .config import Config
from .positions import Positions, positions_of

# Register kind of each term kind (see `Plan.registers`).
PREFIX_KINDS = ("gen", "prop", "grp_gen", "grp_prop", "blk_c0", "blk_c1", "grp_c0", "grp_c1")
RESULT_KINDS = ("sum", "csum", "blk_s0", "blk_s1", "blk_v0", "blk_v1", "ovf", "cout")
# Operand flags that travel with the terms to the output stage (a term formed by `flag` has
# its input's name as its kind).
OPERAND_KINDS = tuple(sorted({f for k in units.KINDS.values() for f in k.travellers}))

# Unit-gate delay of each operation, from the model of `prefix.Gates` (a 2:1 select is an
# AND-OR; gen_cin is g_0 | p_0 & cin after p_0; sum_cin is p_0 ^ cin after p_0).
_G = prefix.UNIT_GATES
OP_DELAY = {"gen": _G.and_or, "prop": _G.xor, "gen_cin": _G.xor + 2 * _G.and_or,
            "dot_g": 2 * _G.and_or, "dot_p": _G.and_or, "wire": 0, "sum": _G.xor,
            "xor": _G.xor, "sum_cin": 2 * _G.xor, "select": 2 * _G.and_or, "flag": 0,
            "ovf_cin": _G.xor, "ovf_gen": 0, "copy": 0, "and_not": _G.and_or, "pass": 0,
            "not": 0, "sum_flip": _G.and_or + _G.xor}


@dataclass(frozen=True)
class Term:
    """One value of the schedule: a bit, or a block's sum bits."""

    index: int
    kind: str
    pos: int  # the prefix position (bit or block) it belongs to
    lsb: int  # operand bit of its bit 0; group terms sit at the bit above their position
    width: int
    op: str  # how it is formed, from `args` (see `leveled.py`)
    args: tuple[int, ...]
    stage: int  # the stage whose logic forms it
    level: int | None = None  # the prefix level (0-based) of a group term or wire copy


@dataclass(frozen=True)
class StageInfo:
    """What one stage of a prefix-mode pipeline evaluates."""

    index: int  # 1-based
    levels: tuple[int, ...]  # prefix levels (0-based) evaluated in it
    nodes: int  # prefix nodes it evaluates, after pruning
    delay: int  # unit-gate critical path, register to register
    logic: str  # a short description


@dataclass(frozen=True)
class Schedule:
    mode: str
    positions: Positions  # what a position is: a bit, a block or a comparator's slice
    network: prefix.Network
    widths: tuple[int, ...]  # bits per position
    lsbs: tuple[int, ...]
    final: int  # the stage that forms the last results (the latency without input register)
    merged: bool  # the fill-in level was moved into the sum stage
    wired: tuple[int, ...]  # prefix levels with a wire rank in front
    terms: tuple[Term, ...]
    last: dict  # term index -> last stage reading it, for the terms that are kept
    # "result": per position the term of its result bits; every other key is the family of
    # a one-bit output register (carry, overflow, lt, ...) and gives the term it loads
    outputs: dict
    stages: tuple[StageInfo, ...]

    def kept(self) -> list[Term]:
        return list(self._kept)

    @cached_property
    def _kept(self) -> tuple[Term, ...]:
        return tuple(t for t in self.terms if t.index in self.last)

    def crossing(self, rank: int) -> list[Term]:
        """The terms held in register rank `rank` (loaded at the end of stage `rank`)."""
        return list(self._ranks.get(rank, ()))

    @cached_property
    def _ranks(self) -> dict[int, list[Term]]:
        """Rank -> the terms it holds, in term order: found once (a wide sparse network has
        tens of thousands of register words, each asking for its rank's terms)."""
        out: dict[int, list[Term]] = {}
        for t in self._kept:
            for rank in range(t.stage, self.last[t.index]):
                out.setdefault(rank, []).append(t)
        return out

    def kept_ranks(self) -> set[tuple[int, int]]:
        """(term, rank) pairs whose registers are intended copies of an equal register: a
        wire copy and the local copy of its term in the same rank.  Synthesis must keep
        both (they load the same value, so it would merge them)."""
        out = set()
        for t in self.kept():
            if t.op == "wire":
                rank = t.stage  # a wire copy is formed in a logic-free stage and held there
                out.add((t.index, rank))
                x = t.args[0]
                if self.terms[x].stage <= rank < self.last[x]:
                    out.add((x, rank))
        return out


def reach(level, lsbs) -> int:
    """How far a prefix level's nodes reach, in bits: node (i, j) joins position i with
    position j (lsbs: the first bit of each position)."""
    return max(lsbs[i] - lsbs[j] for i, j in level)


def _assign_stages(pos: Positions, net: prefix.Network, lsbs, per_stage: int, wires: int):
    """Stage of every prefix level, the stage before each wired level, and the final stage."""
    depth = net.depth
    by_span = sorted(range(depth), key=lambda k: (-reach(net.levels[k], lsbs), -k))
    wired = frozenset(by_span[:wires])
    # Every sum bit reads one node of the last level: s_i = p_i ^ (G_h | P_h & G_l) has four
    # inputs, so with one bit per position that level always rides in the sum stage; a
    # comparator's verdicts (lt, eq, gt) read the last node's four inputs the same way.
    merged = pos.merges_last_level and depth > 0
    # Stage 1 always has logic: the bit generate/propagate, or the chains (compares).
    stage, used = 1, (per_stage if pos.whole_first_stage else 0)
    level_stage, wire_stage = {}, {}
    for k in range(depth - merged):
        if k in wired:
            wire_stage[k] = stage + 1
            stage, used = stage + 2, 0
        elif used >= per_stage:
            stage, used = stage + 1, 0
        level_stage[k] = stage
        used += 1
    if depth == 0:
        final = 1
    elif depth - merged == 0:  # the only level rides in the last stage: with g/p, or after
        final = 2 if pos.whole_first_stage else 1  # after a stage of chains or compares
    else:
        final = stage + 1
    if merged and depth - 1 in wired:  # a wire rank between the last prefix stage and the sum
        wire_stage[depth - 1] = stage + 1
        final = stage + 2
    if merged:
        level_stage[depth - 1] = final
    return level_stage, wire_stage, final, merged, tuple(sorted(wired))


class _Terms:
    """The growing list of a schedule's terms, and the stage rule for results."""

    def __init__(self, widths: tuple[int, ...], lsbs: tuple[int, ...], final: int,
                 logic_free: set[int]):
        self.widths, self.lsbs = widths, lsbs
        self.final, self.logic_free = final, logic_free
        self.terms: list[Term] = []

    def term(self, kind_: str, pos: int, op: str, args, stage: int, width: int = 1,
             lsb: int | None = None, level: int | None = None) -> int:
        """Append a term (by default at the bit above its position) and return its index."""
        at = self.lsbs[pos] + self.widths[pos] if lsb is None else lsb
        self.terms.append(Term(len(self.terms), kind_, pos, at, width, op, tuple(args), stage,
                               level))
        return len(self.terms) - 1

    def after(self, *args: int) -> int:
        """The stage after its arguments are final (or the final stage), not a wire stage."""
        terms = self.terms
        stage = min(self.final, max(terms[x].stage + (terms[x].stage < self.final)
                                    for x in args))
        while stage in self.logic_free:
            stage += 1
        return stage


def make_schedule(config: Config, kind: units.Kind | None = None,
                  operand_widths: tuple[int, ...] | None = None) -> Schedule:
    """The pruned schedule of a `levels` or `blocks` config (of unit kind `kind`, by default
    the config's).

    `operand_widths` (a tree's final adder) gives the bits of each operand from bit 0; the
    second operand may be narrower, its bits above 0.  A position (or block) where it has
    no bits generates no carry, so its generate term is left out (None) and every group term
    that would read it is formed without it."""
    kind = kind or units.KINDS[config.unit]
    y_end = operand_widths[1] if operand_widths else config.width
    pos = positions_of(config, kind)
    widths = pos.widths(config)
    count = len(widths)
    net = pos.network(config, count)
    lsbs = tuple(sum(widths[:q]) for q in range(count))
    level_stage, wire_stage, final, merged, wired = _assign_stages(
        pos, net, lsbs, config.levels_per_stage, pos.wires(config))
    b = _Terms(widths, lsbs, final, set(wire_stage.values()))
    term, terms = b.term, b.terms

    has_cin = kind.has_carry_in(config)
    flags = {f: term(f, 0, "flag", (), 1, lsb=0) for f in kind.travellers}
    leaves = pos.leaves(b, kind, config, y_end)
    g, p, sums = leaves.g, leaves.p, leaves.sums
    g_kind, p_kind = pos.group_kinds

    # carry_increment: once the network within the local blocks is done, bit i of block q
    # (not the block's lowest bit) holds the sum it has for block carry-in 0, s0 = p ^ G, and
    # the propagate P of its group in the block; the fill-in node (i, block q's carry) then
    # becomes the sum itself, s = s0 ^ P & C (G and P are never both 1, so ^ is |).
    local = pos.increment_width(config)
    last_local = prefix.network(config.cell, local).depth - 1 if 0 < local < count else None
    waiting: dict[int, tuple[int, int]] = {}  # bit i -> (bit i + 1's s0, the P of bit i)
    done = [True] + [False] * (count - 1)  # position q's carry-in is final
    low = list(range(count))  # lowest position covered by the group held at each position
    for q in range(1, count):
        if low[q - 1] == 0:
            pos.finish(b, leaves, q, g[q - 1])
            done[q] = True
    for k, level in enumerate(net.levels):
        stage = level_stage[k]
        new_g, new_p, before = list(g), list(p), list(low)
        copies: dict[int, int] = {}  # far operand -> its wire copy at this level

        def far(x, reader):
            """The wire copy of far operand `x`, placed with its first reader."""
            if x not in copies:
                copies[x] = term("wire_" + terms[x].kind, reader, "wire", (x,), wire_stage[k],
                                 level=k)
            return copies[x]

        for i, j in level:
            gj, pj = g[j], p[j]
            if k in wire_stage:  # the far operands get their own registers
                if gj is not None:
                    gj = far(gj, i)
                if pj is not None:
                    pj = far(pj, i)
            if k == net.depth - 1 and i in waiting and gj is not None:
                s0, pi = waiting[i]  # the fill-in: the block carry flips s0
                sums[i + 1] = term("sum", i + 1, "sum_flip", (s0, pi, gj), b.after(s0, pi, gj),
                                   lsb=i + 1)
                done[i + 1] = True
                low[i] = before[j]
                continue
            if gj is None:  # nothing below generates: the group generates what i does
                new_g[i] = g[i]
            elif g[i] is None:  # i generates nothing: the group passes on what j generates
                new_g[i] = term(g_kind, i, "dot_p", (p[i], gj), stage, level=k)
            else:
                new_g[i] = term(g_kind, i, "dot_g", (g[i], p[i], gj), stage, level=k)
            # A block group reaching block 0 needs no carry-in-1 term (cin is folded in).
            if pj is None:
                new_p[i] = None
            elif pos.p_op == "dot_p" or g[i] is None:
                new_p[i] = term(p_kind, i, "dot_p", (p[i], pj), stage, level=k)
            else:
                new_p[i] = term(p_kind, i, pos.p_op, (g[i], p[i], pj), stage, level=k)
            low[i] = before[j]
        g, p = new_g, new_p
        if k == last_local:  # the in-block groups are complete: s0 and P wait instead
            for i in range(local, count - 1):
                if (i % local == local - 1 or done[i + 1] or g[i] is None or p[i] is None
                        or config.signed and i == count - 2):
                    continue  # a block top feeds the network over the blocks; the overflow
                    # of a signed unit reads the carry into its top bit; a group that
                    # generates nothing (a carry-save final adder's short operand) waits
                    # as usual
                x = g[i]  # formed in this stage: s0 with it, one 4-input function
                at = terms[x].stage if terms[x].level == k else b.after(leaves.own[i + 1], x)
                waiting[i] = (term("csum", i + 1, "xor", (leaves.own[i + 1], x), at,
                                   lsb=i + 1), p[i])
        for q in range(1, count):
            if not done[q] and low[q - 1] == 0:
                pos.finish(b, leaves, q, g[q - 1])
                done[q] = True

    outputs: dict[str, object] = {}
    if kind.result:
        outputs["result"] = tuple(sums)
        if config.carry_out:
            cout = g[-1]
            if kind.carry_out_op:  # formed in the stage of the carry itself
                op, names = kind.carry_out_op
                cout = term("cout", count - 1, op, (cout, *(flags[n] for n in names)),
                            terms[cout].stage)
            outputs[kind.chain[0]] = cout
        if config.signed:
            outputs["overflow"] = pos.overflow(b, leaves, g, has_cin)
    else:
        for family, op, args in kind.verdicts(g[-1], p[-1]):
            outputs[family] = term(family, count - 1, op, args, final)

    # Results formed before the last planned stage (a last prefix level that only a pruned
    # carry-out needed, or that a carry-out shares with the selects) leave a cycle sooner.
    final = min(final, max(terms[t].stage for t in _flat(outputs.values())))
    last: dict[int, int] = {}
    for t in _flat(outputs.values()):
        last[t] = final + 1
    for t in reversed(terms):
        if t.index in last:
            for a in t.args:
                last[a] = max(last.get(a, 0), t.stage)

    arrival: dict[int, int] = {}
    for t in terms:
        if t.index in last:
            inner = [arrival[a] for a in t.args if terms[a].stage == t.stage]
            arrival[t.index] = (max(inner, default=0)
                                + _op_delay(t, widths, has_cin, kind, config.cell))
    stages = []
    formed = {t.stage for t in terms if t.index in last and t.op != "wire"}
    for s_ in range(1, final + 1):
        levels = tuple(k for k, st in sorted(level_stage.items()) if st == s_)
        delay = max([arrival[t.index] for t in terms if t.index in arrival and t.stage == s_],
                    default=0)
        nodes = sum(1 for t in terms if t.stage == s_ and t.index in last
                    and t.kind in ("grp_gen", "grp_c0"))  # the nodes left after pruning
        stages.append(StageInfo(s_, levels, nodes, delay,
                                _describe(pos, s_, final, levels,
                                          s_ in wire_stage.values(), s_ in formed)))
    return Schedule(config.pipeline, pos, net, widths, lsbs, final, merged, wired,
                    tuple(terms), last, outputs, tuple(stages))


def _flat(values):
    for v in values:
        if isinstance(v, tuple):
            yield from v
        else:
            yield v


def _op_delay(t: Term, widths, cin: bool, kind, cell: str) -> int:
    """Unit-gate delay of forming `t` from its arguments (a block's carry chain as a ripple
    adder; a comparator's slice as its cell's borrow network)."""
    if t.op.startswith("cmp"):
        net = cells.STYLES[cell].carry_network(widths[t.pos])
        one = t.op.startswith("cmp1")  # a borrow-in of 1: a <= b
        return prefix.arrivals(net, one, carry_one=one).carry
    if t.op.startswith("chain"):
        with_carry = t.op.startswith("chain1") or (cin and t.pos == 0)
        chain = prefix.network("serial", widths[t.pos])
        return prefix.critical_path(chain, with_carry, not t.op.endswith("sum"))
    if t.op == "sum" and len(t.args) == 1:  # a difference bit 0: the complement, free
        return 0
    if t.op in ("prop", "gen", "gen_cin"):  # behind the kind's gates (the sub XOR on b)
        return OP_DELAY[t.op] + kind.entry_delay
    return OP_DELAY[t.op]


def _describe(pos: Positions, s: int, final: int, levels, wire: bool, logic: bool) -> str:
    """What stage `s` evaluates; `logic` says whether it forms any term at all (the last
    stage has nothing to form when every result was finished before it)."""
    parts = []
    if wire:
        parts.append("wire registers (no logic)")
    if s == 1:
        parts.append(pos.first_logic)
    if levels:  # a comparator's network is the tree that combines the slices' verdicts
        first, end = levels[0] + 1, levels[-1] + 1
        what = pos.level_word
        parts.append(f"{what} {first}" if first == end else f"{what}s {first}-{end}")
    if s == final and logic:
        parts.append(pos.final_logic)
    return ", ".join(parts) or "output register (no logic)"
