"""Texts about a plan for people and build flows: the report and the manifest.

All figures are read from the plan; nothing here computes a number of its own.  The stage
table and the tips depend on the pipeline mode and are chosen by the plan's type.
"""

from __future__ import annotations

import json
from dataclasses import replace
from functools import singledispatch

from . import __version__, cells, positions, prefix, reset
from .header import (bit_span, bits, plural, reset_phrase, stage_list, timing_phrase,
                     wrapped)
from .plan import MODES, Plan, PrefixPlan, SlicedPlan
from .treeplan import NativePlan, TreePlan, counters_phrase

COLUMNS = 92  # the report's lines wrap here
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
        "pipeline": c.pipeline,  # (null with `tree: native`: `stage_entries`)
        "reset": {"kind": c.reset, "clears": ("every register" if c.reset_data else
                                               "valid bits" if c.reset != "none" else "nothing"),
                  **({"port": reset.of(c).name, "active": c.reset_active}
                     if c.reset != "none" else {})},
        "ports": port_entries(plan),
        "slices": [{"lsb": s.lsb, "msb": s.msb, "width": s.width, "cell": s.cell,
                    "wait_before": s.wait_before, "wait_after": s.wait_after,
                    **{key: getattr(s, key) if plan.timed else None
                       for key in ("depth", "nodes", "delay")}}
                   for s in plan.stages],
        **stage_entries(plan),
        "registers": plan.registers.as_dict(),
        "delay_model": DELAY_MODEL,
        "config": c.normalized(),
        "files": sorted(files),
    }


def port_entries(plan: Plan) -> list[dict]:
    """The manifest's `ports`: name, direction and width, in the documented order."""
    return [{"name": p.name, "direction": p.direction, "width": p.width} for p in plan.ports]


@singledispatch
def stage_entries(plan) -> dict:
    return {}


@stage_entries.register
def _(plan: PrefixPlan) -> dict:
    return {"stages": [{"index": s.index, "levels": list(s.levels), "logic": s.logic,
                        "delay": s.delay} for s in plan.stages]}


@stage_entries.register
def _(plan: NativePlan) -> dict:
    # Synthesis builds the operation: no tree, no final adder, no pipeline mode read.
    return {"tree": None, "final_adder": None, "pipeline": None}


@stage_entries.register
def _(plan: TreePlan) -> dict:
    t, r = plan.tree, plan.rows
    tree = {"style": plan.config.tree, "levels_per_stage": plan.config.tree_levels_per_stage,
            "counter_levels": plan.counter_levels, "full_adders": t.fa(), "half_adders": t.ha(),
            "heights": list(t.matrix.heights()),
            "levels": [{"level": lv.index, "stage": lv.stage - 1, "target": lv.target,
                        "full_adders": lv.full, "half_adders": lv.half,
                        "height": max(lv.heights, default=0)} for lv in t.levels]}
    if plan.adder is None:  # a prefix mode still lists its (no) stages, like an adder's
        prefix_mode = MODES[plan.config.pipeline] is PrefixPlan
        return {"tree": tree, "final_adder": None, **({"stages": []} if prefix_mode else {})}
    adder = {"lsb": r.low, "msb": r.top - 1, "width": r.adder_width,
             "pipeline": plan.config.pipeline, "cell": plan.config.cell,
             "carry_out": r.carry_out, "stages": len(plan.adder_stages)}
    # The final adder's stages (numbered as the unit's) in `stages`, as its mode lists them.
    return {"tree": tree, "final_adder": adder,
            **stage_entries(plan.numbered_adder)}


def manifest_text(plan: Plan, files: list[str]) -> str:
    return json.dumps(manifest(plan, files), indent=2, sort_keys=True) + "\n"


def stages_phrase(stages) -> str:
    """`stage 3`, `stages 0, 2`: every one named."""
    indices = [s.index for s in stages]
    return f"{'stage' if len(indices) == 1 else 'stages'} {stage_list(indices)}"


