"""The units as a user reads them in the README: a testbench written in Verilog from the
documented ports, meanings and timing alone — it knows the include file's `<NAME>_LATENCY`
and nothing else of carrypipe — drives random inputs (with bubbles and enable gaps) and
checks every result against its own behavioural model (Verilog's `+`, `-`, `<`, `$signed`),
in Icarus.  Independent of the Python reference the other tests use."""

from __future__ import annotations

import subprocess

import pytest

from carrypipe import emit
from carrypipe.tools import which
from conftest import make

pytestmark = pytest.mark.skipif(not (which("iverilog") and which("vvp")),
                                reason="Icarus Verilog is not installed")

# Per unit: config keys, the model's declarations, and its outputs as Verilog expressions
# of the inputs taken (a, b, x, sub, cin, clear, ...); `acc_model` is a state updated on
# every accepted valid input.
W = 13
UNITS = {
    "addsub": (dict(unit="addsub", width=W, slice_width=4, carry_in=True, signed=True),
               ["sum", "cout", "overflow"],
               {"sum": "sub ? a - b - cin : a + b + cin",
                "cout": f"sub ? ({{1'b0, a}} < {{1'b0, b}} + cin) : "
                        f"(({{1'b0, a}} + {{1'b0, b}} + cin) >> {W})",
                # the exact result in W + 1 bits, against the result sign-extended
                "overflow": "(sub ? $signed({a[W-1], a}) - $signed({b[W-1], b}) - "
                            "$signed({1'b0, cin}) : $signed({a[W-1], a}) + "
                            "$signed({b[W-1], b}) + $signed({1'b0, cin})) !== "
                            "$signed({sum_exp[W-1], sum_exp})"}),
    "subtractor": (dict(unit="subtractor", width=W, pipeline="levels", cell="kogge-stone",
                        carry_in=True),
                   ["diff", "bout"],
                   {"diff": "a - b - bin", "bout": "{1'b0, a} < {1'b0, b} + bin"}),
    "comparator": (dict(unit="comparator", width=W, pipeline="levels", slice_width=3,
                        signed=True),
                   ["lt", "eq", "gt"],
                   {"lt": "$signed(a) < $signed(b)", "eq": "a == b",
                    "gt": "$signed(a) > $signed(b)"}),
    "accumulator": (dict(unit="accumulator", width=W, slice_width=5),
                    ["acc", "cout"],
                    {"acc": "acc_next[W-1:0]", "cout": "acc_next[W]"}),
}


def users_testbench(name: str, keys: dict, outputs: list[str], model: dict,
                    off_by: int = 0) -> str:
    """A testbench a user could write from the README: inputs before edge n, results right
    after edge n + LATENCY - 1, counting edges with en high."""
    inputs = {"addsub": ["a", "b", "sub", "cin"], "subtractor": ["a", "b", "bin"],
              "comparator": ["a", "b"], "accumulator": ["x", "clear"]}[keys["unit"]]
    wide = {"a", "b", "x"}
    outw = {"sum": "W", "diff": "W", "acc": "W"}
    L = f"(`{name.upper()}_LATENCY + {off_by})"
    decl_in = "\n".join(f"  reg {'[W-1:0] ' if i in wide else ''}{i};" for i in inputs)
    decl_out = "\n".join(f"  wire {'[W-1:0] ' if o in outw else ''}{o};" for o in outputs)
    fifo = "\n".join(f"  reg {'[W-1:0] ' if o in outw else ''}exp_{o} [0:63];" for o in outputs)
    conns = ", ".join([".clk(clk)", ".en(en)", ".in_valid(in_valid)", ".out_valid(out_valid)"]
                      + [f".{p}({p})" for p in inputs + outputs])
    store = "\n".join(f"        exp_{o}[wr] = {o}_exp;" for o in outputs)
    check = " || ".join(f"{o} !== exp_{o}[rd]" for o in outputs)
    calc = "\n".join(f"  wire {'[W-1:0] ' if o in outw else ''}{o}_exp = {model[o]};"
                     for o in outputs)
    acc = ""
    if keys["unit"] == "accumulator":
        acc = ("  reg [W-1:0] total = 0;\n"
               "  wire [W:0] acc_next = {1'b0, clear ? {W{1'b0}} : total} + {1'b0, x};\n")
    return f"""`include "{name}.vh"
`timescale 1ns/1ps
module tb;
  localparam W = `{name.upper()}_WIDTH;
  reg clk = 0, en = 1, in_valid = 0;
{decl_in}
{decl_out}
  wire out_valid;
{acc}{calc}
{fifo}
  reg vld [0:63];
  integer wr = 0, rd = 0, taken = 0, errors = 0, checked = 0, k;
  {name} dut ({conns});
  always #5 clk = ~clk;
  initial begin
    for (k = 0; k < 3000; k = k + 1) begin
      {{{", ".join(inputs)}}} = {{$random, $random, $random}};
      {"clear = (k == 0) || ($random % 8 == 0);" if keys["unit"] == "accumulator" else ""}
      in_valid = (k < 5) || ($random % 4 != 0);
      en = (k < 5) || ($random % 5 != 0);
      #1;
      if (en) begin
{store}
        vld[wr] = in_valid;
        {"if (in_valid) total = acc_next[W-1:0];" if keys["unit"] == "accumulator" else ""}
        wr = (wr + 1) % 64;
      end
      @(posedge clk);
      #1;
      if (en) begin
        taken = taken + 1;
        if (taken >= {L}) begin
          if (out_valid !== vld[rd] || (vld[rd] && ({check}))) errors = errors + 1;
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


def run_users_testbench(unit: str, tmp_path, off_by: int = 0) -> tuple[int, int]:
    keys, outputs, model = UNITS[unit]
    name = f"user_{unit}"
    plan = make(name=name, valid=True, enable=True, **keys)
    emit.write(emit.render(plan, vectors=10), tmp_path / "b")
    model = {o: e.replace("sum_exp", f"{outputs[0]}_exp") for o, e in model.items()}
    return simulate(tmp_path / "b", name, users_testbench(name, keys, outputs, model, off_by))


def simulate(folder, name: str, testbench: str, timeout: float = 300) -> tuple[int, int]:
    """Compile `<name>.v` with the user's `testbench` in Icarus, run it and read its
    `RESULT errors=E checked=C` line."""
    (folder / "tb.v").write_text(testbench)
    comp = subprocess.run(["iverilog", "-g2005", "-I", ".", "-o", "tb.vvp", f"{name}.v",
                           "tb.v"], cwd=folder, capture_output=True, text=True)
    assert comp.returncode == 0, comp.stderr
    out = subprocess.run(["vvp", "-n", "tb.vvp"], cwd=folder, capture_output=True,
                         text=True, timeout=timeout)
    line = [x for x in out.stdout.splitlines() if x.startswith("RESULT")][-1]
    errors, checked = (int(v.split("=")[1]) for v in line.split()[1:])
    return errors, checked


@pytest.mark.parametrize("unit", UNITS)
def test_a_users_testbench_agrees(unit, tmp_path):
    errors, checked = run_users_testbench(unit, tmp_path)
    assert checked > 1000 and errors == 0


@pytest.mark.parametrize("off_by", [-1, 1])
def test_the_users_testbench_sees_a_wrong_latency(tmp_path, off_by):
    errors, checked = run_users_testbench("accumulator", tmp_path, off_by)
    assert errors > 100
