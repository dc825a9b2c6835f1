"""Lint-clean Verilog: drop the wires that nothing reads from the HDL backend's output.

Amaranth keeps every named signal, so a sum or carry that synthesis would never use, or a
register name that Yosys folded into an output port, reaches the Verilog as a wire that is
assigned and never read (Verilator -Wall: UNUSEDSIGNAL).  Removing such a wire and its one
`assign` changes no behaviour; it is repeated until nothing more goes.  Ports, registers, `keep`
wires and wires named `*unused*` (Verilator's default --unused-regexp, for bits left unused on
purpose) are kept, with everything they read.
"""

from __future__ import annotations

import re

_DECL = re.compile(r"^  wire (?:\[\d+:\d+\] )?(\\\S+ |\w+);$")
_ASSIGN = re.compile(r"^  assign (\\\S+ |\w+) ?= (.*);$")
_TOKEN = re.compile(r"\\\S+ |[A-Za-z_][A-Za-z0-9_$]*")


def drop_unread(text: str) -> str:
    """`text` without the wires whose value reaches no port, register or process."""
    lines = text.split("\n")
    declared, drives, reads = {}, {}, set()
    for n, line in enumerate(lines):
        if m := _DECL.match(line):
            declared[m.group(1)] = n
        elif m := _ASSIGN.match(line):
            drives.setdefault(m.group(1), []).append(n)
        else:
            reads.update(_TOKEN.findall(line))
    # A wire is live when something other than a plain assign reads it, or a live wire's
    # assign does; everything driven only through plain assigns and not live goes.
    kept = [name for name, n in declared.items()
            if "unused" in name or (n and "keep" in lines[n - 1] and lines[n - 1].startswith("  (* "))]
    live, todo = set(), [*reads, *kept]
    while todo:
        tok = todo.pop()
        if tok in live:
            continue
        live.add(tok)
        for n in drives.get(tok, ()):
            todo += _TOKEN.findall(_ASSIGN.match(lines[n]).group(2))
    drop = set()
    for name, n in declared.items():
        if name in live:
            continue
        drop.add(n)
        if n and lines[n - 1].startswith("  (* "):
            drop.add(n - 1)
        drop.update(drives.get(name, ()))
    return "\n".join(line for n, line in enumerate(lines) if n not in drop)
