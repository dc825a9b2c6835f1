"""The carry-save units (sum, multiplier) against outside references: Python's integers for
every unit x option x tree x final-adder mode at widths 1, 2, 3, 7, 8, 16, 33; Dadda's height
sequence and counter counts; the radix-4 Booth recoding table; the Baugh-Wooley identity;
the latency rule; the tree's arithmetic check and its teeth."""

from __future__ import annotations

import dataclasses
import itertools
import json
import random
import re

import pytest

from carrypipe import config, dots, emit, reduction, treeproof, units
from carrypipe.config import ConfigError
from conftest import make, needs_icarus, simulate

WIDTHS = (1, 2, 3, 7, 8, 16, 33)
MODES = ("slices", "levels", "blocks")
OPTIONS = [
    {},
    {"signed": True},
    {"valid": True, "reset": "sync", "register_inputs": True},
    {"signed": True, "enable": True, "valid": True, "reset": "async"},
    {"tree_levels_per_stage": 2, "signed": True},
    {"tree_levels_per_stage": 3, "valid": True, "reset": "sync", "reset_data": True},
]


def to_signed(v: int, w: int) -> int:
    return v - (1 << w) if v >> (w - 1) & 1 else v


def keys_for(unit: str, width: int, tree: str, mode: str, turn: int) -> dict:
    keys = {"unit": unit, "width": width, "tree": tree, **OPTIONS[turn % len(OPTIONS)]}
    if unit == "sum":
        keys["operands"] = 3 + (turn * 5) % 14
    else:
        keys["width_b"] = WIDTHS[(turn + 2) % len(WIDTHS)]
        if tree != "native" and turn % 2:
            keys["partial_products"] = "booth4"
    if tree == "native":
        keys.pop("tree_levels_per_stage", None)
        keys["native_stages"] = 1 + turn % 3
        return keys
    span = units.KINDS[unit].adder_width(config.from_mapping({"name": "t", **keys}))
    if mode != "slices":
        keys.update(pipeline=mode, cell=("kogge-stone", "brent-kung", "sklansky")[turn % 3])
        if mode == "blocks" and span:  # no final adder: its keys are left out
            keys["block_width"] = min(span, 1 + turn % 5)
    else:
        keys["cell"] = ("native", "ripple", "han-carlson")[turn % 3]
        if span:
            keys["slice_width"] = min(span, 1 + (turn * 7) % 17)
    return keys


MATRIX = [(unit, width, tree, mode) for unit in ("sum", "multiplier") for width in WIDTHS
          for tree in ("dadda", "wallace", "native")
          for mode in (MODES if tree != "native" else ("slices",))]


@pytest.mark.parametrize("unit, width, tree, mode", MATRIX,
                         ids=[f"{u}-w{w}-{t}-{m}" for u, w, t, m in MATRIX])
def test_units_match_python_integers(unit, width, tree, mode):
    turn = MATRIX.index((unit, width, tree, mode))
    p = make(**keys_for(unit, width, tree, mode, turn))
    simulate(p, count=50, seed=turn)


@needs_icarus
@pytest.mark.parametrize("keys", [
    dict(unit="multiplier", width=33, width_b=33, signed=True, partial_products="booth4",
         pipeline="levels", cell="kogge-stone", valid=True, enable=True, reset="sync"),
    dict(unit="sum", operands=16, width=33, signed=True, tree="wallace", slice_width=9),
], ids=["mul33-booth-levels", "sum16x33-wallace"])
def test_wide_units_in_icarus(keys):
    simulate(make(**keys), "icarus", count=400, seed=5)


def test_dadda_heights():
    # Dadda (1965): d_1 = 2, d_(j+1) = floor(1.5 d_j): 2, 3, 4, 6, 9, 13, 19, 28, 42, 63.
    assert reduction.dadda_heights(63) == [2, 3, 4, 6, 9, 13, 19, 28, 42, 63]


