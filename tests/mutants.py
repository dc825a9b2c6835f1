"""Faults planted in emitted Verilog text, for the checks that must find them (simulators,
`prove`): single-operator and bit-range mutants of the logic, and named faults.

Only logic is mutated (continuous assignments, wires declared with their value, register
loads), so every mutant is still a unit with the same ports and registers.
"""

from __future__ import annotations

import re

# Units whose every mutant `prove` must catch (tests/test_prove.py samples them in the default
# run and runs them all with -m slow; tests/bench_mutants.py counts the testbench's catches).
UNITS = [
    dict(width=8, slice_width=3, cell="native", carry_in=True, valid=True, enable=True,
         reset="sync"),
    dict(width=8, slice_width=4, cell="kogge-stone", carry_in=True),
    dict(width=6, slice_width=3, cell="ripple", carry_in=True),
    dict(width=8, pipeline="levels", cell="brent-kung", carry_in=True, wire_registers=1),
    dict(width=8, pipeline="blocks", cell="sklansky", block_width=3, carry_in=True),
    dict(unit="subtractor", width=8, slice_width=3, carry_in=True, signed=True),
    dict(unit="addsub", width=8, slice_width=3, carry_in=True, signed=True),
    dict(unit="comparator", width=8, slice_width=3, signed=True),
    dict(unit="comparator", width=8, pipeline="levels", slice_width=3),
    dict(unit="accumulator", width=8, slice_width=3, valid=True),
    dict(width=8, slice_width=4, cell="han-carlson", valid=True, reset="async",
         reset_data=True),
    dict(unit="multiplier", width=4, width_b=3, signed=True, slice_width=3),
    dict(unit="multiplier", width=4, partial_products="booth4", pipeline="levels",
         cell="sklansky"),
    dict(unit="sum", operands=4, width=3, signed=True, tree="wallace", pipeline="blocks",
         cell="kogge-stone", block_width=2),
]

# Operator swaps: each keeps the widths, so the mutant is valid Verilog.
SWAPS = (("&", "|"), ("|", "&"), ("^", "&"), ("+", "-"), ("-", "+"), ("<=", "<"), ("<", "<="),
         ("~", ""))
_LOGIC = re.compile(r"^\s+(assign |wire .* = |\S.*<= )")
_OPERATOR = re.compile(r"(?<=\s)(\||&|\^|\+|-|<=|<)(?=\s)|~(?=[\w(])")
_RANGE = re.compile(r"\[(\d+):(\d+)\]")


def unfold(text: str) -> str:
    """The text with every statement that the writer folded over several lines
    (`verilog.fold`, broken at spaces) on one line again, so a mutant is planted in a whole
    statement whichever way it was printed."""
    out: list[str] = []
    open_statement = False
    for line in text.split("\n"):
        if open_statement:
            out[-1] += " " + line.strip()
        else:
            out.append(line)
        open_statement = bool(_LOGIC.match(out[-1])) and not out[-1].endswith(";")
    return "\n".join(out)


def logic_lines(text: str) -> list[int]:
    """Line numbers of assignments, wires with a value, and register loads (not reset
    clauses) of an unfolded text (`unfold`)."""
    lines = text.split("\n")
    return [n for n, line in enumerate(lines) if _LOGIC.match(line)
            and "<= 1'b0;" not in line and not re.search(r"<= \d+'d0;", line)]


def mutants(text: str, limit: int | None = None):
    """(description, mutated text) pairs: every operator of every logic line swapped, and
    every part-select of a logic line's right-hand side shifted down by one bit; the
    mutants are written unfolded."""
    text = unfold(text)
    lines = text.split("\n")
    out = []
    for n in logic_lines(text):
        line = lines[n]
        head, sep, rhs = line.partition(" <= " if " <= " in line.split(" = ")[0] or
                                        " = " not in line else " = ")
        for m in _OPERATOR.finditer(rhs):
            op = m.group(0)
            new = next((b for a, b in SWAPS if a == op), None)
            if new is None:
                continue
            mutated = rhs[:m.start()] + new + rhs[m.end():]
            out.append((f"line {n + 1}: {op!r} -> {new!r}",
                        _put(lines, n, head + sep + mutated)))
        for m in _RANGE.finditer(rhs):
            hi, lo = int(m.group(1)), int(m.group(2))
            if lo == 0 or hi == lo:
                continue
            mutated = rhs[:m.start()] + f"[{hi - 1}:{lo - 1}]" + rhs[m.end():]
            out.append((f"line {n + 1}: [{hi}:{lo}] -> [{hi - 1}:{lo - 1}]",
                        _put(lines, n, head + sep + mutated)))
    return out[:limit] if limit else out


def _put(lines: list[str], n: int, line: str) -> str:
    return "\n".join(lines[:n] + [line] + lines[n + 1:])


def drop_first_carry(text: str) -> str:
    """The unit with slice 1 reading a constant 0 instead of slice 0's carry."""
    text = unfold(text)
    lines = text.split("\n")
    for n in logic_lines(text):
        if "carry_stage_0" in lines[n].split("<=", 1)[-1] and "carry_stage_0 <=" not in lines[n]:
            lines[n] = lines[n].replace("carry_stage_0", "1'b0")
            return "\n".join(lines)
    raise ValueError("no load reads carry_stage_0")


def early_operand(text: str) -> str:
    """The unit with one line of slice 1's logic reading operand a straight from the port,
    a cycle early (the skew register bypassed; positions are the unit's, so `a[i]` and
    `a_skew_1[i]` name the same bit)."""
    text = unfold(text)
    lines = text.split("\n")
    for n in logic_lines(text):
        rhs = re.split(r" <= | = ", lines[n], maxsplit=1)[-1]
        if "a_skew_1[" in rhs and "a_skew_2 <=" not in lines[n]:
            lines[n] = lines[n].replace("a_skew_1[", "a[")
            return "\n".join(lines)
    raise ValueError("no logic reads a part of a_skew_1")
