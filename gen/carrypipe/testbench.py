"""The self-checking Verilog-2001 testbench emitted beside the unit.

It opens and reads the packed vector file (see `vectors.field_widths`), checks that every
entry is there (each carries its own number, so a missing, short or empty file fails, in
Icarus, where missing entries read as X, and in Verilator, where they read as 0), offers one
vector per enabled clock edge, and compares every result `latency` enabled edges later with
the expected value that Python computed; an X or Z in any output is a mismatch.  A unit with
a reset is then reset between two edges (`reset_task`), to show the reset's kind.  It ends with
one line that starts with PASS (only when every one of VECTORS vectors was checked) or FAIL;
on FAIL it also stops through `$fatal`, so simulators that support it exit non-zero (define
CARRYPIPE_TB_NO_FATAL for a simulator that lacks `$fatal`).
"""

from __future__ import annotations

from . import reset
from .header import command, comment, wrapped
from .verilog import LINE, const
from .vectors import TAG_BITS, field_widths, output_ports, settled


def vector_file(plan) -> str:
    return f"{plan.config.name}_vectors.hex"


def condition(terms: list[str], op: str, pad: str, negate: bool = False) -> str:
    """`if (...) begin` over `terms` joined by `op`, a term a line when one line is too long."""
    head, tail = (f"{pad}if (!(", ")) begin") if negate else (f"{pad}if (", ") begin")
    line = head + f" {op} ".join(terms) + tail
    return line if len(line) <= LINE else head + f"\n{pad}    {op} ".join(terms) + tail


def reset_task(plan, rst, pass_line: str) -> list[str]:
    """`reset_check`, run after the vectors: a vector whose results hang on nothing before it
    (`vectors.settled`) for LATENCY edges; its results must be there; then the reset asserted
    between two edges, with `en` low, must clear out_valid (with reset_data every output) at
    once when asynchronous, at the next rising edge and not before when synchronous.  Each
    check stops the run on FAIL; PASS comes only after the last (else, never fall-through)."""
    c = plan.config
    vec, want = settled(plan)
    outs = output_ports(plan)
    on, off = (f"{rst.name} = {const(rst.level(a), 1)};" for a in (True, False))
    held = ((["out_valid === 1'b1"] if c.valid else [])
            + [f"{p.name} === {const(want[p.name], p.width)}" for p in outs])
    cleared = ((["out_valid === 1'b0"] if c.valid else [])
               + ([f"{p.name} === {const(0, p.width)}" for p in outs] if c.reset_data else []))
    what = " and ".join((["out_valid"] if c.valid else [])
                        + (["every output"] if c.reset_data else []))
    asynchronous = c.reset == "async"
    # (lines before the check, terms that must hold, the FAIL message's two parts)
    steps = [
        (["repeat (LATENCY) @(posedge clk);", "#1 en = 1'b0;"], held,
         ("FAIL reset check: the results of the inputs above", " were not there before the reset")),
        ([on, "#1;"], cleared if asynchronous else held,
         (f"FAIL reset check: {rst.name} did not clear {what}", " before the next edge")
         if asynchronous else
         (f"FAIL reset check: the synchronous {rst.name} acted", " before the clock edge")),
        (["@(posedge clk);", "#1;"], cleared,
         (f"FAIL reset check: {rst.name} did not clear {what}", " at the next edge")),
    ]
    said = ("After the vectors: inputs whose results hang on nothing before them, with in_valid "
            "high, for LATENCY edges; then the reset asserted between two edges with en low (it "
            f"acts all the same). It clears {what} "
            + ("at once (asynchronous)." if asynchronous
               else "at the next rising edge (synchronous), not before."))
    lines = [
        *wrapped(said, "  // ", "  // "),
        "  task reset_check;",
        "    begin",
        *(f"      {p.name} = {const(vec.inputs[p.name], p.width)};"
          for p in plan.operand_inputs()),
        "      in_valid = 1'b1;",
        "      en = 1'b1;",
    ]
    pad = "      "
    for before, terms, (first, second) in steps:
        lines += [f"{pad}{x}" for x in before]
        lines += [condition(terms, "&&", pad, negate=True),
                  f'{pad}  $write("{first}");',
                  f'{pad}  $display("{second}");',
                  f"{pad}  fail;",
                  f"{pad}end else begin"]
        pad += "  "
    lines += [f"{pad}{off}", f"{pad}{pass_line}", f"{pad}$finish;"]
    for _ in steps:
        pad = pad[:-2]
        lines.append(f"{pad}end")
    return lines + ["    end", "  endtask", ""]


