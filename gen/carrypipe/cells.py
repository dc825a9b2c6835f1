"""Adder cell styles: one registry (family, carry network, builder, timing) and the builders.

A cell is the combinational core of one slice: `core` returns, as one netlist expression,
the result bits (LSB first) and on top the chain bit (carry out, or borrow out for a
subtraction) of x + y + c or x - y - c.  Wires it needs are declared in the slice's section
with names from the slice and bit positions from the unit (`slice2_g3[47:36]` is the group
generate of bits 47..36 after prefix level 3).

- `native`: behavioural `+` / `-` / `<`, so FPGA synthesis maps it onto the carry chain;
- `ripple`: explicit full-adder (or full-subtractor) cells, one carry wire per bit;
- a parallel-prefix network (`prefix.BUILDERS`): bit generate/propagate, the network's
  nodes level by level (only those some output needs), then the sum.
"""

from __future__ import annotations

from dataclasses import dataclass

from . import prefix
from .netlist import Arith, Builder, Cmp, Const, Expr, Ref, Vec, bit, cat


@dataclass(frozen=True)
class Style:
    """One cell style: how it is built and which carry network times it."""

    name: str
    family: str  # "behavioural", "gates" or "prefix"
    network: str  # the `prefix.BUILDERS` network that times it (serial: a ripple chain)
    dense: bool = False  # a prefix network of much wiring (Kogge-Stone) or fan-out (Sklansky)

    def carry_network(self, width: int) -> prefix.Network:
        return prefix.network(self.network, width)


STYLES = {s.name: s for s in (
    Style("ripple", "gates", "serial"),
    Style("native", "behavioural", "serial"),
    *(Style(name, "prefix", name, name in ("kogge-stone", "sklansky"))
      for name in prefix.PREFIX_STYLES),
)}
SPARSE_STYLES = ("han-carlson", "brent-kung")  # the sparse networks a tip offers
PREFIX_STYLES = tuple(n for n, s in STYLES.items() if s.family == "prefix")


@dataclass
class Slot:
    """Where a cell builds: the netlist builder, a name prefix, the first bit position."""

    b: Builder
    name: str
    lsb: int

    def wire(self, suffix: str, expr: Expr, lsb: int | None = None) -> Vec:
        """A wire named after the slot holding `expr` (or the wire `expr` already is)."""
        if isinstance(expr, Ref) and expr.vec.role == "wire" and expr.width == expr.vec.width:
            return expr.vec
        self.b.wire(f"{self.name}_{suffix}", expr, self.lsb if lsb is None else lsb)
        return self.b.names[f"{self.name}_{suffix}"]


def core(slot: Slot, style: str, x: Expr, y: Expr, c: Expr | None, op: str = "add",
         want_carry: bool = True, want_sum: bool = True) -> Expr:
    """{chain out, result} of x + y + c (op "add") or x - y - c (op "sub", chain = borrow).

    The expression is `want_sum` * width result bits, then the chain bit if `want_carry`.
    """
    family = STYLES[style].family
    if family == "behavioural":
        return _native(slot, x, y, c, op, want_carry, want_sum)
    if family == "gates":
        return _ripple(slot, x, y, c, op, want_carry, want_sum)
    net = STYLES[style].carry_network(x.width)
    return _prefix(slot, net, x, y, c, op, want_carry, want_sum)


def _native(slot: Slot, x, y, c, op, want_carry, want_sum) -> Expr:
    w = x.width
    if not want_sum:  # the borrow alone: a comparison, which synthesis maps onto the chain
        if isinstance(c, Const):  # borrow-in 0: a < b; borrow-in 1: a <= b
            return Cmp("<=" if c.value else "<", x, y)
        lt = Cmp("<", x, y)
        return lt if c is None else lt | Cmp("==", x, y) & c
    width = w + want_carry
    if op == "add":
        return Arith("+", (x, y) + ((c,) if c is not None else ()), width)
    if c is None:
        return Arith("-", (x, y), width)
    # A borrow-in as a forced low bit, {x,0} - {y,c}: one subtraction (one carry chain)
    # instead of two chained ones; the low bit of that difference is not a result bit.
    _, total = slot.b.split_wire([(f"{slot.name}_unused", 1, 0),
                                  (f"{slot.name}_diff", width, slot.lsb)],
                                 Arith("-", (cat(Const(0, 1), x), cat(c, y)), width + 1))
    return total.all