@pytest.mark.parametrize("n", range(3, 33))
def test_dadda_counter_counts(n):
    # A Dadda tree for an n x n AND array uses n^2 - 4n + 3 full adders and n - 1 half adders
    # (from memory: Dadda 1965; Townsend, Swartzlander and Abraham 2003), in as many levels
    # as Dadda's sequence has heights below n.
    t = reduction.reduce(dots.and_matrix(n, n, False), "dadda", 1, True)
    assert (t.fa(), t.ha()) == (n * n - 4 * n + 3, n - 1)
    assert sum(1 for lv in t.levels if lv.index) == \
        sum(1 for d in reduction.dadda_heights(n) if d < n)


@pytest.mark.parametrize("signed", [False, True])
def test_the_constant_adds_no_level_to_an_and_array(signed):
    # A Dadda tree reduces a matrix of height h in as many levels as Dadda's sequence has
    # heights below h (Dadda 1965); the one-bits of a signed array's constant (Baugh and
    # Wooley 1973) are absorbed without adding one, for every shape from 3 x 3 to 24 x 24.
    for m, n in itertools.product(range(3, 25), repeat=2):
        matrix = dots.and_matrix(m, n, signed)
        height = max(matrix.heights())
        t = reduction.reduce(matrix, "dadda", 1, True)
        assert sum(1 for lv in t.levels if lv.index) == \
            sum(1 for d in reduction.dadda_heights(height) if d < height), (m, n)


@needs_icarus
@pytest.mark.parametrize("keys", [
    dict(unit="multiplier", width=16, width_b=9, signed=True, pipeline="levels",
         cell="kogge-stone"),
    dict(unit="multiplier", width=3, width_b=8, signed=True, partial_products="booth4",
         tree="wallace", slice_width=4),
], ids=["and16x9", "booth3x8-wallace"])
def test_half_adders_that_add_a_constant_bit(keys):
    # These trees absorb a one-bit of the constant in a half adder (x + y + 1: sum
    # ~(x ^ y), carry x | y); the unit still gives Python's product.
    p = make(**keys)
    assert any(c.one for c in p.tree.counters)
    simulate(p, "icarus", count=400, seed=11)


@pytest.mark.parametrize("n", [4, 8, 16, 32])
def test_wallace_takes_as_many_levels(n):
    # Wallace (1964) and Dadda (1965) trees reduce n rows in the same number of levels
    # (common practice); Wallace's greedy levels use more counters.
    d = reduction.reduce(dots.and_matrix(n, n, False), "dadda", 1, True)
    w = reduction.reduce(dots.and_matrix(n, n, False), "wallace", 1, True)
    assert len(w.levels) == len(d.levels)
    assert w.fa() + w.ha() >= d.fa() + d.ha()


def test_booth_recoding_table():
    # Radix-4 recoding (MacSorley 1961): b_(2k+1) b_2k b_(2k-1) -> digit.
    table = {"000": 0, "001": 1, "010": 1, "011": 2, "100": -2, "101": -1, "110": -1,
             "111": 0}
    for bits, digit in table.items():
        hi, mid, lo = (int(c) for c in bits)
        assert dots.booth_digit(hi, mid, lo) == digit
        # The selects the hardware forms from bits 3, 2, 1 of b (digit 1) say the same.
        one, two, neg = dots.booth_selects(hi << 3 | mid << 2 | lo << 1, 4, False, 1)
        assert (-1 if neg else 1) * (one + 2 * two) == digit


@pytest.mark.parametrize("n, signed", [(n, s) for n in range(1, 9) for s in (False, True)])
def test_booth_digits_recode_b(n, signed):
    # sum_k digit_k 4^k = b (MacSorley 1961), b read signed or unsigned.
    for b in range(1 << n):
        digits = [dots.booth_digit(*(dots._bit(b, n, signed, j)
                                     for j in (2 * k + 1, 2 * k, 2 * k - 1)))
                  for k in range(dots.booth_rows(n, signed))]
        assert sum(d * 4 ** k for k, d in enumerate(digits)) == \
            (to_signed(b, n) if signed else b)


def _matrix_value(m: dots.Matrix, inputs: dict, a_w: int, b_w: int, signed: bool) -> int:
    total = m.constant + sum(dots.value(leaf, inputs, a_w, b_w, signed) << leaf.column
                             for leaf in m.leaves)
    return total % (1 << m.width)


