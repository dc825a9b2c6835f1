"""The self-checking Verilog-2001 testbench emitted beside the unit.

It reads the packed vector file (see `vectors.field_widths`), offers one vector per enabled
clock edge, and compares every result `latency` enabled edges later with the expected value
that Python computed.  It ends with one line that starts with PASS or FAIL; on FAIL it also
stops through `$fatal`, so simulators that support it exit non-zero (define
CARRYPIPE_TB_NO_FATAL for a simulator that lacks `$fatal`).
"""

from __future__ import annotations

from .plan import Plan
from .vectors import field_widths


def vector_file(plan: Plan) -> str:
    return f"{plan.config.name}_vectors.hex"


def testbench(plan: Plan, count: int) -> str:
    c, w, lat = plan.config, plan.width, plan.latency
    name = c.name
    offs, at = {}, 0
    for field, width in field_widths(plan):
        offs[field] = (at + width - 1, at)
        at += width

    def f(field):
        hi, lo = offs[field]
        return f"cur[{hi}:{lo}]" if hi != lo else f"cur[{hi}]"

    names = [p.name for p in plan.ports]
    conns = ",\n    ".join(f".{n}({n})" for n in names)
    has = set(names)
    lines = [
        f"// Self-checking testbench for {name} (carrypipe).",
        f"// Reads {vector_file(plan)} (or +vectors=FILE), {count} vectors; +vcd writes {name}_tb.vcd.",
        f"//   iverilog -g2005 -o {name}_tb.vvp {name}.v {name}_tb.v && vvp {name}_tb.vvp",
        f"//   Or with Verilator 5: verilator --binary --timing -Wno-fatal --top-module {name}_tb"
        f" {name}.v {name}_tb.v"
        f" && obj_dir/V{name}_tb",
        "// The last line printed starts with PASS or FAIL.",
        "`timescale 1ns / 1ps",
        f"module {name}_tb;",
        f"  parameter VECTORS = {count};",
        f"  localparam W = {w};",
        f"  localparam LATENCY = {lat};",
        f"  localparam VW = {at};",
        "  reg clk = 1'b0;",
        "  always #5 clk = ~clk;",
        "  reg [VW-1:0] mem [0:VECTORS-1];",
        "  reg [VW-1:0] cur;",
        "  reg [W-1:0] a = 0;",
        "  reg [W-1:0] b = 0;",
        "  reg cin = 1'b0;",
        "  reg in_valid = 1'b0;",
        "  reg en = 1'b0;",
        "  reg rst = 1'b1;",
        "  reg gap_done = 1'b0;",
        "  wire [W-1:0] sum;",
        "  wire cout;",
        "  wire out_valid;",
        "  reg [8*512-1:0] path;",
        "  integer next;",
        "  integer taken;",
        "  integer cycle;",
        "  integer k;",
        "",
        f"  {name} dut (\n    {conns}\n  );",
        "",
        "  task fail;",
        "    begin",
        "`ifdef CARRYPIPE_TB_NO_FATAL",
        "      $finish;",
        "`else",
        "      $fatal;",
        "`endif",
        "    end",
        "  endtask",
        "",
        "  // Put vector `next` on the inputs; a gap first shows one cycle with en low and the",
        "  // operands inverted, which the unit must ignore.",
        "  task drive;",
        "    begin",
        "      if (next < VECTORS) begin",
        "        cur = mem[next];",
        f"        a = {f('a')};",
        f"        b = {f('b')};",
        f"        cin = {f('cin')};",
        f"        in_valid = {f('valid')};",
        "        en = 1'b1;",
        f"        if ({f('gap')} && !gap_done) begin",
        "          a = ~a;",
        "          b = ~b;",
        "          cin = ~cin;",
        "          in_valid = ~in_valid;",
        "          en = 1'b0;",
        "          gap_done = 1'b1;",
        "        end else begin",
        "          gap_done = 1'b0;",
        "        end",
        "      end else begin",
        "        a = 0;",
        "        b = 0;",
        "        cin = 1'b0;",
        "        in_valid = 1'b0;",
        "        en = 1'b1;",
        "      end",
        "    end",
        "  endtask",
        "",
        "  task check;",
        "    begin",
        "      cur = mem[k];",
        f"      if (sum !== {f('sum')}"
        + (f" || cout !== {f('cout')}" if "cout" in has else "")
        + (f" || out_valid !== {f('valid')}" if "out_valid" in has else "") + ") begin",
        "        $display(\"FAIL vector %0d (cycle %0d): a=%h b=%h cin=%b expected sum=%h"
        " cout=%b valid=%b got sum=%h cout=%b valid=%b\",",
        f"          k, cycle, {f('a')}, {f('b')}, {f('cin')}, {f('sum')}, {f('cout')},"
        f" {f('valid')}, sum, cout, out_valid);",
        "        fail;",
        "      end",
        "    end",
        "  endtask",
        "",
        "  initial begin",
        f"    if (!$value$plusargs(\"vectors=%s\", path)) path = \"{vector_file(plan)}\";",
        "    $readmemh(path, mem);",
        f"    if ($test$plusargs(\"vcd\")) begin $dumpfile(\"{name}_tb.vcd\"); "
        f"$dumpvars(0, {name}_tb); end",
        "    next = 0;",
        "    taken = 0;",
        "    cycle = 0;",
        "    // Two cycles of reset (with en low: the reset must act all the same).",
        "    repeat (2) @(posedge clk);",
        "    #1 rst = 1'b0;",
        "    drive;",
        "    forever begin",
        "      @(posedge clk);",
        "      #1 cycle = cycle + 1;",
        "      if (en) begin",
        "        taken = taken + 1;",
        "        if (next < VECTORS) next = next + 1;",
        "      end",
        "      if (taken >= LATENCY) begin",
        "        k = taken - LATENCY;",
        "        if (k >= VECTORS) begin",
        "          $display(\"PASS %0d vectors, latency %0d\", VECTORS, LATENCY);",
        "          $finish;",
        "        end",
        "        check;",
    ]
    if "rst" in has and "out_valid" in has:
        lines += [
            "      end else if (out_valid !== 1'b0) begin",
            "        $display(\"FAIL cycle %0d: out_valid=%b before the first result after reset\",",
            "          cycle, out_valid);",
            "        fail;",
        ]
    lines += [
        "      end",
        "      drive;",
        "    end",
        "  end",
        "endmodule",
        "",
    ]
    return "\n".join(lines)