def _ripple(slot: Slot, x, y, c, op, want_carry, want_sum) -> Expr:
    """Full-adder cells: s = x ^ y ^ c, c' = majority(x, y, c); a subtraction uses the
    full subtractor, d = x ^ y ^ b, b' = majority(~x, y, b) (common practice)."""
    w = x.width
    carries = [c]  # carry (borrow) into each bit
    for i in range(w):
        xi, yi, ci = bit(x, i), bit(y, i), carries[-1]
        xg = ~xi if op == "sub" else xi
        if i == w - 1 and not want_carry:
            break
        value = xg & yi if ci is None else (xg & yi) | (xg & ci) | (yi & ci)
        carries.append(slot.wire(f"c{slot.lsb + i + 1}", value, 0).all)
    if not want_sum:
        return carries[w]
    into = cat(*[Const(0, 1) if ci is None else ci for ci in carries[:w]])
    total = x ^ y ^ into
    return cat(total, carries[w]) if want_carry else total


def _prefix(slot: Slot, net: prefix.Network, x, y, c, op, want_carry, want_sum) -> Expr:
    """Generate/propagate, the network's live nodes level by level, then the sum bits."""
    w, lsb = x.width, slot.lsb
    # Which group terms some output reads, walking the levels backwards.
    final_g = {i: None for i in range(w - 1)} if want_sum else {}
    if want_carry:
        final_g[w - 1] = None
    versions: list[dict[int, tuple]] = [{i: ("bit", i) for i in range(w)}]
    for k, level in enumerate(net.levels):
        cur = dict(versions[-1])
        for i, _ in level:
            cur[i] = (k, i)
        versions.append(cur)
    need_g, need_p = set(), set()
    todo = [(len(net.levels), i, "g") for i in final_g]
    while todo:
        k, i, kind = todo.pop()
        src = versions[k][i]
        key = (src, kind)
        if key in (need_g if kind == "g" else need_p):
            continue
        (need_g if kind == "g" else need_p).add(key)
        if src[0] == "bit":
            if kind == "g" and i == 0 and c is not None:
                need_p.add((("bit", 0), "p"))
            continue
        lev = src[0]
        j = dict(net.levels[lev])[i]
        todo += [(lev, i, "g"), (lev, i, "p"), (lev, j, "g")]
        if kind == "p":
            todo.append((lev, j, "p"))

    p_xor = x ^ y  # propagate of an addition; also every difference/sum bit before its carry
    p_bits = {lsb + i: (bit(p_xor, i) if op == "add" else ~bit(p_xor, i))
              for i in range(w) if (("bit", i), "p") in need_p}
    refs: dict[tuple, Expr] = {}
    t_name = "p" if op == "add" else "pb"
    if p_bits:
        p_vec = slot.b.wire_runs(f"{slot.name}_{t_name}", p_bits)
        refs.update({(("bit", q - lsb), "p"): p_vec[q] for q in p_bits})
    g_bits = {}
    for i in range(w):
        if (("bit", i), "g") in need_g:
            xg = ~bit(x, i) if op == "sub" else bit(x, i)
            g = xg & bit(y, i)
            if i == 0 and c is not None:
                g = g | refs[(("bit", 0), "p")] & c
            g_bits[lsb + i] = g
    if g_bits:
        g_vec = slot.b.wire_runs(f"{slot.name}_g", g_bits)
        refs.update({(("bit", q - lsb), "g"): g_vec[q] for q in g_bits})
    for k, level in enumerate(net.levels):
        for kind in ("g", "p"):
            bits = {}
            for i, j in level:
                if ((k, i), kind) not in (need_g if kind == "g" else need_p):
                    continue
                gi, pi = refs[(versions[k][i], "g")], refs[(versions[k][i], "p")]
                if kind == "g":
                    bits[lsb + i] = gi | pi & refs[(versions[k][j], "g")]
                else:
                    bits[lsb + i] = pi & refs[(versions[k][j], "p")]
            if bits:
                vec = slot.b.wire_runs(f"{slot.name}_{kind.upper()}{k + 1}", bits)
                refs.update({((k, q - lsb), kind): vec[q] for q in bits})
    last = versions[-1]
    carry_out = refs[(last[w - 1], "g")] if want_carry else None
    if not want_sum:
        return carry_out
    into = cat(Const(0, 1) if c is None else c, *[refs[(last[i], "g")] for i in range(w - 1)])
    result = p_xor ^ into
    return cat(result, carry_out) if want_carry else result
