"""Texts about a plan for people and build flows: the report and the manifest.

All figures are read from the plan; nothing here computes a number of its own.  The stage
table and the tips depend on the pipeline mode and are chosen by the plan's type.
"""

from __future__ import annotations

import json
from dataclasses import replace
from functools import singledispatch

from . import __version__, cells
from .header import bits, reset_phrase, timing_phrase
from .plan import Plan, PrefixPlan, SlicedPlan
from .treeplan import NativePlan, TreePlan

DELAY_MODEL = ("unit-gate model (Tyagi 1993; Zimmermann 1997): 2-input AND/OR = 1, XOR = 2, "
               "inverters free")


def unit_phrase(plan: Plan) -> str:
    return plan.unit.phrase(plan.config)


@singledispatch
def headline(plan) -> str:
    """The unit in a few words, for the command line."""
    return f"{plan.width}-bit {plan.config.cell}"


@headline.register(TreePlan)
@headline.register(NativePlan)
def _(plan) -> str:
    return unit_phrase(plan)


def structure_phrase(plan: Plan) -> str:
    return plan.structure()


def slice_range(s) -> str:
    return f"[{s.msb}:{s.lsb}]"


def manifest(plan: Plan, files: list[str]) -> dict:
    """The machine-readable description of the emitted unit (keys are part of the interface)."""
    c = plan.config
    return {
        "module": c.name,
        "unit": c.unit,
        "generator": {"name": "carrypipe", "version": __version__},
        "latency": plan.latency,
        "pipeline": c.pipeline,
        "reset": {"kind": c.reset, "clears": ("every register" if c.reset_data else
                                               "valid bits" if c.reset != "none" else "nothing")},
        "ports": [{"name": p.name, "direction": p.direction, "width": p.width}
                  for p in plan.ports],
        "slices": [{"lsb": s.lsb, "msb": s.msb, "width": s.width, "cell": s.cell,
                    "wait_before": s.wait_before, "wait_after": s.wait_after,
                    "depth": s.depth, "nodes": s.nodes, "delay": s.delay}
                   for s in plan.stages],
        **stage_entries(plan),
        "registers": plan.registers.as_dict(),
        "delay_model": DELAY_MODEL,
        "config": c.normalized(),
        "files": sorted(files),
    }


@singledispatch
def stage_entries(plan) -> dict:
    return {}


@stage_entries.register
def _(plan: PrefixPlan) -> dict:
    return {"stages": [{"index": s.index, "levels": list(s.levels), "logic": s.logic,
                        "delay": s.delay} for s in plan.stages]}


@stage_entries.register
def _(plan: TreePlan) -> dict:
    t, r = plan.tree, plan.rows
    tree = {"style": plan.config.tree, "levels_per_stage": plan.config.tree_levels_per_stage,
            "counter_levels": plan.counter_levels, "full_adders": t.fa(), "half_adders": t.ha(),
            "heights": list(t.matrix.heights()),
            "levels": [{"level": lv.index, "stage": lv.stage - 1, "target": lv.target,
                        "full_adders": sum(1 for i in lv.counters if t.counters[i].kind == "fa"),
                        "half_adders": sum(1 for i in lv.counters if t.counters[i].kind == "ha"),
                        "height": max(lv.heights, default=0)} for lv in t.levels]}
    adder = None
    if plan.adder is not None:
        adder = {"lsb": r.low, "msb": r.top - 1, "width": r.adder_width,
                 "pipeline": plan.config.pipeline, "cell": plan.config.cell,
                 "carry_out": r.carry_out, "stages": len(plan.adder_stages)}
    return {"tree": tree, "final_adder": adder}


def manifest_text(plan: Plan, files: list[str]) -> str:
    return json.dumps(manifest(plan, files), indent=2, sort_keys=True) + "\n"


def slowest_sentence(plan: Plan) -> str:
    delays = sorted({s.delay for s in plan.stages}, reverse=True)
    slow = plan.slowest
    if len(delays) == 1:
        return f"Every stage has the same unit-gate delay: {slow[0].delay} units."
    tied = [str(s.index) for s in slow]
    which = f"stage {tied[0]}" if len(tied) == 1 else f"stages {', '.join(tied)}"
    return (f"Slowest: {which} at {slow[0].delay} units, {slow[0].delay - delays[1]} more "
            f"than the next slowest ({delays[1]}).")


