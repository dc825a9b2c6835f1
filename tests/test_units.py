"""The unit family against Python integers: subtractor, adder/subtractor, comparator and
accumulator in every mode they take, with every option and reset variant, signed and not;
the overflow rule against the common-practice sign rule; the accumulator with clears, bubbles
and enable gaps; the comparator tree's latency."""

from __future__ import annotations

import itertools
import math

import pytest

from carrypipe import units
from carrypipe.config import CELLS, PREFIX_CELLS, ConfigError
from conftest import make, needs_icarus, simulate

WIDTHS = (1, 2, 7, 33)
OPTIONS = [
    {},
    {"carry_in": True, "signed": True},
    {"carry_out": False, "valid": True, "reset": "sync"},
    {"enable": True, "valid": True, "reset": "async"},
    {"register_inputs": True, "carry_in": True, "signed": True, "enable": True},
    {"valid": True, "reset": "sync", "reset_data": True, "signed": True},
]
REFUSED = {"comparator": ("carry_in", "carry_out"), "accumulator": ("carry_in", "signed")}


def keys_for(unit: str, turn: int) -> dict:
    """An option set for `unit`, rotating with `turn`, without the keys it refuses."""
    opts = dict(OPTIONS[turn % len(OPTIONS)])
    for key in REFUSED.get(unit, ()):
        opts.pop(key, None)
    if opts.get("reset", "none") != "none" and not (opts.get("valid") or opts.get("reset_data")):
        opts["valid"] = True
    return opts


def splits(width: int) -> list[dict]:
    out = [{"slice_width": 1}, {"slice_width": min(3, width)}, {"slice_width": width}]
    if width >= 3:
        out.append({"slices": [1, width - 2, 1]})
    return out


SLICED = [(unit, cell, width, n) for unit in ("subtractor", "addsub", "comparator",
                                              "accumulator")
          for cell, width in itertools.product(CELLS, WIDTHS)
          for n in range(len(splits(width)))]


@pytest.mark.parametrize("unit, cell, width, n", SLICED,
                         ids=[f"{u}-{c}-w{w}-s{n}" for u, c, w, n in SLICED])
def test_sliced_units_match_python_integers(unit, cell, width, n):
    turn = SLICED.index((unit, cell, width, n))
    p = make(unit=unit, width=width, cell=cell, **splits(width)[n], **keys_for(unit, turn))
    simulate(p, count=60, seed=turn)


PREFIX = [(unit, mode, cell, width) for unit in ("subtractor", "addsub")
          for mode in ("levels", "blocks") for cell in PREFIX_CELLS for width in WIDTHS]


@pytest.mark.parametrize("unit, mode, cell, width", PREFIX,
                         ids=[f"{u}-{m}-{c}-w{w}" for u, m, c, w in PREFIX])
def test_prefix_mode_units_match_python_integers(unit, mode, cell, width):
    turn = PREFIX.index((unit, mode, cell, width))
    extra = {"block_width": max(1, min(width, (3, 8, 5)[turn % 3]))} if mode == "blocks" else {}
    p = make(unit=unit, pipeline=mode, cell=cell, width=width, levels_per_stage=1 + turn % 2,
             **extra, **keys_for(unit, turn))
    simulate(p, count=60, seed=turn)


COMPARE_TREE = [(cell, width, sw) for cell in CELLS for width, sw in
                ((1, 1), (2, 1), (7, 2), (33, 4), (33, 33), (64, 8))]


@pytest.mark.parametrize("cell, width, sw", COMPARE_TREE,
                         ids=[f"{c}-w{w}-sw{s}" for c, w, s in COMPARE_TREE])
def test_comparator_tree_matches_python_integers(cell, width, sw):
    turn = COMPARE_TREE.index((cell, width, sw))
    p = make(unit="comparator", pipeline="levels", cell=cell, width=width, slice_width=sw,
             **keys_for("comparator", turn))
    simulate(p, count=60, seed=turn)


@pytest.mark.parametrize("width, sw, lps", [(48, 8, 1), (64, 8, 1), (64, 1, 1), (64, 1, 2),
                                            (16, 8, 1), (8, 8, 1), (40, 3, 3)])
