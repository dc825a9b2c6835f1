"""Adder cells: the combinational logic of one slice, one function per cell family.

Each takes Amaranth values a, b (w bits) and a carry-in (a 1-bit value or None) and returns
(sum, carry_out) as Amaranth values; the pipeline around them lives in `unit.py`.
"""

from __future__ import annotations

from amaranth.hdl import Cat, Const, Module, Signal, Value

from . import prefix


def ripple(m: Module, a: Value, b: Value, cin, name: str):
    """Explicit full-adder cells: s = a ^ b ^ c, carry = majority(a, b, c)."""
    carry = cin if cin is not None else Const(0, 1)
    sums = []
    for i in range(len(a)):
        s = Signal(name=f"{name}_s{i}")
        c = Signal(name=f"{name}_c{i + 1}")
        m.d.comb += [s.eq(a[i] ^ b[i] ^ carry),
                     c.eq((a[i] & b[i]) | (a[i] & carry) | (b[i] & carry))]
        sums.append(s)
        carry = c
    return Cat(*sums), carry


def native(m: Module, a: Value, b: Value, cin, name: str):
    """Behavioural `+`, left for synthesis to map onto the FPGA's carry chain.

    A carry-in is added as a forced-carry low bit, `{a,1} + {b,cin}`, so the whole slice stays
    one adder (one carry chain) instead of two chained additions.
    """
    w = len(a)
    total = Signal(w + 1, name=f"{name}_add")
    low = Signal(name=f"{name}_add_unused")  # the forced-carry bit: not a result bit
    if cin is None:
        m.d.comb += Cat(low, total).eq(Cat(Const(0, 1), a) + Cat(Const(0, 1), b))
    else:
        m.d.comb += Cat(low, total).eq(Cat(Const(1, 1), a) + Cat(cin, b))
    return total[:w], total[w]


def prefix_adder(m: Module, a: Value, b: Value, cin, name: str, net: prefix.Network):
    """Generate/propagate, then the prefix network `net` node by node, then the sum."""
    w = len(a)
    p = Signal(w, name=f"{name}_p")
    g = Signal(w, name=f"{name}_g")
    m.d.comb += [p.eq(a ^ b), g.eq(a & b)]
    gs = [g[i] for i in range(w)]
    ps = [p[i] for i in range(w)]
    if cin is not None:
        g0 = Signal(name=f"{name}_g0c")
        m.d.comb += g0.eq(g[0] | (p[0] & cin))
        gs[0] = g0
    for k, level in enumerate(net.levels):
        new_g, new_p = list(gs), list(ps)
        for i, j in level:
            gn = Signal(name=f"{name}_G{k}_{i}")
            pn = Signal(name=f"{name}_P{k}_{i}")
            m.d.comb += [gn.eq(gs[i] | (ps[i] & gs[j])), pn.eq(ps[i] & ps[j])]
            new_g[i], new_p[i] = gn, pn
        gs, ps = new_g, new_p
    carries = [cin if cin is not None else Const(0, 1)] + gs[:-1]
    s = Signal(w, name=f"{name}_sum")
    m.d.comb += s.eq(Cat(*[p[i] ^ carries[i] for i in range(w)]))
    return s, gs[-1]


def build(m: Module, cell: str, a: Value, b: Value, cin, name: str, net: prefix.Network):
    """The sum and carry-out of one slice in the given cell style."""
    if cell == "ripple":
        return ripple(m, a, b, cin, name)
    if cell == "native":
        return native(m, a, b, cin, name)
    return prefix_adder(m, a, b, cin, name, net)