def slowest_sentence(plan: Plan) -> str:
    slow, runner_up = plan.slowest, plan.next_slowest
    if len(plan.stages) == 1:
        return f"One stage: {plural(slow[0].delay, 'unit')}."
    if runner_up is None:
        return f"Every stage has the same unit-gate delay: {plural(slow[0].delay, 'unit')}."
    return (f"Slowest: {stages_phrase(slow)} at {plural(slow[0].delay, 'unit')}, "
            f"{slow[0].delay - runner_up} more than the next slowest ({runner_up}).")


def report(plan: Plan) -> str:
    """The human report: what was built, its timing and cost, and what to try next."""
    c = plan.config
    lines = [
        f"carrypipe {__version__} — {c.name}",
        "",
        f"Unit      {unit_phrase(plan)}",
        f"Cell      {c.cell}",
        f"Latency   {plural(plan.latency, 'cycle')}" + (" (includes the input register)"
                                                        if c.register_inputs else ""),
        *_wrapped(f"Timing    {timing_phrase(plan)}", rest=" " * 10),
        *_wrapped(f"Reset     {reset_phrase(plan)}", rest=" " * 10),
        "",
        *table(plan),
        "",
        "Register bits",
        *(f"  {kind:<8} {n:>8}" for kind, n in plan.registers.as_dict().items()
          if n or kind == "total"),
        "",
        *((*_wrapped(slowest_sentence(plan)), *_wrapped(f"Delay model: {DELAY_MODEL}."), "")
          if plan.timed else ()),
    ]
    found = tips(plan)
    if found:
        if found[-1].endswith(";"):  # the tips are one list: the last one ends it
            found[-1] = found[-1][:-1] + "."
        lines += ["If timing fails", *found]
    if plan.timed:
        lines.append("The stage delays above come from the unit-gate model, not from a placed "
                     "design.")
    lines.append("")
    return "\n".join(lines)


def _marks(plan: Plan):
    """The `<- slowest` mark of a stage row: every stage of the unit ranked together (a
    carry-save unit's final adder against the tree too), none when all tie."""
    slow = {s.index for s in plan.slowest}
    tie_all = len(slow) == len(plan.stages)
    return lambda s: "  <- slowest" if s.index in slow and not tie_all else ""


@singledispatch
def table(plan, mark=None) -> list[str]:
    """The stage table; `mark` (of the enclosing unit, for a nested final adder) marks the
    slowest rows, by default `_marks(plan)`."""
    raise TypeError(type(plan).__name__)


@table.register
def _(plan: SlicedPlan, mark=None) -> list[str]:
    mark = mark or _marks(plan)
    lines = ["Slices (LSB first; delay in the unit-gate model, register to register)",
             f"  {'stage':>5}  {'bits':>13}  {'width':>5}  {'levels':>6}  {'nodes':>6}  "
             f"{'delay':>5}  {'waits':>9}"]
    result = plan.unit.result  # a comparator hands its verdicts on: no result waits
    for s in plan.stages:
        after = s.wait_after if result else "–"
        lines.append(f"  {s.index:>5}  {slice_range(s):>13}  {s.width:>5}  {s.depth:>6}  "
                     f"{s.nodes:>6}  {s.delay:>5}  {s.wait_before:>3} / {after:<3}"
                     f"{mark(s)}".rstrip())
    lines.append("  (waits: cycles the operand bits wait before the slice / the "
                 + (f"{result} bits after)" if result else "verdicts never wait)"))
    return lines


@singledispatch
def _network(pos, plan: PrefixPlan) -> tuple[str, list[str]]:
    """The report's network line and the notes below it, by what a position is (one of the
    `positions` types)."""
    raise TypeError(f"no network lines for {type(pos).__name__}")


def _network_line(head: str, what: str, tail: str, plan: PrefixPlan, nodes: int) -> str:
    """`<head> over <n> <what>s<tail>: <depth> levels, <nodes> nodes`."""
    sch = plan.schedule
    return (f"{head} over {plural(len(sch.widths), what)}{tail}: "
            f"{plural(sch.network.depth, 'level')}, {plural(nodes, 'node')}")


@_network.register
def _(pos: positions.Bits, plan: PrefixPlan) -> tuple[str, list[str]]:
    c, sch = plan.config, plan.schedule
    notes = []
    if prefix.has_local_blocks(c.local_width, c.width):
        notes.append(f"          within local blocks of {c.local_width} bits, then across them")
        if c.carry_increment:
            notes.append("          carry increment: a block's bits wait for its carry with "
                         "their sums for carry-in 0")
    if sch.merged:
        notes.append("          the last prefix level is merged into the sum stage")
    return _network_line(f"Prefix network  {c.cell}", "bit", "", plan, sch.network.nodes), notes


