"""Read what Yosys and nextpnr report: Fmax of the unit clock, cell counts, the critical path.

Sources: nextpnr's `--report` JSON (keys `fmax`, `critical_paths`, `utilization`), its log
(the last "Max frequency for clock" line, and the errors of a design that does not fit) and
Yosys `stat -json` (cells by type).  Only register-to-register timing of the one clock is
read: paths from or to ports (`<async>`) are left out.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass

from .devices import Family


@dataclass(frozen=True)
class Path:
    start: str  # cell launching the path
    end: str  # cell capturing it
    logic_ns: float  # cell delays, clock-to-out and setup included
    routing_ns: float
    luts: int  # logic steps through cells (LUTs, carry cells) between the two registers

    @property
    def total_ns(self) -> float:
        return self.logic_ns + self.routing_ns


@dataclass(frozen=True)
class PlaceReport:
    mhz: float
    path: Path | None
    logic_used: int


@dataclass(frozen=True)
class Cells:
    luts: int
    carry: int
    flip_flops: int


class ReportError(RuntimeError):
    """A tool's output did not hold what the flow needs (the message says what is missing)."""


def place_report(text: str, family: Family) -> PlaceReport:
    """Parse nextpnr's `--report` JSON."""
    data = json.loads(text)
    clocks = data.get("fmax") or {}
    if len(clocks) != 1:
        raise ReportError(f"expected one clock in the nextpnr report, found {sorted(clocks)}")
    (clock, fmax), = clocks.items()
    path = None
    for cp in data.get("critical_paths", []):
        if cp.get("from") == cp.get("to") == f"posedge {clock}" and cp.get("path"):
            steps = cp["path"]
            logic = sum(s["delay"] for s in steps if s["type"] != "routing")
            routing = sum(s["delay"] for s in steps if s["type"] == "routing")
            cells = sum(1 for s in steps if s["type"] == "logic")
            path = Path(steps[0]["from"]["cell"], steps[-1]["to"]["cell"], logic, routing, cells)
    use = data.get("utilization", {})
    return PlaceReport(mhz=float(fmax["achieved"]), path=path,
                       logic_used=use.get(family.logic_bel, {}).get("used", 0))


def cell_counts(text: str, family: Family) -> Cells:
    """Parse Yosys `stat -json`: LUTs, carry cells and flip-flops of the whole design."""
    by_type = json.loads(text)["design"]["num_cells_by_type"]
    return Cells(luts=sum(by_type.get(t, 0) for t in family.luts),
                 carry=by_type.get(family.carry, 0),
                 flip_flops=sum(n for t, n in by_type.items() if t.startswith(family.ff_prefix)))


_FMAX_LINE = re.compile(r"Max frequency for clock '([^']+)': ([0-9.]+) MHz")
_NO_ROOM = re.compile(r"ERROR: .*(?:no BELs remaining|[Dd]esign uses \d+|too many|"
                      r"[Uu]nable to place cell)[^\n]*")


def log_fmax(log: str) -> float | None:
    """The final (post-route) Fmax line of a nextpnr log, if any."""
    found = _FMAX_LINE.findall(log)
    return float(found[-1][1]) if found else None


def no_room(log: str) -> str | None:
    """The error line of a nextpnr run that ran out of device resources, if it did."""
    m = _NO_ROOM.search(log)
    return m.group(0).strip() if m else None


def utilisation(log: str, bel: str) -> tuple[int, int] | None:
    """(used, available) of one resource from the "Device utilisation" block of a log."""
    m = re.search(rf"^Info:\s+{re.escape(bel)}:\s+(\d+)/\s*(\d+)", log, re.M)
    return (int(m.group(1)), int(m.group(2))) if m else None
