"""The plan's latency and register counts against independent counts."""

from __future__ import annotations

import pytest

from conftest import make

SPLITS = [[64], [16] * 4, [8] * 8, [1] * 64, [5, 20, 39], [30, 30, 4], [3] * 21 + [1]]


def per_bit_waits(p):
    """Count register bits bit by bit: operand bit i waits (slice index) cycles, in a and b;
    result bit i waits (slices above it) cycles.  Independent of the plan's word list."""
    skew = deskew = 0
    for bit in range(p.width):
        owner = next(s for s in p.slices if s.lsb <= bit <= s.msb)
        skew += 2 * owner.index
        deskew += len(p.slices) - 1 - owner.index
    return skew, deskew


@pytest.mark.parametrize("split", SPLITS, ids=lambda s: f"{len(s)}x")
@pytest.mark.parametrize("opts", [{}, {"carry_in": True, "register_inputs": True, "valid": True},
                                  {"carry_out": False, "valid": True}], ids=["plain", "all", "nocout"])
def test_register_counts(split, opts):
    p = make(width=64, slices=split, **opts)
    s = len(split)
    r = p.registers
    assert (r.skew, r.deskew) == per_bit_waits(p)
    assert r.stage == 64 + (s - 1) + int(opts.get("carry_out", True))
    assert r.input == (128 + int(opts.get("carry_in", False)) if opts.get("register_inputs") else 0)
    assert p.latency == s + int(bool(opts.get("register_inputs")))
    assert r.control == (p.latency if opts.get("valid") else 0)
    words = {}
    for w in p.words:
        words[w.kind] = words.get(w.kind, 0) + w.width
    assert sum(words.values()) == r.total
    assert {k: v for k, v in r.as_dict().items() if v and k != "total"} == words


@pytest.mark.parametrize("k, s", [(1, 64), (4, 16), (16, 4), (32, 2)])
def test_even_split_triangles(k, s):
    # Closed forms of the two triangles for an even split (derived in plan.py's docstring):
    # both operands wait k*S*(S-1)/2 bits each, the result bits k*S*(S-1)/2.
    r = make(width=k * s, slice_width=k).registers
    assert r.skew == k * s * (s - 1)
    assert r.deskew == k * s * (s - 1) // 2


def test_words_are_loaded_before_they_are_read():
    p = make(width=12, slices=[4, 4, 4], register_inputs=True)
    edges = {w.name: w.edge for w in p.words}
    assert edges["a_in"] == 1
    assert edges["a_skew_1"] == 2 and edges["sum_stage_0"] == 2
    assert edges["a_skew_2"] == 3 and edges["sum_stage_1"] == 3 and edges["sum_deskew_1"] == 3
    assert edges["sum_stage_2"] == 4 == p.latency and edges["sum_deskew_2"] == 4


def test_slowest_stage_and_delays():
    p = make(width=32, slices=[8, 16, 8], cell="ripple")
    assert [s.index for s in p.slowest] == [1]
    # Ripple slice with a carry-in: t_pg + (w-1) t_AO + t_xor = 2 + 2(w-1) + 2 to its top sum
    # bit (common practice).  Slice 0 has no carry-in: its longest path is the carry out of
    # the top bit, t_pg + (w-1) t_AO.
    assert [s.delay for s in p.slices] == [2 + 2 * 7, 2 + 2 * 15 + 2, 2 + 2 * 7 + 2]


def test_ports_follow_the_options():
    names = [q.name for q in make(width=4).ports]
    assert names == ["clk", "a", "b", "sum", "cout"]
    names = [q.name for q in make(width=4, carry_in=True, carry_out=False, valid=True,
                                  enable=True, reset="sync").ports]
    assert names == ["clk", "rst", "en", "a", "b", "cin", "in_valid", "sum", "out_valid"]
