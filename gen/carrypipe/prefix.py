"""Carry networks described as data: a list of levels, each a tuple of prefix nodes.

A node `(i, j)` with `j < i` combines the group (generate, propagate) pair held at bit `i`
with the one held at bit `j`:  G_i <- G_i | P_i & G_j,  P_i <- P_i & P_j.  Every network
here is checked (`validate`) to leave bit i holding the group term of bits i..0, which is
what the sum needs: s_i = p_i ^ G_(i-1).  One generic builder turns any such list into
hardware, and one generic timer turns it into unit-gate delays, so a new style is just a
new list.

Constructions follow the usual descriptions (Harris 2003, "A Taxonomy of Parallel Prefix
Networks"): widths that are not a power of two use the power-of-two network with the nodes
above the top bit removed, which leaves the lower bits' prefixes unchanged.
"""

from __future__ import annotations

from dataclasses import dataclass

Node = tuple[int, int]


@dataclass(frozen=True)
class Network:
    """A prefix network over `width` bits: `levels[k]` holds the nodes evaluated at level k."""

    style: str
    width: int
    levels: tuple[tuple[Node, ...], ...]

    @property
    def depth(self) -> int:
        return len(self.levels)

    @property
    def nodes(self) -> int:
        return sum(len(level) for level in self.levels)

    @property
    def max_fanout(self) -> int:
        """Largest number of nodes that read one bit's group term within a level."""
        best = 0
        for level in self.levels:
            uses: dict[int, int] = {}
            for _, j in level:
                uses[j] = uses.get(j, 0) + 1
            best = max([best, *uses.values()])
        return best


def _log2_ceil(n: int) -> int:
    return max(0, (n - 1).bit_length())


def _kogge_stone(n: int) -> list[list[Node]]:
    return [[(i, i - (1 << k)) for i in range(1 << k, n)] for k in range(_log2_ceil(n))]


def _sklansky(n: int) -> list[list[Node]]:
    levels = []
    for k in range(_log2_ceil(n)):
        levels.append([(i, ((i >> (k + 1)) << (k + 1)) + (1 << k) - 1)
                       for i in range(n) if i >> k & 1])
    return levels


def _brent_kung(n: int) -> list[list[Node]]:
    m = _log2_ceil(n)
    up = [[(i, i - (1 << k)) for i in range((2 << k) - 1, n, 2 << k)] for k in range(m)]
    down = [[(i, i - (1 << k)) for i in range(3 * (1 << k) - 1, n, 2 << k)]
            for k in range(m - 2, -1, -1)]
    return up + down


def _odd_then_even(n: int, inner) -> list[list[Node]]:
    """Pair each odd bit with its even neighbour, run `inner` on the odd bits, fill evens."""
    half = n // 2
    first = [(2 * q + 1, 2 * q) for q in range(half)]
    middle = [[(2 * i + 1, 2 * j + 1) for i, j in level] for level in inner(half)]
    last = [(i, i - 1) for i in range(2, n, 2)]
    return [first, *middle, last]


def _han_carlson(n: int) -> list[list[Node]]:
    return _odd_then_even(n, _kogge_stone)


def _ladner_fischer(n: int) -> list[list[Node]]:
    return _odd_then_even(n, _sklansky)


def _serial(n: int) -> list[list[Node]]:
    return [[(i, i - 1)] for i in range(1, n)]


PREFIX_STYLES = ("kogge-stone", "brent-kung", "sklansky", "han-carlson", "ladner-fischer")
BUILDERS = {
    "kogge-stone": _kogge_stone,
    "brent-kung": _brent_kung,
    "sklansky": _sklansky,
    "han-carlson": _han_carlson,
    "ladner-fischer": _ladner_fischer,
    "serial": _serial,  # the ripple chain, seen as a prefix network (for timing only)
}


def network(style: str, width: int) -> Network:
    """The `style` network over `width` bits, empty levels dropped, validated."""
    levels = tuple(tuple(level) for level in BUILDERS[style](width) if level)
    net = Network(style, width, levels)
    validate(net)
    return net


def has_local_blocks(local: int, width: int) -> bool:
    """Whether `local_width: local` splits a `width`-bit network into local blocks: 0, 1
    (every bit a block top) and `width` or more give the plain network."""
    return 1 < local < width


