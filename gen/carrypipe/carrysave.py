"""A carry-save unit as a netlist, built from its plan (`treeplan.py`) and nothing else.

Stage 0 forms the partial products (`pp<j>`, one wire per row of the dot diagram; with
Booth recoding also the digit selects `booth_one`, `booth_two`, `booth_neg` and the carried
negate bits `booth_carry`), or reads a sum's operands as they are.  Every counter level then
adds its columns with full adders (sum x ^ y ^ z, carry the majority x & y | x & z | y & z)
and half adders (x ^ y, x & y; ~(x ^ y), x | y for one that also adds a one-bit of the
constant); a counter output is a wire (`fa<n>_sum_l<level>`: the n-th full adder of each
column at that level, at its column; `fa<n>_carry_l<level>` at the column above) when logic
of its own stage reads it or it is read twice, else it is written into the register that
holds it.  At the end of each stage every dot is registered, row by row:
`row<r>_stage_<i>` holds the r-th dot of each column.  The final adder (the nested plan's
own builder, `slices.py` or `leveled.py`) adds `row0` and `row1` of the last rank; the
result bits below it wait in `<result>_low_<i>`.
"""

from __future__ import annotations

from . import header
from .dots import booth_single
from .netlist import Arith, Const, Expr, Netlist, Ref, Rep, bit, cat
from .pipeline import Frame
from .reduction import Dot, Tree


def _is_one(x: Expr | None) -> bool:
    return isinstance(x, Const) and x.value == 1


def _and(*xs: Expr | None) -> Expr | None:
    """AND of one-bit expressions, folding constants (None stands for 0)."""
    if any(x is None for x in xs):
        return None
    kept = [x for x in xs if not _is_one(x)]
    if not kept:
        return Const(1, 1)
    out = kept[0]
    for x in kept[1:]:
        out = out & x
    return out


def _or(x: Expr | None, y: Expr | None) -> Expr | None:
    if _is_one(x) or _is_one(y):
        return Const(1, 1)
    return y if x is None else x if y is None else x | y


def _not(x: Expr | None) -> Expr | None:
    if x is None:
        return Const(1, 1)
    return None if _is_one(x) else ~x


def _xor(x: Expr | None, y: Expr | None) -> Expr | None:
    if _is_one(x):
        return _not(y)
    if _is_one(y):
        return _not(x)
    return y if x is None else x if y is None else x ^ y


def build(plan) -> Netlist:
    f = Frame(plan)
    tree = plan.tree
    expr = _leaves(plan, f)
    for stage in range(1, tree.stages + 1):
        if stage > 1 or any(lv.index for lv in tree.stage_levels(1)):
            if stage > 1:
                f.b.section(*header.tree_title(plan, plan.stages[stage - 1]))
            _counters(plan, f, stage, expr)
        _rank(plan, f, stage, expr)
    return f.finish({plan.unit.result: _result(plan, f)})


def _bit_of(src: Expr, width: int, signed: bool, j: int) -> Expr | None:
    """Bit j of an input, extended past its top (signed: the sign bit; else 0 = None)."""
    if j < 0 or (j >= width and not signed):
        return None
    return bit(src, min(j, width - 1))


def _leaves(plan, f: Frame) -> dict[int, Expr]:
    """Stage 0's section and the expression of every leaf of the matrix (by the matrix's
    family: operand bits, AND products or Booth rows)."""
    f.b.section(*header.tree_title(plan, plan.stages[0]))
    leaves = [v for v in plan.tree.values if v.kind == "leaf"]
    return LEAVES[plan.tree.matrix.family](plan.config, f, leaves)


def _operand_bits(c, f: Frame, leaves) -> dict[int, Expr]:
    """A sum's leaves: the operands' bits (the sign bits inverted, their constant in K)."""
    expr = {}
    for v in leaves:
        name, j = v.leaf.args
        e = bit(f.src[name], j)
        expr[v.index] = ~e if v.leaf.invert else e
    return expr


