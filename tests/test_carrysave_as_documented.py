"""The sum and the multiplier as a user reads them in the README: a Verilog testbench written
from the documented ports, widths, meanings and timing alone — it knows the include file's
`<NAME>_LATENCY` and nothing else of carrypipe — drives random inputs (with bubbles and
enable gaps, signed and unsigned, odd widths) and checks every result against its own
behavioural model (Verilog's `*` and `+`, `$signed`), in Icarus.  Independent of the Python
reference the other tests use."""

from __future__ import annotations


import pytest

from carrypipe import emit
from carrypipe.tools import which
from conftest import make
from test_as_documented import simulate

pytestmark = pytest.mark.skipif(not (which("iverilog") and which("vvp")),
                                reason="Icarus Verilog is not installed")

# Per case: config keys, the inputs with their widths, the output, its width, and the model.
CASES = {
    "mul13x7": (dict(unit="multiplier", width=13, width_b=7, slice_width=6),
                {"a": 13, "b": 7}, "product", 20, "{7'd0, a} * {13'd0, b}"),
    "mul11x11 signed booth": (dict(unit="multiplier", width=11, signed=True,
                                   partial_products="booth4", pipeline="levels",
                                   cell="sklansky", tree="wallace"),
                              {"a": 11, "b": 11}, "product", 22,
                              "$signed(a) * $signed(b)"),
    "mul9x5 native": (dict(unit="multiplier", width=9, width_b=5, tree="native",
                           native_stages=2, signed=True),
                      {"a": 9, "b": 5}, "product", 14, "$signed(a) * $signed(b)"),
    "sum5x9 signed": (dict(unit="sum", operands=5, width=9, signed=True,
                           tree_levels_per_stage=2, slice_width=4),
                      {f"x{i}": 9 for i in range(5)}, "sum", 12,
                      " + ".join(f"$signed(x{i})" for i in range(5))),
    "sum16x3": (dict(unit="sum", operands=16, width=3, pipeline="blocks", cell="kogge-stone",
                     block_width=2),
                {f"x{i}": 3 for i in range(16)}, "sum", 7,
                " + ".join(f"{{4'd0, x{i}}}" for i in range(16))),
}


def users_testbench(name: str, inputs: dict, out: str, width: int, model: str,
                    off_by: int = 0) -> str:
    lat = f"(`{name.upper()}_LATENCY + {off_by})"
    decl = "\n".join(f"  reg [{w - 1}:0] {n};" for n, w in inputs.items())
    conns = ", ".join([".clk(clk)", ".en(en)", ".in_valid(in_valid)", ".out_valid(out_valid)",
                       f".{out}({out})"] + [f".{n}({n})" for n in inputs])
    draw = "\n".join(f"      {n} = $random;" for n in inputs)
    return f"""`include "{name}.vh"
`timescale 1ns/1ps
module tb;
  reg clk = 0, en = 1, in_valid = 0;
{decl}
  wire [{width - 1}:0] {out};
  wire out_valid;
  wire [{width - 1}:0] want = {model};
  reg [{width - 1}:0] exp_q [0:63];
  reg vld [0:63];
  integer wr = 0, rd = 0, taken = 0, errors = 0, checked = 0, k;
  {name} dut ({conns});
  always #5 clk = ~clk;
  initial begin
    for (k = 0; k < 3000; k = k + 1) begin
{draw}
      in_valid = (k < 5) || ($random % 4 != 0);
      en = (k < 5) || ($random % 5 != 0);
      #1;
      if (en) begin
        exp_q[wr] = want;
        vld[wr] = in_valid;
        wr = (wr + 1) % 64;
      end
      @(posedge clk);
      #1;
      if (en) begin
        taken = taken + 1;
        if (taken >= {lat}) begin
          if (out_valid !== vld[rd] || (vld[rd] && {out} !== exp_q[rd])) errors = errors + 1;
          if (vld[rd]) checked = checked + 1;
          rd = (rd + 1) % 64;
        end
      end
    end
    $display("RESULT errors=%0d checked=%0d", errors, checked);
    $finish;
  end
endmodule
"""


def run_users_testbench(case: str, tmp_path, off_by: int = 0) -> tuple[int, int]:
    keys, inputs, out, width, model = CASES[case]
    name = "user_" + case.split()[0]
    plan = make(name=name, valid=True, enable=True, **keys)
    assert {p.name: p.width for p in plan.ports if p.direction == "input"
            and p.name not in ("clk", "rst", "en", "in_valid")} == inputs
    assert plan.port(out).width == width  # as the README's port table says
    emit.write(emit.render(plan, vectors=10), tmp_path / "b")
    return simulate(tmp_path / "b", name,
                    users_testbench(name, inputs, out, width, model, off_by))


@pytest.mark.parametrize("case", CASES)
def test_a_users_testbench_agrees(case, tmp_path):
    errors, checked = run_users_testbench(case, tmp_path)
    assert checked > 1000 and errors == 0


@pytest.mark.parametrize("off_by", [-1, 1])
def test_the_users_testbench_sees_a_wrong_latency(tmp_path, off_by):
    errors, _ = run_users_testbench("mul13x7", tmp_path, off_by)
    assert errors > 100