@pytest.mark.parametrize("make_matrix", [dots.and_matrix, dots.booth_matrix],
                         ids=["and", "booth4"])
@pytest.mark.parametrize("signed", [False, True])
def test_partial_products_add_up_to_the_product(make_matrix, signed):
    # Exhaustive for every pair of widths up to 5 bits, then random 33 x 17 and 17 x 33:
    # the dots plus the constant are a * b modulo 2^(m+n) (Python's integers; signed by
    # Baugh and Wooley 1973 for the AND array).
    rng = random.Random(7)
    for m, n in itertools.product(range(1, 6), repeat=2):
        mx = make_matrix(m, n, signed)
        for a, b in itertools.product(range(1 << m), range(1 << n)):
            want = (to_signed(a, m) * to_signed(b, n)) if signed else a * b
            assert _matrix_value(mx, {"a": a, "b": b}, m, n, signed) == want % (1 << (m + n))
    for m, n in ((33, 17), (17, 33)):
        mx = make_matrix(m, n, signed)
        for _ in range(200):
            a, b = rng.getrandbits(m), rng.getrandbits(n)
            want = (to_signed(a, m) * to_signed(b, n)) if signed else a * b
            assert _matrix_value(mx, {"a": a, "b": b}, m, n, signed) == want % (1 << (m + n))


def test_baugh_wooley_constant():
    # Baugh and Wooley (1973), modified form: the constant is 2^(m-1) + 2^(n-1) + 2^(m+n-1)
    # modulo 2^(m+n), and the products of one sign bit with the other operand's other bits
    # are inverted (m - 1 + n - 1 of them).
    for m, n in ((8, 8), (5, 3), (16, 12)):
        mx = dots.and_matrix(m, n, True)
        assert mx.constant == ((1 << (m - 1)) + (1 << (n - 1)) + (1 << (m + n - 1))) % \
            (1 << (m + n))
        assert sum(leaf.invert for leaf in mx.leaves) == (m - 1) + (n - 1)


def test_the_trees_add_up():
    # The arithmetic check of the compositional proof passes on every plan of a sweep.
    for unit, w, signed, tree, lps in itertools.product(("sum", "multiplier"), (1, 3, 8, 16),
                                                        (False, True), ("dadda", "wallace"),
                                                        (1, 2)):
        keys = dict(unit=unit, width=w, signed=signed, tree=tree, tree_levels_per_stage=lps)
        keys.update({"operands": 7} if unit == "sum" else
                    {"width_b": 5, "partial_products": "booth4" if w % 2 else "and"})
        assert treeproof.arithmetic(make(**keys).tree) is None, keys


def _last_rank_total(tree: reduction.Tree, inputs: dict, m: int, n: int, signed: bool) -> int:
    """What the last rank adds up to for these inputs, modulo 2^N: its dots by weight, and
    2^(N-1) when the tree left that constant for the final adder's carry."""
    out = tree.evaluate(inputs, m, n, signed)
    total = sum(((out[d.value] ^ int(d.invert)) << k)
                for k, col in enumerate(tree.final) for d in col)
    return (total + (tree.flip_carry << (tree.width - 1))) % (1 << tree.width)


@pytest.mark.parametrize("signed", [False, True])
@pytest.mark.parametrize("pp", ["and", "booth4"])
@pytest.mark.parametrize("tree", ["dadda", "wallace"])
def test_the_tree_computes_the_product_for_every_input(signed, pp, tree):
    # Every value of the reduction evaluated in Python, without HDL, for every pair of 4-bit
    # and 3-bit operands: the last rank adds up to a * b (Python's integers; modulo 2^7,
    # which for signed operands is the two's-complement product).
    m, n = 4, 3
    t = make(unit="multiplier", width=m, width_b=n, signed=signed, partial_products=pp,
             tree=tree).tree
    for a, b in itertools.product(range(1 << m), range(1 << n)):
        sa = a - (1 << m) * (a >> (m - 1)) if signed else a
        sb = b - (1 << n) * (b >> (n - 1)) if signed else b
        assert _last_rank_total(t, {"a": a, "b": b}, m, n, signed) == \
            (sa * sb) % (1 << (m + n)), (a, b)


