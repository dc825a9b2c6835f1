"""The proof harness: a Verilog miter of the emitted unit against its specification, delayed.

The reference is the unit kind's specification written out directly (`units.Kind.reference`:
`a + b + cin`, `a - b - bin`, the comparisons, the running total) from the inputs, then
`latency` registers that load on every enabled edge; `in_valid` travels through `latency`
registers of its own that the reset (`rst` or `rst_n`) clears (even while `en` is low).  The miter's single output
`ok` is high when the unit's outputs equal the reference's.  Only the plan's module name,
latency and port list and the kind's reference are read, so any pipeline shape the generator
emits is covered.

Wide sums are written as a ripple of adders of at most `CHUNK` bits (the carry out of each
is the carry into the next: the schoolbook decomposition of an addition, common practice).
A single wide `+` would be just as right, but Yosys's SAT front end turns a W-bit add into
one expression nested about 3W deep, and the WebAssembly build runs out of call stack on it
from about 950 bits (940 proved, 960 did not); each chunk's result is a fresh variable, so
the nesting stays bounded.
"""

from __future__ import annotations

from . import reset

MITER = "carrypipe_miter"
CHUNK = 256


def chained(name: str, a: str, b: str, c: str, width: int, op: str = "+") -> list[str]:
    """Verilog lines declaring `wire [width:0] name` = a + b + c, or with op "-" the
    difference a - b - c with the borrow on top (c one bit), chunk by chunk.

    `a` and `b` are expressions `width` bits wide; the result is {carry or borrow, result}.
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
                     f"{{1'b0, {name}_a[{hi}:{lo}]}} {op} {{1'b0, {name}_b[{hi}:{lo}]}} {op} "
                     f"{{{n}'d0, {name}_c[{k}]}};")
    lines.append(f"  wire [{width}:0] {name} = {{{name}_c[{len(chunks)}], {name}_s}};")
    return lines


def signed_overflow(name: str, a: str, b: str, c: str, width: int, op: str) -> list[str]:
    """`wire name`: 1 when the exact two's-complement result of a op b op c (c counted as 0
    or 1) does not fit in `width` bits, from the operands sign-extended by one bit: the exact
    result then fits in width + 1 bits, and it fits in `width` bits exactly when its top two
    bits agree (IEEE 1364 signed arithmetic)."""
    ext = (lambda v: f"{{{v}[{width - 1}], {v}}}")
    lines = chained(f"{name}_x", ext(a), ext(b), c, width + 1, op)
    lines.append(f"  wire {name} = {name}_x[{width}] ^ {name}_x[{width - 1}];")
    return lines


def miter_verilog(plan, compare: tuple[str, ...] | None = None) -> str:
    """Verilog-2005 text of the miter for the unit of `plan`.

    `ok` compares the outputs named in `compare` (default: every output of the unit); the
    reference of output `o` after k enabled edges is `ref_<o>_<k>`.
    """
    c, lat = plan.config, plan.latency
    outputs = [p for p in plan.ports if p.direction == "output" and p.name != "out_valid"]
    compare = compare or tuple(p.name for p in plan.ports if p.direction == "output")
    inputs = [p for p in plan.ports if p.direction == "input"]
    en = "en" if c.enable else "1'b1"

    def decl(kind, p):
        rng = f"[{p.width - 1}:0] " if p.width > 1 else ""
        return f"  {kind} {rng}{p.name};"

    lines = [f"module {MITER}({', '.join([p.name for p in inputs] + ['ok'])});"]
    lines += [decl("input", p) for p in inputs]
    lines.append("  output ok;")
    lines += [decl("wire", p) for p in plan.ports if p.direction == "output"]
    conns = ", ".join(f".{p.name}({p.name})" for p in plan.ports)
    lines.append(f"  {c.name} dut ({conns});")
    lines += plan.unit.reference(c, en)
    lines.append("  wire ref_valid_0 = " + ("in_valid;" if c.valid else "1'b1;"))
    delayed = [(f"ref_{p.name}", p.width) for p in outputs] + [("ref_valid", 1)]
    for k in range(1, lat + 1):
        for name, width in delayed:
            lines.append(f"  reg {f'[{width - 1}:0] ' if width > 1 else ''}{name}_{k};")
    if lat:
        data = [(name, w) for name, w in delayed if name != "ref_valid"]
        lines.append("  always @(posedge clk) begin")
        lines.append(f"    if ({en}) begin")
        for k in range(1, lat + 1):
            lines += [f"      {name}_{k} <= {name}_{k - 1};" for name, _ in data]
        lines += ["    end", "  end"]
        # The valid chain is reset like the unit's (synchronously or not), even while en is
        # low; data the reference never resets (with reset_data the proof holds rst low).
        rst = reset.of(c)
        edge = f"posedge clk or {rst.edge}" if c.reset == "async" else "posedge clk"
        lines.append(f"  always @({edge}) begin")
        clear = [f"      ref_valid_{k} <= 1'b0;" for k in range(1, lat + 1)]
        shift = [f"      ref_valid_{k} <= ref_valid_{k - 1};" for k in range(1, lat + 1)]
        if c.reset != "none":
            lines += [f"    if ({rst.asserted}) begin", *clear, f"    end else if ({en}) begin",
                      *shift, "    end"]
        else:
            lines += [f"    if ({en}) begin", *shift, "    end"]
        lines.append("  end")
    checks = [f"{p.name} == ref_{p.name}_{lat}" for p in outputs if p.name in compare]
    if c.valid and "out_valid" in compare:
        checks.append(f"out_valid == ref_valid_{lat}")
    lines.append(f"  assign ok = {' && '.join(f'({x})' for x in checks)};")
    lines.append("endmodule")
    return "\n".join(lines) + "\n"
