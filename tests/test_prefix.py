"""Carry networks against the published depth and node counts, and the unit-gate timer
against the ripple-carry delay formula.

Depth / node-count formulas for N a power of two, as tabulated in Harris 2003, "A Taxonomy
of Parallel Prefix Networks" (Table 1), from memory:
  Kogge-Stone (1973)     depth log2 N        nodes N log2 N - N + 1
  Sklansky (1960)        depth log2 N        nodes (N/2) log2 N
  Brent-Kung (1982)      depth 2 log2 N - 1  nodes 2N - 2 - log2 N
  Han-Carlson (1987)     depth log2 N + 1    nodes (N/2) log2 N
  Ladner-Fischer (1980)  depth log2 N + 1    (the variant with one extra level: Sklansky on
                         the odd bits, fan-out halved); its node count (N/4) log2 N + 3N/4 - 1
                         is derived here from that construction, not quoted.
"""

from __future__ import annotations

import itertools
import math

import pytest

from carrypipe import prefix

POWERS = [2, 4, 8, 16, 32, 64, 128, 256, 1024]
PUBLISHED = {
    "kogge-stone": (lambda n, k: k, lambda n, k: n * k - n + 1),
    "sklansky": (lambda n, k: k, lambda n, k: n // 2 * k),
    "brent-kung": (lambda n, k: 2 * k - 1, lambda n, k: 2 * n - 2 - k),
    "han-carlson": (lambda n, k: k + 1, lambda n, k: n // 2 * k),
    "ladner-fischer": (lambda n, k: k + 1, lambda n, k: n // 4 * k + 3 * n // 4 - 1),
}


# The odd/even constructions (Han-Carlson, Ladner-Fischer) add their extra level from N = 4.
@pytest.mark.parametrize("style, n", [(s, n) for s in PUBLISHED for n in POWERS
                                      if n >= 4 or s not in ("han-carlson", "ladner-fischer")])
def test_published_depth_and_nodes(style, n):
    depth, nodes = PUBLISHED[style]
    net = prefix.network(style, n)
    k = int(math.log2(n))
    assert (net.depth, net.nodes) == (depth(n, k), nodes(n, k))


def test_fanout_of_kogge_stone_and_sklansky():
    # Harris 2003: Kogge-Stone has fan-out 2 (one read per level here), Sklansky N/2 + 1
    # counting the bit's own node (N/2 reads of one bit in its last level here).
    assert prefix.network("kogge-stone", 64).max_fanout == 1
    assert prefix.network("sklansky", 64).max_fanout == 32


def evaluate(net: prefix.Network, a: int, b: int, cin: int) -> int:
    """Compute a + b + cin bit by bit through the network (Python ints as the reference)."""
    n = net.width
    g = [(a >> i & 1) & (b >> i & 1) for i in range(n)]
    p = [(a >> i & 1) ^ (b >> i & 1) for i in range(n)]
    pp = list(p)
    g[0] |= p[0] & cin
    for level in net.levels:
        ng, npp = list(g), list(pp)
        for i, j in level:
            ng[i] = g[i] | (pp[i] & g[j])
            npp[i] = pp[i] & pp[j]
        g, pp = ng, npp
    carries = [cin] + g[:-1]
    s = sum((p[i] ^ carries[i]) << i for i in range(n))
    return s | g[-1] << n


@pytest.mark.parametrize("style", list(prefix.BUILDERS))
@pytest.mark.parametrize("n", [1, 2, 3, 5, 7, 8, 13])
def test_networks_add_exhaustively(style, n):
    net = prefix.network(style, n)
    for a, b, cin in itertools.product(range(1 << n), range(1 << n), (0, 1)) if n <= 5 else \
            ((x * 37 % (1 << n), x * 91 % (1 << n), x & 1) for x in range(4000)):
        assert evaluate(net, a, b, cin) == a + b + cin  # reference: Python integers


def test_validate_rejects_bad_networks():
    with pytest.raises(ValueError, match="non-adjacent"):
        prefix.validate(prefix.Network("x", 4, (((1, 0),), ((3, 0),))))
    with pytest.raises(ValueError, match="without a full prefix"):
        prefix.validate(prefix.Network("x", 3, (((1, 0),),)))
    with pytest.raises(ValueError, match="bad node"):
        prefix.validate(prefix.Network("x", 3, (((0, 1),),)))


@pytest.mark.parametrize("n", [1, 2, 8, 37, 64, 100])
def test_ripple_path_follows_the_textbook_formula(n):
    # Ripple-carry critical path t_pg + (N - 1) t_AO + t_xor (common practice; e.g. Weste &
    # Harris, "CMOS VLSI Design", ripple-carry adder delay, from memory), with the unit-gate
    # costs t_pg = t_xor = 2 (XOR) and t_AO = 2 (AND then OR), the carry-in arriving at 0.
    t_pg, t_ao, t_xor = 2, 2, 2
    net = prefix.network("serial", n)
    assert prefix.critical_path(net, carry_in=True, carry_out=False) == t_pg + (n - 1) * t_ao + t_xor


@pytest.mark.parametrize("n", [8, 16, 64, 256])
@pytest.mark.parametrize("style", list(PUBLISHED))
def test_prefix_path_is_logarithmic(style, n):
    # Unit-gate delay of a parallel-prefix adder (common practice; Zimmermann 1997, from
    # memory): XOR for p (2), the carry-in folded into bit 0 (2), at most one AND-OR per
    # prefix level (2 each), then the sum XOR (2).  The carry out of the top bit has to pass
    # every level, so the path is never shorter than the bound without the final XOR.
    net = prefix.network(style, n)
    path = prefix.critical_path(net, carry_in=True, carry_out=True)
    assert 2 + 2 + 2 * net.depth <= path <= 2 + 2 + 2 * net.depth + 2
