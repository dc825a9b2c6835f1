"""A measurement harness: the unit between a serial shift-in and a capture-and-shift-out chain.

Wide units have more ports than a package has pins, and port timing is not what a user's
design sees.  The harness feeds every unit input from one shift register loaded from pin
`harness_si` (bit i loads bit i-1 ^ bit i+1: one 2-input LUT), and folds every unit output
into a chain whose bit i loads `out[i] ^ chain[i-1]` (one 2-input LUT), read on pin
`harness_so`.  So the harness's own paths are single-LUT register-to-register paths, as
fast as the fabric allows; `inside_unit` tells from a path's end cell which side it is on.
"""

from __future__ import annotations

import re

from .plan import Plan

INSTANCE = "unit"  # the unit's instance name; its cells carry this prefix after flattening
PREFIX = "harness_"  # every harness register and port starts with this; unit cells never do
# (the wires from the unit's outputs are `res_<port>`)
SHIFT_IN = PREFIX + "in"
CAPTURE = PREFIX + "out"
SERIAL_IN = PREFIX + "si"
SERIAL_OUT = PREFIX + "so"


def top_name(plan: Plan) -> str:
    return f"{plan.config.name}_harness"


def inside_unit(end_cell: str, plan: Plan) -> bool:
    """True when a critical path is the unit's: it ends in one of the unit's registers.

    Harness cells are named after top-level harness nets (`harness_...`), except that a
    shift-in register may take the name of the unit input port it drives
    (`unit.a_<CELL TYPE>...`; the unit's own input register is `a_in`).  Every other
    register is the unit's: `unit.<register>` or, for the last stage, the harness wire it
    drives (`res_...`), or a register named after the capture net it leads to
    (`_capture_hops`).  The path's length does not decide: every stage of a `levels` unit
    is a single LUT, as the harness's own paths are.
    """
    return _capture_hops(end_cell) > 0 or not (end_cell.startswith(PREFIX)
                                                or _feeds(end_cell, plan))


def _feeds(cell: str, plan: Plan) -> str | None:
    """The unit input a shift-in register feeds, when Yosys named it after that port."""
    ports = "|".join(re.escape(p.name) for p in plan.ports if p.direction == "input")
    shift_in = re.match(rf"{INSTANCE}\.({ports})(\[|_[A-Z]|$)", cell)
    return shift_in.group(1) if shift_in else None


def path_words(path, plan: Plan) -> str:
    """A measured path (its `start` and `end` cells) for people: a shift-in register named
    after the unit input it feeds is marked as the harness's (the name reads like a unit
    register, and the unit may have none there)."""
    def words(cell: str) -> str:
        port = _feeds(cell, plan)
        return f"{cell} (the harness register feeding input {port})" if port else cell
    return f"{words(path.start)} -> {words(path.end)}"


def _capture_hops(cell: str) -> int:
    """For a unit register that Yosys named after the capture net it leads to, how many
    registers back from the capture registers it is; else 0.  Seen on iCE40 with `enable`
    and an async reset: `harness_out_SB_DFF_Q_1_D_SB_LUT4_O_I3_SB_DFFER_Q_DFFLC` is the
    flip-flop (SB_DFFER) whose Q drives input I3 of the LUT whose O drives D of capture
    flip-flop 1: the unit's output register, 1 back; each further flip-flop named, 1 more."""
    if not cell.startswith(CAPTURE):
        return 0
    return max(0, len(re.findall(r"(?<![A-Za-z0-9])(?:SB_)?DFF[A-Z]*_Q", cell)) - 1)