def report(plan: Plan) -> str:
    """The human report: what was built, its timing and cost, and what to try next."""
    c = plan.config
    lines = [
        f"carrypipe {__version__} — {c.name}",
        "",
        f"Unit      {unit_phrase(plan)}",
        f"Cell      {c.cell}",
        f"Latency   {plan.latency} cycle(s)" + (" (includes the input register)"
                                                 if c.register_inputs else ""),
        f"Timing    {timing_phrase(plan)}",
        f"Reset     {reset_phrase(plan)}",
        "",
        *table(plan),
        "",
        "Register bits",
        *(f"  {kind:<8} {n:>8}" for kind, n in plan.registers.as_dict().items()),
        "",
        slowest_sentence(plan),
        f"Delay model: {DELAY_MODEL}.",
        "",
    ]
    found = tips(plan)
    if found:
        lines += ["If timing fails", *found]
    lines += ["These figures come from a logic model, not from a placed design.", ""]
    return "\n".join(lines)


def _marks(plan: Plan):
    slow = {s.index for s in plan.slowest}
    tie_all = len(slow) == len(plan.stages)
    return lambda s: "  <- slowest" if s.index in slow and not tie_all else ""


@singledispatch
def table(plan) -> list[str]:
    raise TypeError(type(plan).__name__)


@table.register
def _(plan: SlicedPlan) -> list[str]:
    mark = _marks(plan)
    lines = ["Slices (LSB first; delay in the unit-gate model, register to register)",
             f"  {'stage':>5}  {'bits':>13}  {'width':>5}  {'levels':>6}  {'nodes':>6}  "
             f"{'delay':>5}  {'waits':>9}"]
    for s in plan.stages:
        lines.append(f"  {s.index:>5}  {slice_range(s):>13}  {s.width:>5}  {s.depth:>6}  "
                     f"{s.nodes:>6}  {s.delay:>5}  {s.wait_before:>3} / {s.wait_after:<3}"
                     f"{mark(s)}")
    lines.append("  (waits: cycles the operand bits wait before the slice / the result "
                 "bits after)")
    return lines


@table.register
def _(plan: PrefixPlan) -> list[str]:
    c, sch = plan.config, plan.schedule
    mark = _marks(plan)
    what = {"bits": "bits", "chains": f"blocks of {c.block_width} bits",
            "compare": "slices (compared in parallel)"}[sch.flavour]
    net = "a balanced tree" if sch.flavour == "compare" else c.cell
    lines = [f"Prefix network  {net} over {len(sch.widths)} {what}: {sch.network.depth} "
             f"level(s), {sch.network.nodes} nodes",
             f"Stages    {len(plan.stages)}, every one spanning all bits (no skew or deskew)"]
    if sch.flavour == "bits" and 0 < c.local_width < c.width:
        lines.append(f"          within local blocks of {c.local_width} bits, then across them")
    if sch.merged:
        lines.append("          the last prefix level is merged into the sum stage")
    if sch.wired:
        lines.append("          wire registers in front of prefix level(s) "
                     + ", ".join(str(k + 1) for k in sch.wired))
    lines += ["", "Stages (delay in the unit-gate model, register to register)",
              f"  {'stage':>5}  {'levels':>6}  {'nodes':>6}  {'delay':>5}  logic"]
    for s in plan.stages:
        lines.append(f"  {s.index:>5}  {s.depth:>6}  {s.nodes:>6}  {s.delay:>5}  {s.logic}"
                     f"{mark(s)}")
    return lines


@table.register
def _(plan: TreePlan) -> list[str]:
    c, t, r = plan.config, plan.tree, plan.rows
    mark = _marks(plan)
    heights = t.matrix.heights()
    what = (f"{c.operands} operands of {c.width} bits" if c.unit == "sum" else
            f"a {c.width} x {c.width_b} {'Booth radix-4' if c.partial_products == 'booth4' else 'AND'}"
            f" array{' (Baugh-Wooley)' if c.signed and c.partial_products == 'and' else ''}")
    lines = [f"Tree      {c.tree} over {what}: {len(t.matrix.leaves)} dots, height "
             f"{max(heights)}; {plan.counter_levels} counter level(s), {t.fa()} full and "
             f"{t.ha()} half adders",
             "",
             "Tree stages (heights: most dots in a column after the stage; delay in the "
             "unit-gate model)",
             f"  {'stage':>5}  {'levels':>6}  {'height':>6}  {'full':>5}  {'half':>5}  "
             f"{'delay':>5}  logic"]
    for s in plan.tree_stages:
        lines.append(f"  {s.index:>5}  {s.depth:>6}  {max(s.heights):>6}  {s.full:>5}  "
                     f"{s.half:>5}  {s.delay:>5}  {s.logic}{mark(s)}")
    if plan.adder is None:
        return lines + ["", "Final adder  none: the tree leaves at most one dot per column"]
    low = f"; bits {r.low - 1}:0 are finished by the tree" if r.low else ""
    lines += ["", f"Final adder  columns [{r.top - 1}:{r.low}] ({r.adder_width} bits)"
              + (", its carry out is the top bit" if r.carry_out else "") + low]
    view = replace(plan.adder, stages=plan.adder_stages)
    return lines + [f"  {line}" if line else line for line in table(view)]


