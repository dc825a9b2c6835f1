"""Carry-save reduction: counters that add a dot matrix down to two rows, level by level.

Pure data, no HDL.  A level takes the dots of each column and places counters on them:
full adders (3:2, three dots of column k in, a sum dot in column k and a carry dot in
column k + 1 out) and half adders (2:2).  Levels repeat until every column holds at most
two dots; a register rank follows every `levels_per_stage` levels (a multiplier's partial
products count as the first level), and the final adder adds the two rows that are left.

- Dadda (1965): level by level the largest height of the sequence 2, 3, 4, 6, 9, 13, 19,
  28, 42, 63, ... (d_(j+1) = floor(1.5 d_j)) below the current one is the target, and each
  column gets just the counters that bring it, with the carries coming in from the column
  below, down to that target, a full adder while two or more too many, a half adder for one.
- Wallace (1964): every level takes each column's dots three at a time into full adders and
  a pair left over into a half adder: the most reduction per level.  Its last level (from
  height 3 to 2) places just the counters needed, as Dadda's does: greedy half adders there
  would leave lone dots between pairs, gaps in the rows the final adder takes.

The constant K of the matrix (`dots.py`) is never a register.  Each one-bit of it waits in
its column and is absorbed in one of two ways, neither of which adds a counter level:
- by a half adder placed in its column anyway, which then adds it as a third input
  (x + y + 1: sum ~(x ^ y), carry x | y; `Counter.one`), at no cost in dots;
- by a dot, x + 2^k = ~x + x 2^(k+1) (the complement in column k and the same dot again in
  column k + 1), when column k + 1 has room for one more dot: not above the Dadda height
  the tallest column is at (so the levels still to come are as many); in the top column
  N - 1 only the complement, the carry falling outside the result.
A one-bit that meets neither before the columns are down to two dots is absorbed by a dot
all the same (one more level, as when a column is one dot too tall).  A one-bit in the top
column that never meets a dot (the column stays empty) is left to the final adder, whose
carry out is then complemented (`Tree.flip_carry`).

Every value is numbered: the matrix's leaves, each counter's sum and carry, and each
register of a rank.  A dot is a value, possibly complemented; `Tree.evaluate` computes every
value for given inputs, so the reduction is checked against Python's integers without HDL.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property, lru_cache

from . import dots as dm

# Unit-gate delays (Tyagi 1993): AND/OR 1, XOR 2, inverters free.  A full adder's sum is an
# XOR pair, its carry a majority (AND, then a 3-input OR); a half adder is an XOR and an AND.
DELAY = {("fa", "sum"): 4, ("fa", "carry"): 3, ("ha", "sum"): 2, ("ha", "carry"): 1}
# A leaf's logic: a bit is a wire; a partial product an AND; a Booth selection is the digit's
# one/two selects (an XOR, an AND of three and an OR: 3), an AND-OR (2) and the negating XOR
# (2); a Booth row's low bit is one AND a_0 (3), its carried negate bit one more AND (4).
LEAF_DELAY = {"bit": 0, "and": 1, "booth": 7, "booth_low": 3, "booth_carry": 4}


def dadda_heights(up_to: int) -> list[int]:
    """Dadda's sequence 2, 3, 4, 6, 9, ... up to the first value >= `up_to`."""
    seq = [2]
    while seq[-1] < up_to:
        seq.append(seq[-1] * 3 // 2)
    return seq


@dataclass(frozen=True)
class Dot:
    """A value in a column, possibly complemented."""

    value: int
    invert: bool = False

    def flipped(self) -> "Dot":
        return Dot(self.value, not self.invert)


@dataclass(frozen=True)
class Value:
    """A leaf of the matrix, a counter output, or a register of a rank."""

    index: int
    column: int
    kind: str  # leaf, sum, carry, reg
    leaf: dm.Leaf | None = None
    counter: int | None = None  # the counter whose output it is
    source: Dot | None = None  # what a register holds
    stage: int | None = None  # the stage at whose end a register loads
    row: int | None = None  # a register's place in its column (0: first)


@dataclass(frozen=True)
class Counter:
    index: int
    level: int  # 1-based (a multiplier's partial products are level 0)
    column: int
    kind: str  # fa or ha
    number: int  # its place among the counters of its kind in its column at its level
    inputs: tuple[Dot, ...]
    sum: int
    carry: int | None  # None in the top column: a carry out of the result is dropped
    one: bool = False  # a half adder that also adds a one-bit of K (sum ~(x ^ y), carry x | y)


@dataclass(frozen=True)
class Level:
    index: int  # 1-based; 0 is a multiplier's partial-product level
    stage: int  # 1-based stage holding it
    target: int | None  # the height it brings every column to (None: level 0, or a Wallace
    # level above height 3, which takes every column's dots three at a time)
    counters: tuple[int, ...]
    heights: tuple[int, ...]  # dots per column after the level (and absorbed constants)
    delay: int  # unit-gate arrival of its slowest output, from the stage's registers
    full: int = 0  # full adders among its counters
    half: int = 0  # half adders


@dataclass(frozen=True)
class Tree:
    matrix: dm.Matrix
    style: str
    values: tuple[Value, ...]
    counters: tuple[Counter, ...]
    levels: tuple[Level, ...]
    stages: int  # register ranks: the tree's stages
    ranks: tuple[tuple[tuple[Dot, ...], ...], ...]  # per stage, its registers by column
    flip_carry: bool  # 2^(N-1) is left: the final adder's carry out is complemented

    @property
    def width(self) -> int:
        return self.matrix.width

    @cached_property
    def digest(self) -> str:
        """The tree as built, in a few bytes: every value (an operand bit or partial product,
        a counter output, a register and its stage) and every counter, not the style or the
        levels per stage that placed them.  Equal for two trees that write the same Verilog
        (`fit` measures one circuit once); computed once per tree (trees are cached)."""
        def dot(d):
            return None if d is None else (d.value, d.invert)

        values = [(v.column, v.kind, v.leaf and (v.leaf.op, v.leaf.args, v.leaf.invert),
                   v.counter, dot(v.source), v.stage, v.row) for v in self.values]
        counters = [(c.level, c.column, c.kind, c.number, tuple(map(dot, c.inputs)), c.sum,
                     c.carry, c.one) for c in self.counters]
        text = repr((values, counters, self.flip_carry))
        return hashlib.sha256(text.encode()).hexdigest()

    @property
    def final(self) -> tuple[tuple[Dot, ...], ...]:
        """The last rank by column: at most two registers each."""
        return self.ranks[-1]

    @property
    def rows(self) -> "Rows":
        """Where the final adder sits on the last rank (see `Rows`)."""
        heights = [len(col) for col in self.final]
        pairs = [k for k, h in enumerate(heights) if h == 2]
        filled = [k for k, h in enumerate(heights) if h]
        if not pairs:
            if self.flip_carry:
                raise AssertionError("a constant is left with no final adder")
            return Rows(self.width, self.width, self.width, False)
        low, top = pairs[0], filled[-1]
        if any(heights[k] < 2 for k in range(low, pairs[-1])) or \
                any(heights[k] == 0 for k in range(low, top)):
            raise AssertionError(f"gaps in the final rows: {heights}")
        if self.flip_carry and top != self.width - 2:
            raise AssertionError("the left constant does not meet the final carry")
        return Rows(low, pairs[-1] + 1, top + 1, top + 1 < self.width)

    def fa(self) -> int:
        return sum(lv.full for lv in self.levels)

    def ha(self) -> int:
        return sum(lv.half for lv in self.levels)

    @property
    def cost(self) -> tuple[int, int, int]:
        """What `reduce` minimises: stages, the slowest stage's delay, register bits."""
        return (self.stages, max(map(self.stage_delay, range(1, self.stages + 1))),
                sum(len(col) for rank in self.ranks for col in rank))

    def stage_delay(self, stage: int) -> int:
        return max((lv.delay for lv in self.levels if lv.stage == stage), default=0)

    def stage_levels(self, stage: int) -> list[Level]:
        return [lv for lv in self.levels if lv.stage == stage]

    def evaluate(self, inputs: dict, m: int, n: int, signed: bool) -> list[int]:
        """Every value's bit for the given inputs (registers hold what they load)."""
        out: list[int] = []

        def dot(d: Dot) -> int:
            return out[d.value] ^ int(d.invert)

        for v in self.values:
            if v.kind == "leaf":
                out.append(dm.value(v.leaf, inputs, m, n, signed))
            elif v.kind == "reg":
                out.append(dot(v.source))
            else:
                c = self.counters[v.counter]
                total = sum(dot(d) for d in c.inputs) + c.one
                out.append(total & 1 if v.kind == "sum" else total >> 1)
        return out


@dataclass(frozen=True)
class Rows:
    """The two rows the tree leaves, for the final adder: columns low .. top-1 (both rows
    up to `pairs`, the first row alone above), the result bit `top` its carry out when
    `carry_out` (the result is wider), and the result bits below `low` finished."""

    low: int
    pairs: int
    top: int
    carry_out: bool

    @property
    def adder_width(self) -> int:
        return self.top - self.low


@lru_cache(maxsize=64)
def tree(kind, width: int, width_b: int, operands: int, signed: bool, partial_products: str,
         style: str, levels_per_stage: int) -> Tree:
    """The tree of a carry-save unit of `kind` (a `units.CarrySave`, which gives its dot
    matrix); cached: config checks and plans ask alike."""
    matrix = kind.matrix(width, width_b, operands, signed, partial_products)
    return reduce(matrix, style, levels_per_stage, matrix.logic_leaves)


def tree_of(kind, c) -> Tree:
    """The tree of a config (or a config's values as a dict) of `kind`."""
    get = c.get if isinstance(c, dict) else lambda k: getattr(c, k)
    return tree(kind, get("width"), get("width_b") or get("width"), get("operands") or 0,
                get("signed"), get("partial_products"), get("tree"),
                get("tree_levels_per_stage"))


def reduce(matrix: dm.Matrix, style: str, levels_per_stage: int,
           first_level: bool) -> Tree:
    """Place the counters and register ranks.  `first_level`: the leaves are logic (a
    multiplier's partial products), which count as level 0 of the first stage.

    K's one-bits are placed both ways (module docstring: "wait" for room or a half adder)
    and also each by a dot as soon as its column holds one ("eager"), and the tree with the
    fewest stages, then the least slowest-stage delay, then the fewest register bits, is
    kept: waiting saves a level in most trees that have a constant, but Wallace's greedy
    levels sometimes have no half adder in that column until the end (then eager is
    better)."""
    trees = [_reduce(matrix, style, levels_per_stage, first_level, wait)
             for wait in (True, False)]
    return min(trees, key=lambda t: t.cost)


def _reduce(matrix: dm.Matrix, style: str, levels_per_stage: int, first_level: bool,
            wait: bool) -> Tree:
    """`reduce` with K's one-bits waiting (`wait`) or eager."""
    n_cols = matrix.width
    values: list[Value] = []
    counters: list[Counter] = []
    levels: list[Level] = []
    cols: list[list[Dot]] = [[] for _ in range(n_cols)]
    arrival: dict[int, int] = {}  # value -> unit-gate arrival within its stage
    for leaf in matrix.leaves:
        values.append(Value(len(values), leaf.column, "leaf", leaf=leaf))
        arrival[len(values) - 1] = LEAF_DELAY[leaf.op]
        cols[leaf.column].append(Dot(len(values) - 1))
    pending = {k for k in range(n_cols) if matrix.constant >> k & 1}

    def absorb(room: int | None) -> None:
        """Absorb into a dot every waiting one-bit of K whose column holds a dot and whose
        column k + 1 holds fewer than `room` dots (None: any number), low to high."""
        for k in sorted(pending):
            if cols[k] and (k + 1 == n_cols or room is None or len(cols[k + 1]) < room):
                pending.discard(k)
                at = _lone(cols, k)
                d = cols[k][at]
                cols[k][at] = d.flipped()
                if k + 1 < n_cols:
                    cols[k + 1].append(d)

    def stage_of(level: int) -> int:
        return (level - (0 if first_level else 1)) // levels_per_stage + 1

    def room() -> int | None:
        """The Dadda height the tallest column is at: up to it, one more dot costs no level."""
        return dadda_heights(max(map(len, cols), default=0))[-1] if wait else None

    absorb(room())
    if first_level:
        levels.append(Level(0, 1, None, (), tuple(map(len, cols)),
                            max(arrival.values(), default=0)))
    ranks: list[tuple[tuple[Dot, ...], ...]] = []

    def register(stage: int) -> None:
        """The rank at the end of `stage`: every dot of every column into a register."""
        rank = []
        for k, col in enumerate(cols):
            regs = []
            for row, d in enumerate(col):
                values.append(Value(len(values), k, "reg", source=d, stage=stage, row=row))
                arrival[len(values) - 1] = 0
                regs.append(Dot(len(values) - 1))
            rank.append(tuple(regs))
        cols[:] = [list(r) for r in rank]
        ranks.append(tuple(rank))

    index = 0
    while max(map(len, cols), default=0) > 2 or _stranded(cols, pending):
        if max(map(len, cols), default=0) <= 2:
            absorb(None)  # down to two rows, a one-bit still waits: one more level
            continue
        index += 1
        stage = stage_of(index)
        if levels and levels[-1].stage != stage:
            register(levels[-1].stage)
        height = max(map(len, cols))
        # Wallace's last level (height 3 to 2) places just the counters needed, as Dadda's.
        target = max(d for d in dadda_heights(height) if d < height) \
            if style == "dadda" or height == 3 else None
        new: list[list[Dot]] = [[] for _ in range(n_cols)]
        carries_in: list[Dot] = []
        placed = []
        for k in range(n_cols):
            avail = list(cols[k])
            total = len(avail) + len(carries_in)
            plan = _counters(style, len(avail), total, target)
            outs, carries_out = [], []
            numbers = {"fa": 0, "ha": 0}
            one = k in pending and "ha" in plan  # the first half adder takes the one-bit
            if one:
                pending.discard(k)
            for kind in plan:
                size = 3 if kind == "fa" else 2
                ins, avail = tuple(avail[:size]), avail[size:]
                base = max(arrival[d.value] for d in ins)
                ci = len(counters)
                s_id = len(values)
                values.append(Value(s_id, k, "sum", counter=ci))
                arrival[s_id] = base + DELAY[(kind, "sum")]
                c_id = None
                if k + 1 < n_cols:
                    c_id = len(values)
                    values.append(Value(c_id, k + 1, "carry", counter=ci))
                    arrival[c_id] = base + DELAY[(kind, "carry")]
                    carries_out.append(Dot(c_id))
                takes = one and kind == "ha" and numbers["ha"] == 0
                counters.append(Counter(ci, index, k, kind, numbers[kind], ins, s_id, c_id,
                                        takes))
                numbers[kind] += 1
                placed.append(ci)
                outs.append(Dot(s_id))
            new[k] = outs + carries_in + avail
            carries_in = carries_out
        cols[:] = new
        absorb(room())
        slowest = max((arrival[d.value] for col in cols for d in col), default=0)
        full = sum(1 for ci in placed if counters[ci].kind == "fa")
        levels.append(Level(index, stage, target, tuple(placed), tuple(map(len, cols)),
                            slowest, full, len(placed) - full))
    if not levels:  # nothing to reduce and no partial-product logic: cannot happen (>= 3
        raise ValueError("a carry-save tree needs at least one level")  # operands)
    register(levels[-1].stage)
    flip = bool(pending)
    if pending - {n_cols - 1}:
        raise AssertionError(f"constant bits {sorted(pending)} met no dot")  # see docstring
    return Tree(matrix, style, tuple(values), tuple(counters), tuple(levels),
                levels[-1].stage, tuple(ranks), flip)


def _stranded(cols: list[list[Dot]], pending: set[int]) -> bool:
    """A one-bit of K still waits in a column that holds a dot (the top column's waits for
    the final adder's carry only when the column is empty)."""
    return any(cols[k] for k in pending)


def _lone(cols: list[list[Dot]], k: int) -> int:
    """Which dot of column k absorbs a one-bit of K: the last one whose value is in no other
    place (else the last).  An absorbed dot stays in column k complemented and moves on to
    column k + 1: absorbing a value already there (one that came up from column k - 1)
    would put one value in two registers of the next rank."""
    count: dict[int, int] = {}
    for col in cols:
        for d in col:
            count[d.value] = count.get(d.value, 0) + 1
    return next((i for i in reversed(range(len(cols[k]))) if count[cols[k][i].value] == 1),
                len(cols[k]) - 1)


def _counters(style: str, avail: int, total: int, target: int | None) -> list[str]:
    """The counters of one column at one level: `avail` dots of the rank before, `total`
    with the carries arriving from the column below in this level."""
    out = []
    if style == "wallace" and target is None:
        return ["fa"] * (avail // 3) + (["ha"] if avail % 3 == 2 else [])
    while total > target:
        if total - target >= 2 and avail >= 3:
            out.append("fa")
            avail, total = avail - 3, total - 2
        elif avail >= 2:
            out.append("ha")
            avail, total = avail - 2, total - 1
        else:
            break
    return out
