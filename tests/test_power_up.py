"""Without a reset the valid bits start unknown: what the header and report say, checked in
Icarus Verilog (4-state: an undriven flip-flop is X until it loads a known value)."""

from __future__ import annotations

import re
import subprocess

import pytest

from carrypipe import config, emit
from carrypipe.plan import make_plan
from carrypipe.tools import which


@pytest.mark.parametrize("enable", [False, True])
def test_the_header_says_out_valid_is_unknown_until_the_pipeline_has_filled(enable):
    plan = make_plan(config.from_mapping({"name": "vnr", "width": 8, "slice_width": 3,
                                          "valid": True, "enable": enable}))
    text = " ".join(line.lstrip("/ ") for line in emit.unit_verilog(plan).splitlines()[:12])
    gate = " with en high" if enable else ""
    assert (f"Reset: no reset; the valid bits start unknown (X in simulation), and out_valid "
            f"is defined once in_valid has been driven for 3 edges{gate}.") in text


@pytest.mark.skipif(not (which("iverilog") and which("vvp")), reason="Icarus is not installed")
def test_out_valid_is_x_until_latency_edges_have_passed(tmp_path):
    plan = make_plan(config.from_mapping({"name": "vnr", "width": 8, "slice_width": 3,
                                          "valid": True}))
    assert plan.latency == 3
    (tmp_path / "vnr.v").write_text(emit.unit_verilog(plan))
    (tmp_path / "tb.v").write_text("""module tb;
  reg clk = 0, in_valid = 0;
  reg [7:0] a = 0, b = 0;
  wire [7:0] sum; wire cout, out_valid;
  vnr dut (.clk(clk), .a(a), .b(b), .in_valid(in_valid), .sum(sum), .cout(cout),
           .out_valid(out_valid));
  integer k;
  initial begin
    for (k = 1; k <= 4; k = k + 1) begin
      #5 clk = 1; #1 $display("edge %0d out_valid=%b", k, out_valid); #4 clk = 0;
    end
    $finish;
  end
endmodule
""")
    subprocess.run(["iverilog", "-o", "t.vvp", "vnr.v", "tb.v"], cwd=tmp_path, check=True)
    out = subprocess.run(["vvp", "-n", "t.vvp"], cwd=tmp_path, capture_output=True, text=True,
                         check=True).stdout
    seen = dict(re.findall(r"edge (\d) out_valid=(\w)", out))
    assert seen == {"1": "x", "2": "x", "3": "0", "4": "0"}, out