@table.register
def _(plan: NativePlan) -> list[str]:
    lines = [f"Native    {plan.structure()}", "",
             "Stages (no delay model: synthesis chooses the logic)",
             f"  {'stage':>5}  logic"]
    return lines + [f"  {s.index:>5}  {s.logic}" for s in plan.stages]


def _input_tip(plan: Plan) -> list[str]:
    if plan.config.register_inputs:
        return []
    return ["  - `register_inputs: true` takes the input routing out of the first stage "
            "(one cycle more)."]


@singledispatch
def tips(plan) -> list[str]:
    raise TypeError(type(plan).__name__)


@tips.register
def _(plan: SlicedPlan) -> list[str]:
    """What a sliced unit could still try: only what its config does not do yet."""
    c = plan.config
    slow = plan.slowest
    out = []
    if len(slow) < len(plan.stages) or plan.stages[0].width > 1:
        where = ", ".join(f"{s.index} (bits {bits(s.lsb, s.msb)})" for s in slow)
        out += [f"  - narrow the slowest stage{'s' if len(slow) > 1 else ''}: {where}; use an",
                "    uneven `slices` list or a smaller `slice_width` (one cycle more per extra "
                "slice);"]
    family = cells.STYLES[c.cell].family
    if family != "behavioural":
        out.append("  - `cell: native` lets FPGA synthesis map each slice onto the carry chain;")
    if family != "prefix":
        out.append("  - a prefix cell (kogge-stone, sklansky, ...) shortens the path on ASICs "
                   "and in LUT fabric;")
    if "levels" in plan.unit.modes and plan.unit.result:
        out.append("  - `pipeline: levels` or `blocks` has no triangles: for wide units "
                   "(docs/modes.md);")
    return out + _input_tip(plan)


@tips.register
def _(plan: PrefixPlan) -> list[str]:
    """What a prefix-mode unit could still try: only what its config does not do yet."""
    c, sch = plan.config, plan.schedule
    out = []
    if c.levels_per_stage > 1:
        out.append("  - fewer `levels_per_stage` (1 puts a register after every prefix level);")
    if sch.flavour == "compare":
        return out + ["  - narrower slices (`slice_width`) shorten the first stage's "
                      "comparisons;"] + _input_tip(plan)
    if c.cell in ("kogge-stone", "sklansky"):
        out += ["  - a sparser prefix `cell` (han-carlson, brent-kung) has less wiring and "
                "fan-out;"]
    if c.wire_registers < sch.network.depth:
        out += [f"  - `wire_registers: {c.wire_registers + 1}` adds a register rank in front of "
                "the longest-span", "    level(s): one cycle more, shorter routed nets;"]
    if sch.flavour == "chains" and c.block_width > 1:
        out.append("  - a smaller `block_width` shortens the carry chains of the first stage;")
    moved = plan.moved_input_rank()
    if moved is not None:
        same = ", as now" if moved.latency == plan.latency else ""
        out += ["  - when the operands come straight from registers, `register_inputs: false` "
                "with",
                f"    `wire_registers: {moved.config.wire_registers}` (latency {moved.latency}"
                f"{same}) moves the logic-free rank from the inputs",
                "    into the network, where it measured faster on ECP5 (docs/modes.md)."]
    return out + _input_tip(plan)


@tips.register
def _(plan: TreePlan) -> list[str]:
    """What a carry-save unit could still try: in the tree or in the final adder."""
    c = plan.config
    slow = {s.index for s in plan.slowest}
    out = []
    if any(s.index in slow for s in plan.tree_stages):
        if c.tree_levels_per_stage > 1:
            out.append("  - fewer `tree_levels_per_stage` (1 puts a register rank after every "
                       "counter level);")
        if c.unit == "multiplier" and c.partial_products == "booth4":
            out.append("  - `partial_products: and` forms the partial products with one AND "
                       "each (Booth's selection is deeper);")
    if plan.adder is not None and any(s.index in slow for s in plan.adder_stages):
        view = replace(plan.adder, stages=plan.adder_stages)
        out += [t for t in tips(view) if "register_inputs" not in t]
    other = "wallace" if c.tree == "dadda" else "dadda"
    out.append(f"  - `tree: {other}` (a different counter placement) or `tree: native` (the "
               "operation left to synthesis, DSP blocks allowed);")
    return out + _input_tip(plan)


@tips.register
def _(plan: NativePlan) -> list[str]:
    return (["  - more `native_stages` give the tools more ranks to retime into (when they "
             "retime);", "  - `tree: dadda` or `wallace` builds the counter tree in the fabric "
             "with a register rank per level;"] + _input_tip(plan))