def local_network(style: str, width: int, local: int) -> Network:
    """The `style` network within each block of `local` bits, then over the blocks' top bits,
    then one fill-in level joining every other bit to the top of the block below.

    The sparse-tree arrangement (a carry network over block carries, each block completing its
    bits from its carry-in): all but the last two parts are wired within a block.  `local` 0
    or 1 (blocks of one bit: every bit a top) or at least `width` is the plain network.
    """
    if not has_local_blocks(local, width):
        return network(style, width)
    blocks = -(-width // local)
    tops = [min(local * (q + 1), width) - 1 for q in range(blocks)]
    levels = [[(local * q + i, local * q + j) for q in range(blocks) for i, j in level
               if local * q + i < width] for level in network(style, local).levels]
    levels += [[(tops[i], tops[j]) for i, j in level] for level in network(style, blocks).levels]
    levels.append([(i, local * q - 1) for q in range(1, blocks) for i in range(local * q, tops[q])])
    net = Network(style, width, tuple(tuple(level) for level in levels if level))
    validate(net)
    return net


def validate(net: Network) -> None:
    """Check that every node joins adjacent groups and every bit ends with its full prefix."""
    low = list(range(net.width))  # low[i]: lowest bit covered by the group held at bit i
    for k, level in enumerate(net.levels):
        seen = set()
        before = list(low)
        for i, j in level:
            if not 0 <= j < i < net.width or i in seen:
                raise ValueError(f"{net.style}: bad node {(i, j)} at level {k}")
            if before[i] != j + 1:
                raise ValueError(f"{net.style}: node {(i, j)} at level {k} joins "
                                 f"non-adjacent groups")
            seen.add(i)
            low[i] = before[j]
    if any(low):
        raise ValueError(f"{net.style}: width {net.width} leaves bits without a full prefix")


@dataclass(frozen=True)
class Gates:
    """Unit-gate delay model: each 2-input AND/OR costs `and_or`, each XOR costs `xor`.

    This is the model of the adder literature (Tyagi 1993; Zimmermann 1997, from memory):
    inverters are free, an AND-OR (the carry operator) costs two units, an XOR two units.
    """

    and_or: int = 1
    xor: int = 2


UNIT_GATES = Gates()


@dataclass(frozen=True)
class Arrival:
    """Unit-gate arrival times at the outputs of an adder: each sum bit and the carry out."""

    sums: tuple[int, ...]
    carry: int


def arrivals(net: Network, carry_in: bool, entry: int = 0, gates: Gates = UNIT_GATES,
             carry_one: bool = False) -> Arrival:
    """Arrival of every sum bit and of the carry out, from operands that arrive at `entry`
    (the gates a unit kind puts in front of the adder) and a carry-in at 0.

    p_i = a_i ^ b_i, g_i = a_i & b_i; a carry-in is folded into bit 0 (g_0 | p_0 & c, or
    g_0 | p_0 when it is the constant 1, `carry_one`); then the network; then
    s_i = p_i ^ G_(i-1).  Evaluated node by node, not by formula.
    """
    n = net.width
    t_p = [entry + gates.xor] * n
    t_g = [entry + gates.and_or] * n
    t_pp = list(t_p)  # arrival of the group propagate held at each bit
    if carry_in:
        t_g[0] = max(t_g[0], t_p[0] + (0 if carry_one else gates.and_or)) + gates.and_or
    for level in net.levels:
        new_g, new_p = list(t_g), list(t_pp)
        for i, j in level:
            new_g[i] = max(t_g[i], max(t_pp[i], t_g[j]) + gates.and_or) + gates.and_or
            new_p[i] = max(t_pp[i], t_pp[j]) + gates.and_or
        t_g, t_pp = new_g, new_p
    sums = [t_p[0] + gates.xor if carry_in else t_p[0]]
    sums += [max(t_p[i], t_g[i - 1]) + gates.xor for i in range(1, n)]
    return Arrival(tuple(sums), t_g[n - 1])


def critical_path(net: Network, carry_in: bool, carry_out: bool, gates: Gates = UNIT_GATES) -> int:
    """Unit-gate delay from registered operands (and carry-in) to the last sum or carry bit."""
    a = arrivals(net, carry_in, gates=gates)
    return max(a.sums + ((a.carry,) if carry_out else ()))
