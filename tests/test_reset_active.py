"""`reset_active: low`: the reset port is `rst_n`, active low.  Checked in Icarus Verilog
with the emitted testbench (expected values from Python's integers) and with a testbench
written here from the documented ports alone, by `prove`, and with the polarity flipped in
the Verilog (both must then fail)."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest

from carrypipe import config, emit, prove
from carrypipe.plan import make_plan
from carrypipe.tools import which
from conftest import needs_icarus

UNITS = [
    dict(width=13, slice_width=5, valid=True, reset="async", enable=True, carry_in=True),
    dict(width=16, pipeline="levels", cell="kogge-stone", valid=True, reset="sync",
         reset_data=True),
    dict(unit="comparator", width=12, pipeline="levels", signed=True, valid=True,
         reset="async", reset_data=True),
    dict(unit="accumulator", width=10, slice_width=4, valid=True, reset="sync", enable=True),
    dict(unit="sum", operands=5, width=7, signed=True, valid=True, reset="async"),
    dict(unit="multiplier", width=6, width_b=5, partial_products="booth4", valid=True,
         reset="sync", reset_data=True),
]


def low(**keys) -> dict:
    return {"name": "rn", **keys, "reset_active": "low"}


def build(keys: dict, folder) -> str:
    plan = make_plan(config.from_mapping(keys))
    emit.write(emit.render(plan, vectors=300), folder)
    return plan.config.name


def flip(path) -> None:
    """The reset's polarity turned round in the Verilog: a mutant the checks must catch."""
    text = path.read_text()
    flipped = text.replace("if (!rst_n)", "if (rst_n)").replace("negedge rst_n", "posedge rst_n")
    assert flipped != text
    path.write_text(flipped)


def run_testbench(folder, name: str) -> str:
    subprocess.run(["iverilog", "-g2005", "-o", "tb.vvp", f"{name}.v", f"{name}_tb.v"],
                   cwd=folder, check=True, capture_output=True)
    return subprocess.run(["vvp", "-n", "tb.vvp"], cwd=folder, capture_output=True,
                          text=True, timeout=300).stdout


def test_the_port_is_rst_n_in_the_place_of_rst():
    high = make_plan(config.from_mapping(dict(name="rn", **UNITS[0])))
    plan = make_plan(config.from_mapping(low(**UNITS[0])))
    assert [p.name for p in plan.ports] == [
        "rst_n" if p.name == "rst" else p.name for p in high.ports]
    port = next(p for p in plan.ports if p.name == "rst_n")
    assert port.meaning.startswith("asynchronous reset, active low")
    text = emit.unit_verilog(plan)
    assert "always @(posedge clk or negedge rst_n)" in text and "if (!rst_n)" in text
    assert not re.search(r"\brst\b", text)
    assert "Reset: async reset rst_n (active low) clears the valid bits only." in text
    manifest = json.loads(emit.render(plan, vectors=10)["rn.json"])
    assert manifest["reset"] == {"kind": "async", "clears": "valid bits", "port": "rst_n",
                                 "active": "low"}


def test_the_normalized_config_holds_the_polarity_only_with_a_reset():
    with_reset = config.from_mapping(low(**UNITS[0]))
    assert with_reset.normalized()["reset_active"] == "low"
    assert config.from_mapping(with_reset.normalized()) == with_reset
    plain = config.from_mapping({"name": "rn", "width": 8})
    assert "reset_active" not in plain.normalized()