@_network.register
def _(pos: positions.Blocks, plan: PrefixPlan) -> tuple[str, list[str]]:
    c, widths = plan.config, plan.schedule.widths
    top = f" (the top one {widths[-1]})" if widths[-1] != c.block_width else ""
    return _network_line(f"Prefix network  {c.cell}", "block",
                         f" of {plural(c.block_width, 'bit')}{top}", plan,
                         plan.schedule.network.nodes), []


@_network.register
def _(pos: positions.Slices, plan: PrefixPlan) -> tuple[str, list[str]]:
    # What is left of the network is the stages' kept nodes.
    line = _network_line("Verdict tree    a balanced tree", "slice", " (compared in parallel)",
                         plan, sum(s.nodes for s in plan.stages))
    merged = ["          the last tree level is merged into the verdict stage"]
    return line, merged if plan.schedule.merged else []


@table.register
def _(plan: PrefixPlan, mark=None) -> list[str]:
    sch = plan.schedule
    mark = mark or _marks(plan)
    head, notes = _network(sch.positions, plan)
    lines = [head, f"Stages    {len(plan.stages)}, every one spanning all bits (no skew or "
             "deskew triangles)", *notes]
    if sch.wired:
        lines.append("          wire registers in front of prefix "
                     + ("level " if len(sch.wired) == 1 else "levels ")
                     + ", ".join(str(k + 1) for k in sch.wired))
    lines += ["", "Stages (delay in the unit-gate model, register to register)",
              f"  {'stage':>5}  {'levels':>6}  {'nodes':>6}  {'delay':>5}  logic"]
    for s in plan.stages:
        lines.append(f"  {s.index:>5}  {s.depth:>6}  {s.nodes:>6}  {s.delay:>5}  {s.logic}"
                     f"{mark(s)}")
    return lines


@table.register
def _(plan: TreePlan, mark=None) -> list[str]:
    c, t, r = plan.config, plan.tree, plan.rows
    mark = _marks(plan)
    heights = t.matrix.heights()
    lines = _wrapped(f"{c.tree.capitalize()} over {plan.unit.tree_phrase(c)}: "
                     f"{plural(len(t.matrix.leaves), 'dot')}, height {max(heights)}; "
                     f"{plural(plan.counter_levels, 'counter level')}, "
                     f"{counters_phrase(t.fa(), t.ha())}", "Tree      ", " " * 10)
    lines += ["",
              "Tree stages (heights: most dots in a column after the stage; delay in the "
              "unit-gate model)",
              f"  {'stage':>5}  {'levels':>6}  {'height':>6}  {'full':>5}  {'half':>5}  "
              f"{'delay':>5}  logic"]
    for s in plan.tree_stages:
        lines.append(f"  {s.index:>5}  {s.depth:>6}  {max(s.heights):>6}  {s.full:>5}  "
                     f"{s.half:>5}  {s.delay:>5}  {s.logic}{mark(s)}")
    if plan.adder is None:
        return lines + ["", "Final adder  none: the tree leaves at most one dot per column"]
    low = (f"; {'bit' if r.low == 1 else 'bits'} {bits(0, r.low - 1)} "
           f"{'is' if r.low == 1 else 'are'} finished by the tree" if r.low else "")
    lines += [""] + _wrapped(
        f"columns [{r.top - 1}:{r.low}] ({r.adder_width} bits)"
        + (f", its carry out{', complemented,' if t.flip_carry else ''} is the top bit"
           if r.carry_out else "") + low, "Final adder  ", " " * 13)
    view = plan.numbered_adder
    return lines + [f"  {line}" if line else line for line in table(view, mark)]


@table.register
def _(plan: NativePlan, mark=None) -> list[str]:
    lines = [f"Native    {plan.structure()}", "",
             "Stages (no delay model: synthesis chooses the logic)",
             f"  {'stage':>5}  logic"]
    return lines + [f"  {s.index:>5}  {s.logic}" for s in plan.stages]