def _and_rows(c, f: Frame, leaves) -> dict[int, Expr]:
    """The AND array: row j is a & b_j, one wire `pp<j>` per row (Baugh-Wooley inversions)."""
    a_src, b_src = f.src["a"], f.src["b"]
    rows: dict[int, dict[int, Expr]] = {}
    for v in leaves:
        i, j = v.leaf.args
        e = bit(a_src, i) & bit(b_src, j)
        rows.setdefault(j, {})[v.column] = ~e if v.leaf.invert else e
    wires = {j: f.b.wire_runs(f"pp{j}", bits) for j, bits in sorted(rows.items())}
    return {v.index: wires[v.leaf.args[1]][v.column] for v in leaves}


def _booth_rows(c, f: Frame, leaves) -> dict[int, Expr]:
    """Radix-4 Booth: the digit selects of every row, then the rows and their negate bits."""
    b = f.b
    expr: dict[int, Expr] = {}
    m, n = c.width, c.width_b
    a_src, b_src = f.src["a"], f.src["b"]

    def a(i):
        return _bit_of(a_src, m, c.signed, i)

    used = sorted({v.leaf.args[0] for v in leaves})
    selects: dict[str, dict[int, Expr]] = {"one": {}, "two": {}, "neg": {}}
    for k in used:
        hi, mid, lo = (_bit_of(b_src, n, c.signed, j) for j in (2 * k + 1, 2 * k, 2 * k - 1))
        two = (None if booth_single(k, n, c.signed)  # hi is mid: never ±2
               else _or(_and(hi, _not(mid), _not(lo)), _and(_not(hi), mid, lo)))
        for name, e in (("one", _xor(mid, lo)), ("two", two), ("neg", hi)):
            if e is not None:
                selects[name][k] = e
    wired = {name: b.wire_runs(f"booth_{name}", bits) for name, bits in selects.items() if bits}

    def pick(name: str, k: int) -> Expr | None:
        return wired[name][k] if k in selects[name] else None

    rows: dict[int, dict[int, Expr]] = {}
    for v in leaves:
        k = v.leaf.args[0]
        if v.leaf.op == "booth_low":
            e = _and(pick("one", k), a(0))
        elif v.leaf.op == "booth":
            i = v.leaf.args[1]
            e = _xor(_or(_and(pick("one", k), a(i)), _and(pick("two", k), a(i - 1))),
                     pick("neg", k))
            if v.leaf.invert:
                e = _not(e)
        else:
            continue
        rows.setdefault(k, {})[v.column] = e
    wires = {k: b.wire_runs(f"pp{k}", bits) for k, bits in sorted(rows.items())}
    carries = {}
    for v in leaves:
        if v.leaf.op == "booth_carry":  # neg & ~(the row's low bit before negation)
            k = v.leaf.args[0]
            low = wires[k][2 * k] if 2 * k in rows.get(k, {}) else _and(pick("one", k), a(0))
            carries[k] = _and(pick("neg", k), _not(low))
    carry = b.wire_runs("booth_carry", carries) if carries else None
    for v in leaves:
        k = v.leaf.args[0]
        expr[v.index] = carry[k] if v.leaf.op == "booth_carry" else wires[k][v.column]
    return expr


LEAVES = {"operands": _operand_bits, "and": _and_rows, "booth4": _booth_rows}


def _dot(expr: dict[int, Expr], d: Dot) -> Expr:
    e = expr[d.value]
    return ~e if d.invert else e


def _counters(plan, f: Frame, stage: int, expr: dict[int, Expr]) -> None:
    """The counter levels of `stage`: outputs read inside the stage, or twice, as wires."""
    tree: Tree = plan.tree
    b = f.b
    levels = [lv for lv in tree.stage_levels(stage) if lv.index]
    readers: dict[int, int] = {}
    for lv in levels:
        for ci in lv.counters:
            for d in tree.counters[ci].inputs:
                readers[d.value] = readers.get(d.value, 0) + 2  # logic of this stage
    for col in tree.ranks[stage - 1]:
        for d in col:
            src = tree.values[d.value].source
            readers[src.value] = readers.get(src.value, 0) + 1
    for lv in levels:
        families: dict[str, dict[int, tuple[int, Expr]]] = {}
        for ci in lv.counters:
            cnt = tree.counters[ci]
            ins = [_dot(expr, d) for d in cnt.inputs]
            if cnt.kind == "fa":
                x, y, z = ins
                outs = ((cnt.sum, x ^ y ^ z), (cnt.carry, x & y | x & z | y & z))
            elif cnt.one:  # x + y + 1
                x, y = ins
                outs = ((cnt.sum, ~(x ^ y)), (cnt.carry, x | y))
            else:
                x, y = ins
                outs = ((cnt.sum, x ^ y), (cnt.carry, x & y))
            for (value, e), what in zip(outs, ("sum", "carry")):
                if value is None:
                    continue
                if readers.get(value, 0) > 1:
                    name = f"{cnt.kind}{cnt.number}_{what}_l{lv.index}"
                    families.setdefault(name, {})[tree.values[value].column] = (value, e)
                else:
                    expr[value] = e
        for name, bits in families.items():
            wires = b.wire_runs(name, {k: e for k, (_, e) in bits.items()})
            for k, (value, _) in bits.items():
                expr[value] = wires[k]