def testbench(plan, count: int) -> str:
    c, lat = plan.config, plan.latency
    name = c.name
    offs, at = {}, 0
    for fld, width in field_widths(plan):
        offs[fld] = (at + width - 1, at)
        at += width

    def f(fld, word):
        hi, lo = offs[fld]
        return f"{word}[{hi}:{lo}]" if hi != lo else f"{word}[{hi}]"

    ins, outs = plan.operand_inputs(), output_ports(plan)
    has = {p.name for p in plan.ports}
    rst = reset.of(plan.config)
    resets = rst.name in has

    def decl(kind, p, init=""):
        rng = f"[{p.width - 1}:0] " if p.width > 1 else ""
        return f"  {kind} {rng}{p.name}{init};"

    conns = ",\n    ".join(f".{p.name}({p.name})" for p in plan.ports)
    # The FAIL line is written a field at a time, so no line of the testbench is long.
    shown = ([(f" {p.name}=%h", f(p.name, "mem[k]")) for p in ins] + [(" expected", None)]
             + [(f" {p.name}=%h", f(p.name, "mem[k]")) for p in outs]
             + ([(" valid=%b", f("valid", "mem[k]"))] if c.valid else []) + [(" got", None)]
             + [(f" {p.name}=%h", p.name) for p in outs]
             + ([(" valid=%b", "out_valid")] if c.valid else []))
    terms = ([f"{p.name} !== {f(p.name, 'mem[k]')}" for p in outs]
             + ([f"out_valid !== {f('valid', 'mem[k]')}"] if c.valid else []))
    compare = condition(terms, "||", "      ")
    passed = '$display("PASS %0d vectors, latency %0d", checked, LATENCY);'
    lines = [
        *comment([f"Self-checking testbench for {name} (carrypipe).",
                  f"Reads {vector_file(plan)} (or +vectors=FILE): VECTORS vectors; +vcd writes "
                  f"{name}_tb.vcd.",
                  "Run it from this folder with Icarus Verilog:"]),
        *command(f"iverilog -g2005 -o {name}_tb.vvp {name}.v {name}_tb.v"),
        *command(f"vvp {name}_tb.vvp"),
        "// or with Verilator 5:",
        *command(f"verilator --binary --timing --timescale 1ns/1ps --top-module {name}_tb "
                 f"{name}.v {name}_tb.v"),
        *command(f"obj_dir/V{name}_tb"),
        *comment(["Its verdict is one line starting with PASS or FAIL (the simulator may add its "
                  "own lines after it, for $fatal or $finish)."]),
        "`timescale 1ns / 1ps",
        f"module {name}_tb;",
        f"  parameter VECTORS = {count};",
        f"  localparam LATENCY = {lat};",
        f"  localparam VW = {at};",
        "  reg clk = 1'b0;",
        "  initial forever #5 clk = ~clk;",
        "  reg [VW-1:0] mem [0:VECTORS-1];",
        *(decl("reg", p, " = 0") for p in ins),
        "  reg in_valid = 1'b0;",
        "  reg en = 1'b0;",
        *([f"  reg {rst.name} = 1'b{rst.level(True)};"] if resets else []),
        "  reg gap_done = 1'b0;",
        *(decl("wire", p) for p in outs),
        *(["  wire out_valid;"] if "out_valid" in has else []),
        "  reg [8*512-1:0] path;",
        "  integer next;",
        "  integer taken;",
        "  integer checked;",
        "  integer cycle;",
        "  integer k;",
        "  integer fd;",
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
        "  // inputs inverted, which the unit must ignore.",
        "  task drive;",
        "    begin",
        "      if (next < VECTORS) begin",
        *(f"        {p.name} = {f(p.name, 'mem[next]')};" for p in ins),
        f"        in_valid = {f('valid', 'mem[next]')};",
        "        en = 1'b1;",
        f"        if ({f('gap', 'mem[next]')} && !gap_done) begin",
        *(f"          {p.name} = ~{p.name};" for p in ins),
        "          in_valid = ~in_valid;",
        "          en = 1'b0;",
        "          gap_done = 1'b1;",
        "        end else begin",
        "          gap_done = 1'b0;",
        "        end",
        "      end else begin",
        *(f"        {p.name} = 0;" for p in ins),
        "        in_valid = 1'b0;",
        "        en = 1'b1;",
        "      end",
        "    end",
        "  endtask",
        "",
        *(reset_task(plan, rst, passed) if resets else []),
        "  // Compare the outputs with vector k's expected values (an X or Z never matches).",
        "  task check;",
        "    begin",
        compare,
        "        $write(\"FAIL vector %0d (cycle %0d):\", k, cycle);",
        *(f"        $write(\"{text}\"{f', {arg}' if arg else ''});" for text, arg in shown),
        "        $display(\"\");",
        "        fail;",
        "      end",
        "      if (en) checked = checked + 1;  // a new result (with en low it only holds)",
        "    end",
        "  endtask",
        "",
        "  initial begin",
        "    if (!$value$plusargs(\"vectors=%s\", path))",
        f"      path = \"{vector_file(plan)}\";",
        "    fd = $fopen(path, \"r\");",
        "    if (fd == 0) begin",
        "      $display(\"FAIL cannot open the vectors file %0s\", path);",
        "      fail;",
        "    end",
        "    $fclose(fd);",
        "    $readmemh(path, mem);",
        "    // Every entry carries its number plus one: a missing or damaged one fails here.",
        "    for (k = 0; k < VECTORS; k = k + 1) begin",
        f"      if (^mem[k] === 1'bx || {f('tag', 'mem[k]')} !== {TAG_BITS}'d1 + k) begin",
        "        $write(\"FAIL the vectors file %0s holds %0d of the %0d vectors\", path, k,"
        " VECTORS);",
        "        $display(\" asked for (VECTORS)\");",
        "        fail;",
        "      end",
        "    end",
        "    if ($test$plusargs(\"vcd\")) begin",
        f"      $dumpfile(\"{name}_tb.vcd\");",
        f"      $dumpvars(0, {name}_tb);",
        "    end",
        "    next = 0;",
        "    taken = 0;",
        "    checked = 0;",
        "    cycle = 0;",
        "    // Two cycles of reset (with en low: the reset must act all the same)."
        if resets else "    // Two idle cycles (with en low), as a unit with a reset has.",
        "    repeat (2) @(posedge clk);",
        f"    #1 {rst.name} = 1'b{rst.level(False)};" if resets else "    #1;",
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
        "        // $finish ends the run after the current time step (Verilator finishes",
        "        // the step), so nothing after it may print or check: else, not fall-through.",
        "        if (k >= VECTORS) begin",
        "          if (checked != VECTORS) begin",
        "            $display(\"FAIL checked %0d of %0d vectors\", checked, VECTORS);",
        "            fail;",
        "          end else begin",
        *(["            reset_check;  // PASS, or FAIL"] if resets
          else [f"            {passed}", "            $finish;"]),
        "          end",
        "        end else begin",
        "          check;",
        "        end",
    ]
    if resets and "out_valid" in has:
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
