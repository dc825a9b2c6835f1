"""The emitted testbench runs unchanged in Icarus (-g2001, -g2005) and Verilator 5, and
`carrypipe check --sim verilator` works.  Expected values come from Python integers
(vectors.expected); a planted fault must make every simulator print FAIL."""

import subprocess

import pytest
from click.testing import CliRunner

from carrypipe import emit, sim, tools
from carrypipe.cli import main
from carrypipe.config import from_mapping
from carrypipe.plan import make_plan
from carrypipe.vectors import suite
from carrypipe.tools import which
from mutants import drop_first_carry

CONFIGS = {
    "all-options": dict(width=20, slice_width=6, cell="han-carlson", carry_in=True, valid=True,
                        enable=True, reset="sync", register_inputs=True),
    "plain": dict(width=8, cell="ripple", carry_out=False),
    # Units whose outputs are not 0 for all-zero inputs: a check after the verdict (beyond the
    # last vector) fails them where an adder passes by luck.
    "comparator": dict(unit="comparator", width=12, pipeline="levels", slice_width=4,
                       signed=True),
    "accumulator": dict(unit="accumulator", width=10, slice_width=5, valid=True),
}

icarus = pytest.mark.skipif(not which("iverilog"), reason="iverilog is not installed")
verilator = pytest.mark.skipif(not which("verilator"), reason="verilator is not installed")


def _emit(tmp_path, keys, fault=False):
    plan = make_plan(from_mapping({"name": "u", **keys}))
    files = emit.render(plan, vectors=200, seed=5)
    if fault:
        files["u.v"] = drop_first_carry(files["u.v"])
    emit.write(files, tmp_path)
    return plan


def _run(cmds, cwd):
    out = None
    for cmd in cmds:
        out = subprocess.run(cmd, cwd=cwd, capture_output=True, text=True, timeout=300)
        if out.returncode != 0 and cmd is not cmds[-1]:
            pytest.fail(f"{cmd[0]} failed: {out.stdout} {out.stderr}")
    return out


def _verdict(out):
    """The testbench's one PASS/FAIL line (Verilator adds a $finish note after it); a FAIL
    may be followed by more, but nothing may follow a PASS."""
    found = [line for line in out.stdout.splitlines() if line.startswith(("PASS", "FAIL"))]
    assert not found[0].startswith("PASS") or len(found) == 1, found
    return found[-1]


def _icarus(std):
    return [["iverilog", std, "-o", "u_tb.vvp", "u.v", "u_tb.v"], ["vvp", "-n", "u_tb.vvp"]]


# As docs/verification.md gives it: no warning (not even TIMESCALEMOD), so none made non-fatal.
VERILATOR = [["verilator", "--binary", "--timing", "--timescale", "1ns/1ps", "--top-module",
              "u_tb", "u.v", "u_tb.v"], ["obj_dir/Vu_tb"]]


@icarus
@pytest.mark.parametrize("std", ["-g2001", "-g2005"])
@pytest.mark.parametrize("name", CONFIGS)
def test_testbench_runs_in_icarus(tmp_path, std, name):
    _emit(tmp_path, CONFIGS[name])
    out = _run(_icarus(std), tmp_path)
    assert out.returncode == 0
    assert _verdict(out).startswith("PASS 200 vectors")


@verilator
@pytest.mark.parametrize("name", CONFIGS)
def test_testbench_runs_in_verilator(tmp_path, name):
    _emit(tmp_path, CONFIGS[name])
    out = _run(VERILATOR, tmp_path)
    assert out.returncode == 0, out.stderr
    assert _verdict(out).startswith("PASS 200 vectors")


@icarus
@verilator
def test_every_simulator_reports_a_fault(tmp_path):
    _emit(tmp_path, CONFIGS["all-options"], fault=True)
    for cmds in (_icarus("-g2005"), VERILATOR):
        out = _run(cmds, tmp_path)
        assert out.returncode != 0
        assert _verdict(out).startswith("FAIL vector")


@verilator
def test_check_with_verilator(tmp_path):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 12\nslice_width: 4\ncell: sklansky\ncarry_in: true\n")
    out = CliRunner().invoke(main, ["check", str(cfg), "--sim", "verilator", "--vectors", "500"])
    assert out.exit_code == 0, out.output
    assert out.output.strip() == "u [verilator]: PASS 500 vectors, latency 3"


@pytest.mark.parametrize("simulator, message", [
    ("icarus", "iverilog is not installed (looked beside Python and on PATH); install Icarus "
               "Verilog (Debian/Ubuntu: apt-get install iverilog) or use --sim amaranth"),
    ("verilator", "verilator is not installed (looked beside Python and on PATH); install "
                  "Verilator 5 (Debian/Ubuntu: apt-get install verilator) or use --sim icarus "
                  "/ --sim amaranth"),
])
def test_a_missing_simulator_is_explained(tmp_path, monkeypatch, simulator, message):
    monkeypatch.setattr(tools, "which", lambda name: None)
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    out = CliRunner().invoke(main, ["check", str(cfg), "--sim", simulator])
    assert out.exit_code == 3
    assert out.output.strip() == f"carrypipe: error: {message}"


@verilator
def test_hanging_simulator_times_out(tmp_path):
    plan = make_plan(from_mapping({"name": "u", "width": 4}))
    with pytest.raises(tools.ToolTimeout, match=r"^verilator did not finish within 0.01 s"):
        sim.run(plan, suite(plan, 10, 1), "verilator", timeout=0.01)
