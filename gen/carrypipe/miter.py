"""The proof harness: a Verilog miter of the emitted unit against the plain sum, delayed.

The reference is the specification written out directly: `a + b + cin` in W + 1 bits, then
`latency` registers that load on every enabled edge; `in_valid` travels through `latency`
registers of its own that `rst` clears (even while `en` is low).  The miter's single output
`ok` is high when the unit's outputs equal the reference's.  Only the manifest's module name,
latency and port list are read, so any pipeline shape the generator emits is covered.

The reference sum is written as a ripple of adders of at most `CHUNK` bits (the carry out of
each is the carry into the next: the schoolbook decomposition of an addition, common
practice).  A single wide `+` would be just as right, but Yosys's SAT front end turns a
W-bit add into one expression nested about 3W deep, and the WebAssembly build runs out of
call stack on it above 512 bits; each chunk's result is a fresh variable, so the nesting stays
bounded.
"""

from __future__ import annotations

MITER = "carrypipe_miter"
CHUNK = 256


def chained_add(name: str, a: str, b: str, c: str, width: int) -> list[str]:
    """Verilog lines declaring `wire [width:0] name` = a + b + c (c one bit), chunk by chunk.

    `a` and `b` are expressions `width` bits wide; the result is {carry out, sum}.
    """
    lines = [f"  wire [{width - 1}:0] {name}_a = {a};", f"  wire [{width - 1}:0] {name}_b = {b};"]
    chunks = range(0, width, CHUNK)
    lines.append(f"  wire [{len(chunks)}:0] {name}_c;")
    lines.append(f"  wire [{width - 1}:0] {name}_s;")
    lines.append(f"  assign {name}_c[0] = {c};")
    for k, lo in enumerate(chunks):
        hi = min(lo + CHUNK, width) - 1
        n = hi - lo + 1
        lines.append(f"  assign {{{name}_c[{k + 1}], {name}_s[{hi}:{lo}]}} = "
                     f"{{1'b0, {name}_a[{hi}:{lo}]}} + {{1'b0, {name}_b[{hi}:{lo}]}} + "
                     f"{{{n}'d0, {name}_c[{k}]}};")
    lines.append(f"  wire [{width}:0] {name} = {{{name}_c[{len(chunks)}], {name}_s}};")
    return lines


def miter_verilog(module: str, latency: int, ports: list[dict],
                  compare: tuple[str, ...] = ("sum", "cout", "out_valid")) -> str:
    """Verilog-2005 text of the miter for a unit with this name, latency and port list.

    `ok` compares the outputs named in `compare` (those the unit has).
    """
    have = {p["name"]: p["width"] for p in ports}
    w = have["sum"]
    inputs = [p for p in ports if p["direction"] == "input"]
    outputs = [p for p in ports if p["direction"] == "output"]
    en = "en" if "en" in have else "1'b1"
    cin = "cin" if "cin" in have else "1'b0"

    def decl(kind, p):
        rng = f"[{p['width'] - 1}:0] " if p["width"] > 1 else ""
        return f"  {kind} {rng}{p['name']};"

    lines = [f"module {MITER}({', '.join([p['name'] for p in inputs] + ['ok'])});"]
    lines += [decl("input", p) for p in inputs]
    lines.append("  output ok;")
    lines += [decl("wire", p) for p in outputs]
    conns = ", ".join(f".{p['name']}({p['name']})" for p in ports)
    lines.append(f"  {module} dut ({conns});")
    lines += chained_add("ref_0", "a", "b", cin, w)
    lines.append("  wire ref_valid_0 = " + ("in_valid;" if "in_valid" in have else "1'b1;"))
    for k in range(1, latency + 1):
        lines.append(f"  reg [{w}:0] ref_{k};")
        lines.append(f"  reg ref_valid_{k};")
    if latency:
        lines.append("  always @(posedge clk) begin")
        lines.append(f"    if ({en}) begin")
        for k in range(1, latency + 1):
            lines.append(f"      ref_{k} <= ref_{k - 1};")
            lines.append(f"      ref_valid_{k} <= ref_valid_{k - 1};")
        lines.append("    end")
        if "rst" in have:
            lines.append("    if (rst) begin")
            lines += [f"      ref_valid_{k} <= 1'b0;" for k in range(1, latency + 1)]
            lines.append("    end")
        lines.append("  end")
    checks = []
    if "sum" in compare:
        checks.append(f"sum == ref_{latency}[{w - 1}:0]")
    if "cout" in have and "cout" in compare:
        checks.append(f"cout == ref_{latency}[{w}]")
    if "out_valid" in have and "out_valid" in compare:
        checks.append(f"out_valid == ref_valid_{latency}")
    lines.append(f"  assign ok = {' && '.join(f'({c})' for c in checks)};")
    lines.append("endmodule")
    return "\n".join(lines) + "\n"