def _wrapped(text: str, first: str = "", rest: str = "") -> list[str]:
    """`text` as report lines of at most COLUMNS characters after the indents given."""
    return wrapped(text, first, rest, COLUMNS)


def _tip(text: str) -> list[str]:
    """One tip as report lines: a dash, then wrapped lines."""
    return _wrapped(text, "  - ", "    ")


def _input_tip(plan: Plan) -> list[str]:
    if plan.config.register_inputs:
        return []
    return _tip("`register_inputs: true` takes the input routing out of the first stage (one "
                "cycle more).")


@singledispatch
def tips(plan) -> list[str]:
    raise TypeError(type(plan).__name__)


@tips.register
def _(plan: SlicedPlan) -> list[str]:
    """What a sliced unit could still try: only what its config does not do yet, naming
    every tied slowest stage."""
    c, kind = plan.config, plan.unit
    slow = plan.slowest
    more = "one cycle more per extra slice"
    out = []
    if len(plan.stages) == 1 and c.width > 1:
        out += _tip(f"cut the unit into slices (`slice_width` or `slices`): {more};")
    elif len(slow) == len(plan.stages) and slow[0].width > 1:
        every = "every slice of the final adder ties" if plan.nest else "every stage ties"
        out += _tip(f"{every} at {plural(slow[0].delay, 'unit')}: a smaller `slice_width` "
                    f"narrows them all ({more});")
    elif any(s.width > 1 for s in slow):
        if len(slow) <= 4:
            where = ", ".join(f"{s.index} ({bit_span(s.lsb, s.msb)})" for s in slow)
        else:
            widths = sorted({s.width for s in slow})
            each = f"{widths[0]} bits each" if len(widths) == 1 else "bits " + "/".join(
                map(str, widths))
            where = f"{stage_list(s.index for s in slow)} ({each})"
        out += _tip(f"narrow the slowest {'stages' if len(slow) > 1 else 'stage'} {where}: an "
                    f"uneven `slices` list, or a smaller `slice_width` ({more});")
    family = cells.STYLES[c.cell].family
    if family != "behavioural":
        out += _tip("`cell: native` lets FPGA synthesis map each slice onto its carry chain;")
    faster = _faster_cells(plan)
    if faster and family != "prefix":
        out += _tip(f"a prefix cell ({', '.join(faster[:2])}, ...) shortens the slowest path "
                    "on ASICs and in LUT fabric;")
    elif faster:
        out += _tip(f"`cell: {faster[0]}` has a shorter path than {c.cell} in the slowest "
                    f"{'stages' if len(slow) > 1 else 'stage'};")
    others = [m for m in kind.modes if m != "slices"] if c.width > 1 else []
    if others:
        out += _tip("`pipeline: " + "` or `".join(others) + f"` {kind.prefix_gain} "
                    "(docs/modes.md);")
    return out + _input_tip(plan)


def _faster_cells(plan: SlicedPlan) -> list[str]:
    """Prefix cells with a shorter unit-gate path than the config's in every slowest stage,
    fastest first."""
    slow = plan.slowest

    def worst(name):
        return max(plan.delay_with(name, s) for s in slow)

    found = [n for n in cells.PREFIX_STYLES if n != plan.config.cell
             and worst(n) < slow[0].delay]
    return sorted(found, key=lambda n: (worst(n), n))


@tips.register
def _(plan: PrefixPlan) -> list[str]:
    """What a prefix-mode unit could still try: only what its config does not do yet,
    naming every slowest stage a tip would shorten."""
    c, sch = plan.config, plan.schedule
    slow = plan.slowest
    out = []
    deep = [s for s in slow if s.depth > 1]
    if deep:
        out += _tip(f"fewer `levels_per_stage` (now {c.levels_per_stage}) splits the prefix "
                    f"levels of {stages_phrase(deep)} over more stages;")
    # A tree's final adder is numbered as the unit's: its first stage follows the tree's.
    first = slow[0].index == plan.stages[0].index
    return out + _position_tips(sch.positions, plan, first)


@singledispatch
def _position_tips(pos, plan: PrefixPlan, first: bool) -> list[str]:
    """The tips a prefix-mode unit has by what a position is (one of the `positions`
    types), the input register's last; `first`: stage 0 is among the slowest."""
    raise TypeError(f"no tips for {type(pos).__name__}")


