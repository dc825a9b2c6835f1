"""The proof harness: a Verilog miter of the emitted unit against the plain sum, delayed.

The reference is the specification written out directly: `a + b + cin` in W + 1 bits, then
`latency` registers that load on every enabled edge; `in_valid` travels through `latency`
registers of its own that `rst` clears (even while `en` is low).  The miter's single output
`ok` is high when the unit's outputs equal the reference's.  Only the manifest's module name,
latency and port list are read, so any pipeline shape the generator emits is covered.
"""

from __future__ import annotations

MITER = "carrypipe_miter"


def miter_verilog(module: str, latency: int, ports: list[dict]) -> str:
    """Verilog-2005 text of the miter for a unit with this name, latency and port list."""
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
    lines.append(f"  wire [{w}:0] ref_0 = {{1'b0, a}} + {{1'b0, b}} + {{{w}'d0, {cin}}};")
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
    checks = [f"sum == ref_{latency}[{w - 1}:0]"]
    if "cout" in have:
        checks.append(f"cout == ref_{latency}[{w}]")
    if "out_valid" in have:
        checks.append(f"out_valid == ref_valid_{latency}")
    lines.append(f"  assign ok = {' && '.join(f'({c})' for c in checks)};")
    lines.append("endmodule")
    return "\n".join(lines) + "\n"
