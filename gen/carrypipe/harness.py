"""A measurement harness: the unit between a serial shift-in and a capture-and-shift-out chain.

Wide units have more ports than a package has pins, and port timing is not what a user's
design sees.  The harness feeds every unit input from one shift register loaded from pin
`si` (register -> register, no logic), and folds every unit output into a chain whose bit i
loads `out[i] ^ chain[i-1]` (one 2-input LUT, fan-out one), read on pin `so`.  So the
harness's own paths are single-LUT register-to-register paths and every longer path lies
inside the unit; `inside_unit` tells from the path's end cell which side it sits on.
"""

from __future__ import annotations

import re

from .plan import Plan

INSTANCE = "unit"  # the unit's instance name; its cells carry this prefix after flattening
SHIFT_IN = "harness_in"
CAPTURE = "harness_out"


def top_name(plan: Plan) -> str:
    return f"{plan.config.name}_harness"


def inside_unit(end_cell: str) -> bool:
    """True when a path ends in a unit register, not in a harness register.

    Harness registers are top-level names and keep them through flattening; the unit's own
    registers carry `unit.` or, for the last stage, the harness wire they drive (`res_...`).
    A path that ends in the harness is the capture LUT's path, so the unit was faster.
    """
    return not end_cell.startswith((SHIFT_IN, CAPTURE))


def stage_of(cell: str, stages: int) -> int | None:
    """The unit stage whose register a path-end cell is, when its name tells.

    Stage registers keep `sum_stage_<i>` / `carry_stage_<i>`; the last stage's registers
    drive the unit's outputs and are named after them (`unit.cout`, `res_sum`, ...).
    """
    m = re.search(r"(?:sum|carry)_stage_(\d+)", cell)
    if m:
        return int(m.group(1))
    if cell.startswith(("res_", f"{INSTANCE}.cout", f"{INSTANCE}.sum")):
        return stages - 1
    return None


def harness_verilog(plan: Plan) -> str:
    """Verilog-2005 of the harness top (module `<name>_harness`, ports clk, si, so)."""
    inputs = [p for p in plan.ports if p.direction == "input" and p.name != "clk"]
    outputs = [p for p in plan.ports if p.direction == "output"]
    n_in = sum(p.width for p in inputs)
    n_out = sum(p.width for p in outputs)
    conns, lsb = [".clk(clk)"], 0
    for p in inputs:
        conns.append(f".{p.name}({SHIFT_IN}[{lsb + p.width - 1}:{lsb}])")
        lsb += p.width
    conns += [f".{p.name}(res_{p.name})" for p in outputs]
    wires = [f"  wire [{p.width - 1}:0] res_{p.name};" for p in outputs]
    result = "{" + ", ".join(f"res_{p.name}" for p in reversed(outputs)) + "}"
    shift_in = "si" if n_in == 1 else f"{{{SHIFT_IN}[{n_in - 2}:0], si}}"
    shift_out = "si" if n_out == 1 else f"{{{CAPTURE}[{n_out - 2}:0], si}}"
    lines = [
        f"// Measurement harness of {plan.config.name}: serial shift-in, capture-and-shift-out.",
        f"module {top_name(plan)} (",
        "  input wire clk,",
        "  input wire si,",
        "  output wire so",
        ");",
        f"  reg [{n_in - 1}:0] {SHIFT_IN};",
        f"  reg [{n_out - 1}:0] {CAPTURE};",
        *wires,
        f"  always @(posedge clk) {SHIFT_IN} <= {shift_in};",
        f"  {plan.config.name} {INSTANCE} (",
        "    " + ",\n    ".join(conns),
        "  );",
        f"  always @(posedge clk) {CAPTURE} <= {result} ^ {shift_out};",
        f"  assign so = {CAPTURE}[{n_out - 1}];",
        "endmodule",
        "",
    ]
    return "\n".join(lines)
