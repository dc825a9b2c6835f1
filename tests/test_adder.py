"""The pipelined adder in simulation, against Python integer addition."""

from __future__ import annotations

import itertools

import pytest

from carrypipe import cells, sim, vectors
from carrypipe.netlist import bit, cat
from carrypipe.config import CELLS
from conftest import make, needs_icarus, simulate

WIDTHS = [1, 2, 7, 37, 64, 100]
OPTION_SETS = [
    {},
    {"carry_in": True},
    {"carry_out": False, "valid": True},
    {"enable": True, "valid": True, "reset": "sync"},
    {"register_inputs": True, "carry_in": True, "enable": True},
    {"carry_in": True, "valid": True, "reset": "sync", "register_inputs": True, "enable": True},
    {"valid": True, "reset": "async", "enable": True},
    {"carry_in": True, "valid": True, "reset": "sync", "reset_data": True},
    {"carry_out": False, "reset": "async", "reset_data": True, "register_inputs": True},
]


def splits(width):
    """Slice widths 1, 3 and W, and an uneven list (narrow at both ends)."""
    out = {"sw1": {"slice_width": 1}, "sw3": {"slice_width": min(3, width)},
           "swW": {"slice_width": width}}
    if width >= 3:
        out["uneven"] = {"slices": [1, width - 2, 1]}
    return out


CASES = []
for n, (cell, width) in enumerate(itertools.product(CELLS, WIDTHS)):
    for m, (split_id, split) in enumerate(splits(width).items()):
        opts = OPTION_SETS[(n + m) % len(OPTION_SETS)]  # every option set meets every cell
        CASES.append(pytest.param(cell, width, split, opts,
                                  id=f"{cell}-w{width}-{split_id}-o{(n + m) % len(OPTION_SETS)}"))


@pytest.mark.parametrize("cell, width, split, opts", CASES)
def test_matches_python_integers(cell, width, split, opts):
    simulate(make(width=width, cell=cell, **split, **opts), "amaranth", count=80, seed=width)


@pytest.mark.parametrize("opts", OPTION_SETS, ids=lambda o: "-".join(o) or "plain")
def test_every_option_with_every_cell(opts):
    for cell in CELLS:
        simulate(make(width=9, cell=cell, slices=[2, 4, 3], **opts), "amaranth", count=60)


@needs_icarus
@pytest.mark.parametrize("cell, width, split, opts", [
    ("native", 64, {"slice_width": 16}, {"carry_in": True, "valid": True, "reset": "sync"}),
    ("ripple", 37, {"slice_width": 3}, {"enable": True, "valid": True}),
    ("kogge-stone", 100, {"slices": [1, 98, 1]}, {"register_inputs": True, "carry_in": True}),
    ("brent-kung", 7, {"slice_width": 1}, {"carry_out": False}),
    ("sklansky", 64, {"slice_width": 64}, {"enable": True, "reset": "sync", "valid": True}),
    ("han-carlson", 2, {"slice_width": 1}, {"carry_in": True}),
    ("ladner-fischer", 37, {"slices": [10, 20, 7]}, {"enable": True, "register_inputs": True}),
], ids=lambda v: v if isinstance(v, str) else None)
def test_emitted_verilog_in_icarus(cell, width, split, opts):
    simulate(make(width=width, cell=cell, **split, **opts), "icarus", count=300, seed=7)


def test_full_adder_truth_table():
    # The full adder truth table (standard textbook definition): rows a, b, cin -> cout, sum.
    table = {(0, 0, 0): (0, 0), (0, 0, 1): (0, 1), (0, 1, 0): (0, 1), (0, 1, 1): (1, 0),
             (1, 0, 0): (0, 1), (1, 0, 1): (1, 0), (1, 1, 0): (1, 0), (1, 1, 1): (1, 1)}
    p = make(width=1, cell="ripple", carry_in=True)
    vecs = [vectors.Vector({"a": a, "b": b, "cin": c}) for a, b, c in table]
    assert [(o["cout"], o["sum"]) for o in vectors.expected(p, vecs)] == list(table.values())
    result = sim.run(p, vecs, "amaranth")
    assert result.passed, result.message


@pytest.mark.parametrize("simulator", ["amaranth", pytest.param("icarus", marks=needs_icarus)])
def test_a_broken_cell_is_caught(monkeypatch, simulator):
    """Teeth: a slice whose carry-out is a | b of its top bit instead of the carry must fail."""
    original = cells._ripple

    def or_carry(slot, x, y, c, op, want_carry, want_sum):
        total = original(slot, x, y, c, op, False, want_sum)
        return cat(total, bit(x, x.width - 1) | bit(y, y.width - 1)) if want_carry else total
    monkeypatch.setattr(cells, "_ripple", or_carry)
    p = make(width=8, cell="ripple", slices=[4, 4])
    result = sim.run(p, vectors.suite(p, 200, 3), simulator)
    assert not result.passed
    assert result.message.startswith("FAIL vector ")