def test_a_sums_tree_computes_the_sum():
    # Five signed 6-bit operands at random (Python's integers, modulo 2^9).
    t = make(unit="sum", operands=5, width=6, signed=True).tree
    rnd = random.Random(3)
    for _ in range(300):
        xs = [rnd.randrange(64) for _ in range(5)]
        want = sum(x - 64 * (x >> 5) for x in xs) % (1 << t.width)
        assert _last_rank_total(t, {f"x{i}": x for i, x in enumerate(xs)}, 6, 0, True) == want


def test_the_arithmetic_check_has_teeth():
    t = make(unit="multiplier", width=6).tree
    c = t.counters[3]
    moved = dataclasses.replace(c, column=c.column)  # the same counter: still fine
    assert treeproof.arithmetic(dataclasses.replace(
        t, counters=t.counters[:3] + (moved,) + t.counters[4:])) is None
    # A carry that lands as a sum (weight halved): the identity breaks.
    bad = list(t.values)
    v = bad[c.carry]
    bad[c.carry] = dataclasses.replace(v, kind="sum")
    assert treeproof.arithmetic(dataclasses.replace(t, values=tuple(bad))) is not None
    # A dot dropped from the last rank.
    final = list(t.ranks[-1])
    k = next(i for i, col in enumerate(final) if len(col) == 2)
    final[k] = final[k][:1]
    assert "do not add up" in treeproof.arithmetic(dataclasses.replace(
        t, ranks=t.ranks[:-1] + (tuple(final),)))
    # A constant forgotten.
    assert "constants" in treeproof.arithmetic(dataclasses.replace(
        t, matrix=dataclasses.replace(t.matrix, constant=1)))