@_position_tips.register
def _(pos: positions.Bits, plan: PrefixPlan, first: bool) -> list[str]:
    c = plan.config
    out = _network_tips(plan)
    if prefix.has_local_blocks(c.local_width, c.width) and not c.carry_increment:
        out += _tip("`carry_increment: true` lets each bit of a local block wait for the "
                    "block's carry with two bits instead of three (its sum for carry-in 0 "
                    "and a propagate): fewer flip-flops, measured faster at 256 bits on ECP5, "
                    "not at 64 or 128 (docs/modes.md);")
    moved = plan.moved_input_rank()
    if moved is not None:
        same = ", as now" if moved.latency == plan.latency else ""
        out += _tip("when the operands come straight from registers, `register_inputs: false` "
                    f"with `wire_registers: {moved.config.wire_registers}` (latency "
                    f"{moved.latency}{same}) moves the logic-free rank from the inputs into "
                    "the network, where it measured faster on ECP5 (docs/modes.md).")
    if plan.wire_rank_left:
        return out  # the wire-rank tip: one cycle more too, and measured faster (ECP5)
    return out + _input_tip(plan)


@_position_tips.register
def _(pos: positions.Blocks, plan: PrefixPlan, first: bool) -> list[str]:
    c = plan.config
    out = []
    if c.block_width > 1 and first:
        out += _tip(f"a smaller `block_width` (now {c.block_width}) shortens the carry chains "
                    f"of stage {plan.stages[0].index};")
    return out + _network_tips(plan) + _input_tip(plan)


@_position_tips.register
def _(pos: positions.Slices, plan: PrefixPlan, first: bool) -> list[str]:
    if first and max(plan.schedule.widths) > 1:  # a comparator: never a final adder
        return _tip("narrower slices (`slice_width` or `slices`) shorten the comparisons of "
                    "stage 0;") + _input_tip(plan)
    return _input_tip(plan)


def _network_tips(plan: PrefixPlan) -> list[str]:
    """Tips on the network of an arithmetic unit: a sparser cell, one more wire rank."""
    c, out = plan.config, []
    if cells.STYLES[c.cell].dense and plan.schedule.network.depth > 1:
        out += _tip(f"a sparser prefix `cell` ({', '.join(cells.SPARSE_STYLES)}) has less "
                    "wiring and fan-out;")
    if plan.wire_rank_left:
        which = "one more long-span level" if c.wire_registers else "the longest-span level"
        out += _tip(f"`wire_registers: {c.wire_registers + 1}` puts a logic-free register "
                    f"rank in front of {which}: one cycle more, shorter routed nets;")
    return out


@tips.register
def _(plan: TreePlan) -> list[str]:
    """What a carry-save unit could still try: in the tree or in the final adder."""
    c = plan.config
    slow = {s.index for s in plan.slowest}
    out = []
    if any(s.index in slow for s in plan.tree_stages):
        if c.tree_levels_per_stage > 1:
            out += _tip("fewer `tree_levels_per_stage` (1 puts a register rank after every "
                        "counter level);")
        if c.partial_products == "booth4":  # a sum's is always "and"
            out += _tip("`partial_products: and` forms each partial product with one AND "
                        "(Booth's selection is deeper);")
    if plan.adder is not None and any(s.index in slow for s in plan.adder_stages):
        # The final adder's own tips (its input register is the tree's last rank).
        inner = replace(plan.adder.config, register_inputs=True)
        out += tips(replace(plan.numbered_adder, config=inner))
    other = f"`tree: {plan.other_tree}` (another counter placement) or " \
        if plan.other_tree else ""
    out += _tip(f"{other}`tree: native` (the operation left to synthesis, DSP blocks "
                "allowed);")
    return out + _input_tip(plan)


@tips.register
def _(plan: NativePlan) -> list[str]:
    return (_tip("more `native_stages` give the tools more ranks to retime into (where they "
                 "retime);")
            + _tip("`tree: dadda` or `wallace` builds the counter tree in the fabric, with "
                   "register ranks between its counter levels (`tree_levels_per_stage`);")
            + _input_tip(plan))