def _rank(plan, f: Frame, stage: int, expr: dict[int, Expr]) -> None:
    """The registers at the end of `stage`, row by row."""
    tree = plan.tree
    rank = tree.ranks[stage - 1]
    for (at, row), words in plan.rank_words.items():
        if at != stage - 1:
            continue
        for w in words:
            reg = f.reg(w.name)
            bits = {}
            for k in range(w.lsb, w.lsb + w.width):
                d = rank[k][row]
                bits[k] = _dot(expr, tree.values[d.value].source)
                expr[d.value] = reg[k]
            f.b.load_bits(reg, bits)


def _row(plan, f: Frame, row: int) -> Ref | None:
    """Row `row` of the last rank over the final adder's columns, as one vector."""
    r = plan.rows
    end = r.top if row == 0 else r.pairs
    return f.b.names[plan.row_register(plan.tree.stages - 1, row, r.low)][r.low:end]


def _result(plan, f: Frame) -> Expr:
    """The result: the final adder's bits, its carry out, the finished low bits."""
    tree, r = plan.tree, plan.rows
    width = tree.width
    b = f.b
    if plan.adder is None:
        bits = [_final_bit(plan, f, k) for k in range(width)]
        return cat(*bits)
    drives = plan.adder.build_into(f, {"row0": _row(plan, f, 0), "row1": _row(plan, f, 1)})
    parts: list[Expr] = []
    if plan.low_columns:
        b.section(*header.low_title(plan, plan.low_columns))
        current = {k: _final_bit(plan, f, k) for k in plan.low_columns}
        for s in plan.adder.stages:
            for w in plan.low_words[s.index]:
                reg = f.reg(w.name)
                b.load(reg, cat(*(current[k] for k in range(w.lsb, w.lsb + w.width))))
                for k in range(w.lsb, w.lsb + w.width):
                    current[k] = reg[k]
        parts = [current.get(k, Const(0, 1)) for k in range(r.low)]
    else:
        parts = [Const(0, 1)] * r.low
    parts.append(drives[plan.unit.result])
    if r.carry_out:
        parts.append(drives["cout"])
    top = r.top + (1 if r.carry_out else 0)
    if top < width:
        parts.append(Const(0, width - top))
    return cat(*parts)


def _final_bit(plan, f: Frame, k: int) -> Expr:
    """Column k of the last rank, which holds at most one dot there (or none: 0)."""
    if not plan.tree.final[k]:
        return Const(0, 1)
    return f.b.names[plan.row_register(plan.tree.stages - 1, 0, k)][k]


def build_native(plan) -> Netlist:
    """`tree: native`: the operation as one `+` or `*`, registered, then delay ranks."""
    c = plan.config
    f = Frame(plan)
    b = f.b
    width = plan.result_width

    def ext(name: str, w: int) -> Expr:
        src = f.src[name]
        if not c.signed or w == width:
            return src
        return cat(src, Rep(bit(src, w - 1), width - w) if width - w > 1 else bit(src, w - 1))

    value = Arith(plan.unit.operator,
                  tuple(ext(p.name, p.width) for p in plan.unit.operand_ports(c)), width)
    for s in plan.stages:
        b.section(*header.stage_title(plan, s))
        reg = f.reg(f"{plan.unit.result}_stage_{s.index}")
        b.load(reg, value)
        value = reg.all
    return f.finish({plan.unit.result: value})