@pytest.mark.parametrize("keys", [
    dict(unit="multiplier", width=8),
    dict(unit="multiplier", width=12, width_b=10, signed=True, tree_levels_per_stage=2,
         pipeline="levels", cell="kogge-stone", register_inputs=True),
    dict(unit="sum", operands=9, width=16, tree="wallace", slice_width=5, valid=True),
    dict(unit="sum", operands=4, width=8, tree="native", native_stages=3,
         register_inputs=True),
])
def test_latency_is_tree_plus_final_adder(keys):
    p = make(**keys)
    c = p.config
    inputs = 1 if c.register_inputs else 0
    if c.tree == "native":
        assert p.latency == c.native_stages + inputs
    else:
        t = p.tree
        levels = sum(1 for lv in t.levels if lv.index) + (c.unit == "multiplier")
        assert len(p.tree_stages) == -(-levels // c.tree_levels_per_stage)
        assert p.latency == len(p.tree_stages) + len(p.adder.stages) + inputs
    manifest = json.loads(report_manifest(p))
    assert manifest["latency"] == p.latency
    simulate(p, count=40)


def report_manifest(p) -> str:
    return emit.render(p, vectors=20)[f"{p.config.name}.json"]


@pytest.mark.parametrize("keys, message", [
    ({"unit": "sum", "width": 8}, r"key 'operands' is missing; expected an integer from 3 "
                                  r"to 16 with unit 'sum'"),
    ({"unit": "sum", "width": 8, "operands": 2}, r"key 'operands': value 2 is not allowed"),
    ({"unit": "sum", "width": 8, "operands": 17}, r"key 'operands': value 17"),
    ({"unit": "multiplier", "width": 8, "carry_in": True},
     r"key 'carry_in' is given with unit 'multiplier'; expected it only with unit 'adder' or "
     r"'subtractor' or 'addsub'"),
    ({"unit": "sum", "width": 8, "operands": 3, "carry_out": False},
     r"key 'carry_out' is given with unit 'sum'"),
    ({"unit": "multiplier", "width": 257}, r"key 'width': value 257 is not allowed; "
                                           r"expected an integer from 1 to 256 with unit"),
    ({"unit": "multiplier", "width": 8, "width_b": 0}, r"key 'width_b': value 0"),
    ({"unit": "multiplier", "width": 8, "partial_products": "booth8"},
     r"key 'partial_products': value 'booth8' is not allowed; expected one of and, booth4"),
    ({"unit": "multiplier", "width": 8, "tree": "native", "cell": "ripple"},
     r"key 'cell' is given with tree 'native'; expected it only with tree 'dadda' or "
     r"'wallace'"),
    ({"unit": "multiplier", "width": 8, "native_stages": 2},
     r"key 'native_stages' is given with tree 'dadda'; expected it only with tree 'native'"),
    ({"unit": "multiplier", "width": 8, "tree_levels_per_stage": 0},
     r"key 'tree_levels_per_stage': value 0"),
    ({"unit": "multiplier", "width": 8, "slices": [4, 4]},
     r"key 'slices': value \[4, 4\] is not allowed; expected slice widths that sum to the "
     r"final adder's width \(14\), not 8"),
    # Found by a new-user trial: this one alone did not give the width.
    ({"unit": "multiplier", "width": 8, "slices": [0, 14]},
     r"key 'slices': value \[0, 14\] is not allowed; expected a list of positive integers "
     r"\(LSB first\) that sum to the final adder's width \(14\)\Z"),
    ({"unit": "multiplier", "width": 1, "slice_width": 1},
     r"key 'slice_width': value 1 is not allowed; the tree leaves at most one bit in every "
     r"column: there is no final adder to split \(leave the key out\)\Z"),
    # Without a final adder its keys' ranges mean nothing: only their defaults are taken.
    ({"unit": "multiplier", "width": 4, "width_b": 1, "pipeline": "levels",
      "cell": "kogge-stone", "local_width": 4000},
     r"key 'local_width': value 4000 is not allowed; the tree leaves at most one bit in every "
     r"column: there is no final adder \(leave the key out\)\Z"),
    ({"unit": "multiplier", "width": 1, "width_b": 9, "pipeline": "blocks",
      "cell": "sklansky", "block_width": 77}, r"key 'block_width': value 77 is not allowed"),
    ({"unit": "multiplier", "width": 4, "width_b": 1, "pipeline": "levels",
      "cell": "kogge-stone", "carry_increment": True}, r"key 'carry_increment': value true"),
    ({"unit": "multiplier", "width": 4, "width_b": 1, "pipeline": "levels",
      "cell": "kogge-stone", "levels_per_stage": True}, r"key 'levels_per_stage': value true"),
    ({"unit": "multiplier", "width": 8, "width_b": 1, "pipeline": "levels", "cell": "ripple"},
     r"key 'cell': value 'ripple' is not allowed with key 'pipeline' 'levels'; expected one of "
     r"kogge-stone"),
    # A final-adder key in the wrong pipeline mode names the mode (the tree is not why).
    ({"unit": "multiplier", "width": 8, "levels_per_stage": 2},
     r"key 'levels_per_stage' is given with pipeline 'slices'; expected it only with pipeline "
     r"'levels' or 'blocks' \(unit 'multiplier'\)\Z"),
    ({"unit": "sum", "width": 8, "operands": 3, "tree": "native", "block_width": 2},
     r"key 'block_width' is given with tree 'native'; expected it only with tree 'dadda' or "
     r"'wallace'\Z"),
    ({"unit": "adder", "width": 8, "operands": 3}, r"key 'operands' is given with unit "
                                                   r"'adder'; expected it only with unit 'sum'"),
    ({"unit": "adder", "width": 8, "tree": "dadda"}, r"key 'tree' is given with unit 'adder'"),
])
def test_bad_keys(keys, message):
    with pytest.raises(ConfigError, match=message):
        make(**keys)


def test_normalized_config_round_trips():
    for keys in (dict(unit="multiplier", width=13, width_b=1),  # no final adder: no split
                 dict(unit="multiplier", width=4, width_b=1, pipeline="levels",
                      cell="kogge-stone", levels_per_stage=1, wire_registers=0),
                 dict(unit="multiplier", width=1, width_b=3, pipeline="blocks",
                      cell="sklansky"),
                 dict(unit="multiplier", width=1, signed=True),
                 dict(unit="multiplier", width=12, width_b=9, signed=True,
                      partial_products="booth4", tree="wallace", tree_levels_per_stage=2,
                      pipeline="blocks", cell="sklansky", block_width=4),
                 dict(unit="sum", width=5, operands=6, tree="native", native_stages=2)):
        c = make(**keys).config
        data = c.normalized()
        assert config.from_mapping(data) == c
        assert "carry_in" not in data and "operands" in data if c.unit == "sum" else True


# The manifest's documented keys (README, *The manifest*): the same for every unit kind in a
# mode, plus a sum's or multiplier's `tree` and `final_adder`; `registers` lists every kind
# of the mode, 0 included, and `tree`.
MANIFEST_CASES = {
    "sliced": dict(unit="multiplier", width=6, slice_width=4),
    "levels": dict(unit="sum", operands=5, width=8, pipeline="levels", cell="kogge-stone"),
    "blocks": dict(unit="multiplier", width=7, width_b=5, signed=True, pipeline="blocks",
                   cell="brent-kung", block_width=3),
    "native": dict(unit="multiplier", width=8, tree="native", native_stages=2),
    "no final adder": dict(unit="multiplier", width=1, width_b=1),
    "no final adder, levels": dict(unit="multiplier", width=1, width_b=1, pipeline="levels",
                                   cell="kogge-stone"),
}


@pytest.mark.parametrize("keys", MANIFEST_CASES.values(), ids=MANIFEST_CASES.keys())
def test_manifest_has_the_keys_of_an_adder_in_its_mode(keys):
    p = make(**keys)
    mode = p.config.pipeline
    adder = make(width=8, pipeline=mode, **({} if mode == "slices" else {"cell": "sklansky"}),
                 **({"block_width": 4} if mode == "blocks" else {}))
    found = json.loads(report_manifest(p))
    like = json.loads(report_manifest(adder))
    assert set(found) == set(like) | {"tree", "final_adder"}
    assert set(found["registers"]) == set(like["registers"]) | {"tree"}
    assert sum(found["registers"].values()) == 2 * found["registers"]["total"]
    if p.mode == "native":
        assert found["tree"] is None and found["final_adder"] is None
    elif p.adder is None:
        assert found["final_adder"] is None and found.get("stages", []) == []
    else:
        assert found["final_adder"]["stages"] == len(p.adder.stages)
    if "stages" in found and p.mode != "native" and p.adder is not None:
        first = len(p.tree_stages)  # the final adder's stages, numbered as the unit's
        assert [s["index"] for s in found["stages"]] == list(range(first, p.latency))
        assert [s["levels"] for s in found["stages"]] == [list(s.levels)
                                                          for s in p.adder.stages]


@pytest.mark.parametrize("keys, fixed", [
    (dict(unit="multiplier", width=8, width_b=1), {"product": [8]}),
    (dict(unit="multiplier", width=5, width_b=1, partial_products="booth4"), {"product": [5]}),
    (dict(unit="multiplier", width=1, width_b=1, signed=True), {"product": [1]}),
    (dict(unit="sum", width=1, operands=9), {"sum": [4]}),
    (dict(unit="multiplier", width=5, width_b=3), {}),
    (dict(unit="sum", width=2, operands=9, signed=True), {}),
])
def test_an_output_bit_tied_to_a_constant_is_named(keys, fixed):
    """Found by a new-user trial: the Verilog said every result leaves a register, where a
    column no dot reaches is the constant 0.  Such bits are named in the output section, and
    each is 0 for every input by Python's integers (exhaustively: these units are small)."""
    plan = make(**keys)
    text = emit.unit_verilog(plan)
    line = next(x for x in text.splitlines() if "// Outputs:" in x)
    named = re.findall(r"(\w+) bit (\d+) is always 0", line)
    assert {p: [int(b) for q, b in named if q == p] for p, _ in named} == fixed
    c = plan.config

    def value(v: int, w: int) -> int:
        return v - (1 << w) if c.signed and v >> (w - 1) else v

    ins = plan.unit.operand_ports(c)
    width = plan.port(next(iter(fixed), plan.unit.result)).width
    for values in itertools.product(*(range(1 << p.width) for p in ins)):
        exact = [value(v, p.width) for v, p in zip(values, ins)]
        result = (exact[0] * exact[1] if c.unit == "multiplier" else sum(exact)) % (1 << width)
        for port, bits in fixed.items():
            assert all(result >> b & 1 == 0 for b in bits), values