def test_comparator_tree_latency(width, sw, lps):
    # A balanced binary tree over S slices has ceil(log2 S) levels (common practice): one
    # stage of compares, then levels_per_stage levels per stage, and the last level in a
    # stage of its own beside the verdicts.
    p = make(unit="comparator", pipeline="levels", width=width, slice_width=sw,
             levels_per_stage=lps)
    slices = math.ceil(width / sw)
    depth = math.ceil(math.log2(slices)) if slices > 1 else 0
    assert p.latency == (1 if depth == 0 else 2 + math.ceil((depth - 1) / lps))


@needs_icarus
@pytest.mark.parametrize("unit", ["subtractor", "addsub", "comparator", "accumulator"])
def test_each_kind_in_icarus(unit):
    keys = {"width": 21, "slice_width": 6, "valid": True, "enable": True, "reset": "sync",
            **({"signed": True} if unit != "accumulator" else {}),
            **({"carry_in": True} if unit in ("subtractor", "addsub") else {})}
    simulate(make(unit=unit, **keys), "icarus", count=400, seed=3)


@pytest.mark.parametrize("width", [1, 2, 4])
def test_overflow_follows_the_sign_rule(width):
    """The kinds define overflow as 'the two's-complement result differs from the exact
    signed one'; every operand pair and carry-in must agree with the sign rule of common
    practice: an addition overflows when both operands share a sign the result lacks, a
    subtraction when the operands differ in sign and the result's sign is not the
    minuend's (a carry- or borrow-in of 1 cannot push a mixed-sign result out of range)."""
    p_add = make(unit="adder", width=width, signed=True, carry_in=True)
    p_sub = make(unit="subtractor", width=width, signed=True, carry_in=True)
    p_as = make(unit="addsub", width=width, signed=True, carry_in=True)
    top = width - 1
    for a, b, c in itertools.product(range(1 << width), range(1 << width), (0, 1)):
        sa, sb = a >> top, b >> top
        out = units.ADDER.compute(p_add.config, {"a": a, "b": b, "cin": c})
        assert out["overflow"] == int(sa == sb and (out["sum"] >> top) != sa)
        diff = units.SUBTRACTOR.compute(p_sub.config, {"a": a, "b": b, "bin": c})
        assert diff["overflow"] == int(sa != sb and (diff["diff"] >> top) != sa)
        for sub, want in ((0, out), (1, diff)):
            got = units.KINDS["addsub"].compute(p_as.config, {"a": a, "b": b, "cin": c,
                                                              "sub": sub})
            assert got["overflow"] == want["overflow"]
            assert got["sum"] == want.get("sum", want.get("diff"))


def test_accumulator_runs_like_a_python_sum():
    """Clears, bubbles (in_valid low) and enable gaps, against a running Python sum kept
    here by hand."""
    p = make(unit="accumulator", width=12, slice_width=4, valid=True, enable=True)
    model = p.unit.model(p.config)
    total, rows = None, [(5, 1, 1), (7, 0, 1), (4095, 0, 1), (1, 0, 0), (3, 0, 1), (9, 1, 1),
                         (4095, 0, 0), (4095, 0, 1)]
    for x, clear, valid in rows:
        if valid:
            total = x if clear else (total + x) % 4096
        assert model.step({"x": x, "clear": clear, "in_valid": valid})["acc"] == total
    simulate(p, count=300, seed=9)  # with bubbles and gaps, in the unit itself


@pytest.mark.parametrize("keys, message", [
    ({"unit": "comparator", "carry_in": True},
     r"key 'carry_in' is given with unit 'comparator'; expected it only with unit 'adder' "
     r"or 'subtractor' or 'addsub'"),
    ({"unit": "accumulator", "signed": True},
     r"key 'signed' is given with unit 'accumulator'"),
    ({"unit": "accumulator", "pipeline": "blocks", "cell": "sklansky"},
     r"key 'pipeline': value 'blocks' is not allowed with unit 'accumulator'; expected one of "
     r"slices"),
    ({"unit": "comparator", "pipeline": "levels", "block_width": 4},
     # A comparator has no blocks mode: the key is one of other units.
     r"key 'block_width' is given with unit 'comparator'; expected it only with unit 'adder' "
     r"or 'subtractor' or 'addsub' or 'sum' or 'multiplier'"),
])
def test_keys_a_kind_does_not_read_are_refused(keys, message):
    with pytest.raises(ConfigError, match=message):
        make(width=8, **keys)