def stage_of(cell: str, plan: Plan) -> int | None:
    """The unit stage (0-based) whose register a path-end cell is, when its name tells.

    A register keeps the name of its plan word (`sum_stage_2`, `grp_gen_1_4`, ...) followed
    by the tool's cell suffix (`_TRELLIS_FF_Q`, `_DFF_Q_3`, `[5]`); a word loaded at edge e
    ends a path of stage e - 1 (counted after the input register).  The output registers
    are named after the unit's outputs (`unit.sum`, `unit.cout`, the harness wire `res_...`
    they drive, or the capture net behind it: `_capture_hops`): the last stage; registers
    named after the capture net further back, the stages before.  Input registers (loaded
    from the harness), the valid bit beside them and harness registers name no stage.
    """
    name = cell[len(INSTANCE) + 1:] if cell.startswith(INSTANCE + ".") else None
    if name is not None:
        found = [w for w in plan.words if w.kind != "input" and re.match(
            rf"{re.escape(w.name)}(?:_[A-Z]|\[|\$|$)", name)]
        if found:
            word = max(found, key=lambda w: len(w.name))
            stage = word.edge - plan.input_cycles - 1
            # An iCE40 logic cell is named after its LUT, and a LUT after a net it reads
            # (`<word>_SB_LUT4_I1_LC`): its flip-flop loads from that LUT, a stage later.
            if re.match(r"_SB_LUT4_I\d", name[len(word.name):]):
                stage = min(stage + 1, len(plan.stages) - 1)
            return stage if stage >= 0 else None  # the input rank's valid bit: no stage
    hops = _capture_hops(cell)
    if hops:
        return len(plan.slices) - hops if hops <= len(plan.slices) else None
    outputs = "|".join(re.escape(p.name) for p in plan.ports if p.direction == "output")
    if cell.startswith("res_") or re.match(rf"{INSTANCE}\.({outputs})(?:_[A-Z]|\[|\$|$)",
                                           cell):
        return len(plan.slices) - 1
    return None


def widths(plan: Plan) -> tuple[int, int]:
    """Bits the harness shifts in (every unit input but clk) and captures (every output)."""
    ins = sum(p.width for p in plan.ports if p.direction == "input" and p.name != "clk")
    return ins, sum(p.width for p in plan.ports if p.direction == "output")


def flip_flops(plan: Plan) -> int:
    """The harness's own flip-flops: one per shifted-in and one per captured bit."""
    return sum(widths(plan))


def design_flip_flops(plan: Plan) -> int:
    """The flip-flops of the measured design: the unit's and the harness's."""
    return plan.registers.total + flip_flops(plan)


def luts(plan: Plan) -> int:
    """The harness's own LUTs: one XOR per shift-in bit (none when only one bit is shifted
    in: it loads the pin), one per captured bit."""
    n_in, n_out = widths(plan)
    return (n_in if n_in > 1 else 0) + n_out


def harness_verilog(plan: Plan, module: str | None = None) -> str:
    """Verilog-2005 of the harness top (module `<name>_harness`, ports clk, serial in, out)
    around the unit's module (`module`, by default the unit's own name)."""
    inputs = [p for p in plan.ports if p.direction == "input" and p.name != "clk"]
    outputs = [p for p in plan.ports if p.direction == "output"]
    n_in, n_out = widths(plan)
    conns, lsb = [".clk(clk)"], 0
    for p in inputs:
        conns.append(f".{p.name}({SHIFT_IN}[{lsb + p.width - 1}:{lsb}])")
        lsb += p.width
    conns += [f".{p.name}(res_{p.name})" for p in outputs]
    wires = [f"  wire [{p.width - 1}:0] res_{p.name};" for p in outputs]
    result = "{" + ", ".join(f"res_{p.name}" for p in reversed(outputs)) + "}"
    # Bit i loads bit i-1 ^ bit i+1, the top bit bit n-2 ^ the pin (a 2-input LUT each): no
    # harness register loads what a unit register loads (one input bit), so synthesis cannot
    # merge a unit register (an operand's skew, say) into one of the harness.
    shift_in = (SERIAL_IN if n_in == 1 else f"{{{SHIFT_IN}[{n_in - 2}:0], {SERIAL_IN}}} ^ "
                f"{{{SERIAL_IN}, {SHIFT_IN}[{n_in - 1}:1]}}")
    shift_out = SERIAL_IN if n_out == 1 else f"{{{CAPTURE}[{n_out - 2}:0], {SERIAL_IN}}}"
    lines = [
        f"// Measurement harness of {plan.config.name}: serial shift-in, capture-and-shift-out.",
        f"module {top_name(plan)} (",
        "  input wire clk,",
        f"  input wire {SERIAL_IN},",
        f"  output wire {SERIAL_OUT}",
        ");",
        f"  reg [{n_in - 1}:0] {SHIFT_IN};",
        f"  reg [{n_out - 1}:0] {CAPTURE};",
        *wires,
        f"  always @(posedge clk) {SHIFT_IN} <= {shift_in};",
        f"  {module or plan.config.name} {INSTANCE} (",
        "    " + ",\n    ".join(conns),
        "  );",
        f"  always @(posedge clk) {CAPTURE} <= {result} ^ {shift_out};",
        f"  assign {SERIAL_OUT} = {CAPTURE}[{n_out - 1}];",
        "endmodule",
        "",
    ]
    return "\n".join(lines)