@pytest.mark.parametrize("keys, message", [
    ({"width": 8, "reset_active": "low"},
     "key 'reset_active': value 'low' is not allowed with reset 'none'; expected reset "
     "'sync' or 'async' beside it"),
    ({"width": 8, "valid": True, "reset": "sync", "reset_active": "n"},
     "key 'reset_active': value 'n' is not allowed; expected one of high, low"),
])
def test_a_bad_polarity_is_one_line_exit_2_and_no_files(tmp_path, keys, message):
    cfg = tmp_path / "rn.yaml"
    cfg.write_text("".join(f"{k}: {str(v).lower()}\n" for k, v in {"name": "rn", **keys}.items()))
    out = subprocess.run([sys.executable, "-m", "carrypipe", "build", str(cfg), "-o",
                          str(tmp_path / "out")], capture_output=True, text=True)
    assert out.returncode == 2
    assert out.stderr.strip().endswith(message) and len(out.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()


@needs_icarus
@pytest.mark.parametrize("keys", UNITS, ids=lambda k: f"{k.get('unit', 'adder')}-{k['reset']}")
def test_the_emitted_testbench_passes_and_catches_a_flipped_polarity(tmp_path, keys):
    name = build(low(**keys), tmp_path)
    assert "PASS 300 vectors" in run_testbench(tmp_path, name)
    flip(tmp_path / f"{name}.v")
    assert "PASS" not in run_testbench(tmp_path, name)


HAND_BENCH = """`timescale 1ns / 1ps
module hand;
  reg clk = 0, rst_n = 0, in_valid = 0;
  reg [7:0] a = 0, b = 0;
  wire [7:0] sum; wire cout, out_valid;
  rn dut (.clk(clk), .rst_n(rst_n), .a(a), .b(b), .in_valid(in_valid), .sum(sum),
          .cout(cout), .out_valid(out_valid));
  always #5 clk = ~clk;
  initial begin
    @(posedge clk); @(posedge clk); #1 rst_n = 1;
    a = 8'd200; b = 8'd100; in_valid = 1;
    @(posedge clk); #1 in_valid = 0;
    repeat (LAT - 1) @(posedge clk);
    #1 $display("after %0d edges: out_valid=%b cout,sum=%0d", LAT, out_valid, {cout, sum});
    in_valid = 1;
    repeat (LAT) @(posedge clk);
    #1 $display("full: out_valid=%b", out_valid);
    #1 rst_n = 0;
    #1 $display("rst_n low between edges: out_valid=%b", out_valid);
    @(posedge clk); #1 $display("after the next edge: out_valid=%b", out_valid);
    $finish;
  end
endmodule
"""


@needs_icarus
@pytest.mark.parametrize("kind", ["sync", "async"])
def test_a_testbench_from_the_documented_ports_sees_rst_n_act_low(tmp_path, kind):
    """Ports, latency and meaning from the README only; 200 + 100 = 300 (Python's integers).
    An asynchronous reset clears out_valid as soon as rst_n falls, a synchronous one at the
    next rising edge."""
    plan = make_plan(config.from_mapping(low(width=8, slice_width=3, valid=True, reset=kind)))
    build(plan.config.normalized(), tmp_path)
    (tmp_path / "hand.v").write_text(HAND_BENCH.replace("LAT", str(plan.latency)))
    subprocess.run(["iverilog", "-g2005", "-o", "h.vvp", "rn.v", "hand.v"], cwd=tmp_path,
                   check=True, capture_output=True)
    out = subprocess.run(["vvp", "-n", "h.vvp"], cwd=tmp_path, capture_output=True,
                         text=True).stdout
    assert f"after {plan.latency} edges: out_valid=1 cout,sum={200 + 100}" in out
    assert "full: out_valid=1" in out
    assert f"rst_n low between edges: out_valid={0 if kind == 'async' else 1}" in out
    assert "after the next edge: out_valid=0" in out


@pytest.mark.parametrize("keys", [UNITS[0], UNITS[1]], ids=["async", "sync-reset-data"])
def test_prove_proves_rst_n_and_refuses_a_flipped_polarity(tmp_path, keys):
    name = build(low(**keys), tmp_path)
    plan, text = emit.read_build(tmp_path)
    assert prove.prove(plan, verilog=text).proved
    flip(tmp_path / f"{name}.v")
    plan, text = emit.read_build(tmp_path)
    verdict = prove.prove(plan, verilog=text)
    assert not verdict.proved
    assert "has a reset other than rst_n (active low), to 0" in verdict.message


@needs_icarus
@pytest.mark.parametrize("active", ["high", "low"])
@pytest.mark.parametrize("unit, kind, reset_data, valid", [
    ("adder", "async", False, True), ("adder", "async", True, True),
    ("adder", "sync", False, True), ("adder", "sync", True, True),
    ("addsub", "async", True, False), ("addsub", "sync", True, False)])
def test_the_emitted_testbench_checks_the_reset_between_edges(tmp_path, active, unit, kind,
                                                              reset_data, valid):
    """After the vectors it asserts the reset between two edges: an asynchronous reset that
    waits for the clock, or a synchronous one that does not, fails it (found by an ASIC
    trial: the testbench once reset only at the start; by a review: an adder/subtractor's
    all-ones inputs gave all-zero results, so a unit without valid checked nothing)."""
    keys = {"name": "rn", "unit": unit, "width": 9, "slice_width": 4, "valid": valid,
            "enable": True, "carry_in": True, "reset": kind, "reset_data": reset_data,
            "reset_active": active}
    name = build(keys, tmp_path)
    assert "PASS 300 vectors" in run_testbench(tmp_path, name)
    unit_file = tmp_path / f"{name}.v"
    text = unit_file.read_text()
    edge = "negedge rst_n" if active == "low" else "posedge rst"
    cond = "!rst_n" if active == "low" else "rst"
    if kind == "async":  # made synchronous: waits for the clock
        mutant = text.replace(f"always @(posedge clk or {edge})", "always @(posedge clk)")
        what = " and ".join((["out_valid"] if valid else [])
                            + (["every output"] if reset_data else []))
        says = f"did not clear {what} before the next edge"
    else:  # made asynchronous: acts before the clock edge
        mutant = text.replace(f"always @(posedge clk) begin\n    if ({cond}) begin",
                              f"always @(posedge clk or {edge}) begin\n    if ({cond}) begin")
        says = "acted before the clock edge"
    assert mutant != text
    unit_file.write_text(mutant)
    out = run_testbench(tmp_path, name)
    assert "PASS" not in out and says in out, out


@pytest.mark.skipif(not which("verilator"), reason="Verilator is not installed")
def test_a_failed_reset_check_is_never_followed_by_pass(tmp_path):
    """With CARRYPIPE_TB_NO_FATAL, FAIL calls $finish, and Verilator finishes the time step:
    nothing may print PASS after it (a review found the reset check fell through to PASS)."""
    keys = {"name": "rn", "width": 9, "slice_width": 4, "valid": True, "reset": "async"}
    name = build(keys, tmp_path)
    unit_file = tmp_path / f"{name}.v"
    unit_file.write_text(unit_file.read_text().replace("always @(posedge clk or posedge rst)",
                                                       "always @(posedge clk)"))
    subprocess.run(["verilator", "--binary", "--timing", "--timescale", "1ns/1ps",
                    "-DCARRYPIPE_TB_NO_FATAL", "--top-module", f"{name}_tb", f"{name}.v",
                    f"{name}_tb.v"], cwd=tmp_path, check=True, capture_output=True, timeout=600)
    out = subprocess.run([f"obj_dir/V{name}_tb"], cwd=tmp_path, capture_output=True, text=True,
                         timeout=120).stdout
    assert "FAIL reset check" in out and "PASS" not in out, out
