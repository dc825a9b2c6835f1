"""The plan: everything about a pipelined unit that can be known without HDL.

From a validated `Config` the plan derives the stages, the cycles each operand bit waits
before its stage uses it (input skew) and each result bit waits after (output deskew), the
latency, every register word (what it holds, its bits, the edge that loads it), the register
bits of every kind (counted from those words), and the unit-gate delay of every stage.
Every number that the Verilog header, the manifest, the report, the chart and the tests
show is read from here.

The pipeline mode is a type, chosen once by the config key `pipeline`: `SlicedPlan` cuts the
carry chain into slices with skew and deskew triangles; `PrefixPlan` (`levels`, `blocks`)
pipelines a parallel-prefix network, every stage spanning all bits.  Each owns its builder,
its label in `fit` and the proof methods that apply to it; the report's stage table and tips
are chosen by its type (`report.py`).  What the unit computes is the unit kind's
(`units.py`), read through `plan.unit`.

Timing.  Inputs applied before rising edge n give their results right after edge n+L-1,
with L = (stages) + [register_inputs].  Stage i computes in cycle i (counted after the input
register, if any) and registers its results at the end of it.

Register bits of an adder in slices (closed forms, S slices, slice i starting at bit lsb_i,
lsb_0 = 0; the tests keep them as an oracle for the counts taken from the words):
  stage   = W + (S - 1) + [carry_out]          every sum bit once, one carry between slices
  skew    = 2 * sum_{i=1}^{S-1} (W - lsb_i)    a and b bits above slice i wait until cycle i
  deskew  = sum_{i=1}^{S-1} lsb_i              result bits below slice i travel with it
  input   = [register_inputs] * (2W + [carry_in])
  control = [valid] * L                        the valid bit, delayed like the data
For an even split into S slices of k bits (W = S*k) this gives skew = k*S*(S-1) and
deskew = k*S*(S-1)/2: two triangles, the skew one twice as large because both operands wait.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

from . import cells, positions, schedule, units
from .config import Config
from .header import plural
from .units import Port

DIRECT_UP_TO = 512  # widest adder `prove --method auto` proves directly (docs/verification.md)

__all__ = ["Plan", "SlicedPlan", "PrefixPlan", "Nest", "Slice", "Stage", "Word", "Port",
           "make_plan"]


@dataclass(frozen=True)
class Word:
    """One register word of the unit, as named in the Verilog.

    `family` says what it holds (a_skew, sum_stage, valid, grp_gen, ...), `stage` the slice
    or rank in its name, `position` the first prefix position of a prefix-mode run.  `lsb`
    is the operand/result bit position of the word's bit 0 (a carry sits at the bit above
    its slice), and `edge` the rising edge that loads it, counted from 1 for the first edge
    after the inputs are applied.  Charts, register counts and the netlist are drawn from
    these.
    """

    kind: str  # input, stage, skew, deskew, control; prefix modes: prefix, result, wire;
    # sums and multipliers: tree
    family: str
    stage: int | None
    lsb: int
    width: int
    edge: int
    position: int | None = None
    keep: bool = False  # an intended copy of an equal register: synthesis must keep both

    @property
    def name(self) -> str:
        parts = [self.family]
        if self.stage is not None:
            parts.append(str(self.stage))
        if self.position is not None:
            parts.append(str(self.position))
        return "_".join(parts)


class Registers(dict):
    """Register bits by kind (a dict in a fixed order; `r.skew` reads `r["skew"]`), with the
    total."""

    def __getattr__(self, kind: str) -> int:
        try:
            return self[kind]
        except KeyError:
            raise AttributeError(kind) from None

    @property
    def total(self) -> int:
        return sum(self.values())

    def as_dict(self) -> dict:
        return {**self, "total": self.total}


def count_registers(words, kinds: tuple[str, ...]) -> Registers:
    """Bits per kind from the words: the `kinds` always (0 when absent), then any other."""
    counts = Registers({k: 0 for k in kinds})
    for w in words:
        counts[w.kind] = counts.get(w.kind, 0) + w.width
    return counts


@dataclass(frozen=True)
class Slice:
    """One pipeline stage's run of bits [lsb, msb] and its cell."""

    index: int
    lsb: int
    width: int
    cell: str
    carry_in: bool  # has a chain input: from the previous slice, or the port for slice 0
    carry_out: bool  # its chain bit is registered: for the next slice, or for the port
    wait_before: int  # cycles its operand bits wait in the skew registers
    wait_after: int  # cycles its result bits wait in the deskew registers
    depth: int  # logic levels of its carry network (ripple: width - 1)
    nodes: int  # carry-operator cells in its carry network
    delay: int  # unit-gate critical path, register to register

    @property
    def msb(self) -> int:
        return self.lsb + self.width - 1

    def network(self):
        return cells.STYLES[self.cell].carry_network(self.width)


@dataclass(frozen=True)
class Stage:
    """One stage of a prefix-mode pipeline: it spans every bit and evaluates some levels."""

    index: int  # 0-based, like slices
    lsb: int
    width: int
    cell: str
    levels: tuple[int, ...]  # prefix levels evaluated here (1-based, as in the report)
    depth: int
    nodes: int  # prefix nodes it evaluates (after pruning: only those some output needs)
    delay: int  # unit-gate critical path, register to register
    logic: str
    wait_before: int = 0
    wait_after: int = 0

    @property
    def msb(self) -> int:
        return self.lsb + self.width - 1


@dataclass(frozen=True)
class Nest:
    """Where a plan sits inside an enclosing unit: the final adder of a carry-save tree.

    Its stages run after `cycles_before` cycles (the input register and the tree), its
    registers are numbered after the `stages_before` stages of the tree, its bit 0 is the
    unit's bit `base`, and operand k has `widths[k]` bits from there (the bits above are 0:
    a tree column with one dot left).  The enclosing plan owns the ports, the input
    register and the valid chain."""

    kind: units.Kind
    base: int
    stages_before: int
    cycles_before: int
    widths: tuple[int, ...]


@dataclass(frozen=True)
class Plan:
    """What every pipeline mode offers; `stages` are its slices or prefix stages."""

    config: Config
    stages: tuple
    nest: Nest | None = None  # set for a plan inside an enclosing unit (a final adder)

    mode = ""  # set by each mode
    register_kinds = ()  # kinds the register table always lists
    timed = True  # the stages' `delay` (unit-gate model) describes their logic
    uneven = False  # its split may be made uneven stage by stage (`fit`'s near misses)
    proof_methods = ("direct",)

    @property
    def unit(self) -> units.Kind:
        return self.nest.kind if self.nest else units.KINDS[self.config.unit]

    @property
    def base(self) -> int:
        """The unit's bit position of this plan's bit 0."""
        return self.nest.base if self.nest else 0

    def number(self, index: int) -> int:
        """The unit's stage number of this plan's stage `index` (in names and comments)."""
        return index + (self.nest.stages_before if self.nest else 0)

    def operand_end(self, op: str) -> int:
        """One past the top bit position of operand `op` (the bits above it are 0)."""
        if self.nest is None:
            return self.width
        return self.base + self.nest.widths[self.unit.operands.index(op)]

    @property
    def slices(self) -> tuple:
        return self.stages

    @property
    def width(self) -> int:
        return self.config.width

    @property
    def input_cycles(self) -> int:
        """Cycles before the first stage: the input register (and, nested, the tree)."""
        if self.nest:
            return self.nest.cycles_before
        return 1 if self.config.register_inputs else 0

    @property
    def latency(self) -> int:
        return len(self.stages) + self.input_cycles

    def edge(self, stage: int) -> int:
        """The rising edge that loads the registers of stage `stage` (edges counted from 1,
        the first after the inputs are applied)."""
        return self.input_cycles + stage + 1

    @cached_property
    def ports(self) -> tuple[Port, ...]:
        return tuple(self.unit.ports(self.config))

    def port(self, name: str) -> Port | None:
        return next((p for p in self.ports if p.name == name), None)

    @cached_property
    def registers(self) -> Registers:
        return count_registers(self.words, self.register_kinds)

    @cached_property
    def bits_loaded(self) -> dict[int, int]:
        """Register bits loaded at each rising edge (1..latency; the charts' row counts)."""
        loaded: dict[int, int] = {}
        for w in self.words:
            loaded[w.edge] = loaded.get(w.edge, 0) + w.width
        return loaded

    @property
    def words(self) -> tuple[Word, ...]:
        raise NotImplementedError

    @property
    def slowest(self) -> tuple:
        """Every stage tied for the longest unit-gate path, lowest index first."""
        top = max(s.delay for s in self.stages)
        return tuple(s for s in self.stages if s.delay == top)

    def part(self, stage: int) -> str:
        """Which part of the unit stage `stage` belongs to (the model's delays compare
        within a part only): an adder's stages are all the adder's."""
        return "adder"

    @property
    def next_slowest(self) -> int | None:
        """The longest unit-gate delay below the slowest stages' (None when all tie)."""
        return max((s.delay for s in self.stages if s.delay < self.slowest[0].delay),
                   default=None)

    def moved_input_rank(self) -> "Plan | None":
        """The same unit with its input register spent on a wire rank instead: only some
        levels units take the swap (`PrefixPlan`)."""
        return None

    def data_inputs(self) -> list[Port]:
        """Input ports that carry data (not clk, rst, en)."""
        return [p for p in self.ports if p.direction == "input" and not p.control]

    def operand_inputs(self) -> list[Port]:
        """The data inputs but in_valid: what the input register holds and a vector sets."""
        return [p for p in self.data_inputs() if p.name != "in_valid"]

    def io_words(self) -> list[Word]:
        """The input-register and valid-chain words, the same in every pipeline mode (a
        nested plan has none: the enclosing plan owns them)."""
        c = self.config
        words = []
        if self.nest:
            return words
        if c.register_inputs:
            words += [Word("input", f"{p.name}_in", None, 0, p.width, 1)
                      for p in self.operand_inputs()]
        if c.valid:
            words += [Word("control", "valid", k, 0, 1, k) for k in range(1, self.latency + 1)]
        return words

    def netlist(self):
        """The unit as a structural netlist, built once per plan: the name check, the Verilog
        and the Amaranth component share it (a 256 x 256 multiplier's takes seconds)."""
        return self._netlist

    @cached_property
    def _netlist(self):
        return self.build_netlist()

    def build_netlist(self):
        """The unit as a structural netlist, built anew by the mode's builder (for many
        candidates at once, which should not all stay in memory)."""
        raise NotImplementedError

    @property
    def can_compose(self) -> bool:
        """Whether the compositional proof applies (see `compose.py`)."""
        return self.compose_obstacle is None

    @property
    def compose_obstacle(self) -> str | None:
        """What keeps the compositional proof from this unit, in a few words, or None."""
        if "compositional" not in self.proof_methods:
            return f"pipeline: {self.config.pipeline}"
        if not self.unit.composable:
            return f"unit {self.unit.name!r}"
        return "reset_data: true" if self.config.reset_data else None

    @property
    def composes_by_default(self) -> bool:
        """Whether `prove --method auto` takes the compositional proof: where the direct
        one grows slow (measured: docs/verification.md)."""
        return self.can_compose and self.width > DIRECT_UP_TO

    def prove_parts(self, net: dict, module: str, timeout):
        """The compositional proof's parts for this plan (`compose.Outcome`)."""
        from . import compose

        return compose.prove_slices(self, net, module, timeout)

    def structure(self) -> str:
        """How the unit is cut, in a few words."""
        raise NotImplementedError

    def layout(self) -> str:
        """Its slices or stages, in one line (for the Verilog header)."""
        raise NotImplementedError

    def label(self) -> str:
        """A short name of the structure for `fit` tables and plots."""
        raise NotImplementedError


@dataclass(frozen=True)
class SlicedPlan(Plan):
    """`pipeline: slices`: slice i adds its bits in cycle i; the skew words shrink, the
    deskew words grow."""

    mode = "slices"
    register_kinds = ("input", "stage", "skew", "deskew", "control")
    proof_methods = ("direct", "compositional")
    uneven = True

    def delay_with(self, cell: str, s: Slice) -> int:
        """The unit-gate delay slice `s` would have with `cell` instead (for the report's
        tips; a final adder's slices are numbered after the tree's, so the first and last
        are found by position, not by index)."""
        return self.unit.slice_delay(self.config, cell, s.width, s is self.stages[0],
                                     s is self.stages[-1], s.carry_in, s.carry_out)

    @cached_property
    def words(self) -> tuple[Word, ...]:
        kind, base = self.unit, self.base
        words = self.io_words()
        last = len(self.stages) - 1
        for s in self.stages:
            edge, n = self.edge(s.index), self.number(s.index)
            top = s.index == last
            if kind.result:
                words.append(Word("stage", f"{kind.result}_stage", n, s.lsb, s.width, edge))
            for name in self.chain_families(top):
                words.append(Word("stage", f"{name}_stage", n, s.lsb + s.width, 1, edge))
            if s.index > 0:
                words += [Word("skew", f"{op}_skew", n, s.lsb, self.operand_end(op) - s.lsb,
                               edge - 1)
                          for op in kind.operands if self.operand_end(op) > s.lsb]
                words += [Word("skew", f"{t}_skew", n, 0, 1, edge - 1)
                          for t in kind.travellers]
                if kind.result:
                    words.append(Word("deskew", f"{kind.result}_deskew", n, base, s.lsb - base,
                                      edge))
        return tuple(sorted(words, key=lambda x: (x.edge, x.kind, x.name)))

    def chain_families(self, top: bool) -> tuple[str, ...]:
        """The one-bit stage registers of a slice: the chain handed on (or, for the top
        slice, the result-side outputs it registers)."""
        c, kind = self.config, self.unit
        if not top:
            return kind.chain
        if kind.result is None:  # a comparator's verdicts
            return tuple(kind.output_families(c).values())
        return (kind.chain if c.carry_out else ()) + (("overflow",) if c.signed else ())

    def build_netlist(self):
        from . import slices

        return slices.build(self)

    def build_into(self, frame, sources: dict):
        """Build its stages into an enclosing unit's frame (a tree's final adder); returns
        the output expressions by port name (see `slices.stages`)."""
        from . import slices

        return slices.stages(self, frame, sources)

    def structure(self) -> str:
        return plural(len(self.stages), "slice")

    def layout(self) -> str:
        return "Slices (LSB first): " + " ".join(f"[{s.msb}:{s.lsb}]" for s in self.stages)

    def label(self) -> str:
        split = self.config.slices
        shape = f"{split[0]}x{len(split)}" if len(set(split)) == 1 else "+".join(map(str, split))
        return f"{self.config.cell} {shape}"

    @classmethod
    def make(cls, config: Config, nest: Nest | None = None) -> SlicedPlan:
        """The plan of a `slices` config: its slices, with their waits and unit-gate delays."""
        count = len(config.slices)
        style = cells.STYLES[config.cell]
        kind = nest.kind if nest else units.KINDS[config.unit]
        slices, lsb = [], nest.base if nest else 0
        for index, width in enumerate(config.slices):
            carry_in = index > 0 or kind.has_carry_in(config)
            carry_out = index < count - 1 or kind.has_carry_out(config)
            net = style.carry_network(width)
            slices.append(Slice(
                index=index, lsb=lsb, width=width, cell=config.cell,
                carry_in=carry_in, carry_out=carry_out,
                wait_before=index,
                wait_after=count - 1 - index if kind.result else 0,  # verdicts never wait
                depth=net.depth, nodes=net.nodes,
                delay=kind.slice_delay(config, config.cell, width, index == 0,
                                       index == count - 1, carry_in, carry_out)))
            lsb += width
        return cls(config=config, stages=tuple(slices), nest=nest)


# Register kind of every schedule term kind.
TERM_KIND = {**{k: "prefix" for k in schedule.PREFIX_KINDS},
             **{k: "result" for k in schedule.RESULT_KINDS},
             **{k: "skew" for k in schedule.OPERAND_KINDS}}


@dataclass(frozen=True)
class PrefixPlan(Plan):
    """`pipeline: levels` or `blocks`: a prefix network with a register rank after every
    stage; all bits advance together, so there are no skew or deskew triangles."""

    schedule: schedule.Schedule | None = None
    register_kinds = ("input", "stage", "prefix", "result", "wire", "skew", "deskew", "control")

    @property
    def mode(self) -> str:
        return self.config.pipeline

    @cached_property
    def words(self) -> tuple[Word, ...]:
        """Every register word: per rank, each kind's terms in runs of adjacent bits.

        A word is named `<term kind>_<rank>_<first position>` (rank r is loaded at the end of
        stage r, 1-based; a position is a bit in `levels`, a block in `blocks`); the last rank
        is the output register, `<result>_stage` and `<chain>_stage`.
        """
        first, sch = self.input_cycles, self.schedule
        words = self.io_words()
        kept = sch.kept_ranks()
        for rank in range(1, sch.final):
            runs: dict[str, list[list]] = {}
            for t in sorted(sch.crossing(rank), key=lambda t: (t.kind, t.lsb)):
                kind_runs = runs.setdefault(t.kind, [])
                if kind_runs and kind_runs[-1][0] + kind_runs[-1][1] == t.lsb \
                        and kind_runs[-1][3] == ((t.index, rank) in kept):
                    kind_runs[-1][1] += t.width
                else:
                    kind_runs.append([t.lsb, t.width, t.pos, (t.index, rank) in kept])
            shift = sch.positions.position_offset(self.base)
            for tk, found in runs.items():
                words += [Word(TERM_KIND.get(tk, "wire"), tk, self.number(rank), self.base + lsb,
                               width, first + rank, position=pos + shift, keep=keep)
                          for lsb, width, pos, keep in found]
        edge = first + sch.final
        for name, width, lsb in self.output_registers():
            words.append(Word("stage", name, None, self.base + lsb, width, edge))
        return tuple(sorted(words, key=lambda x: (x.edge, x.kind, x.lsb, x.name)))

    def output_registers(self) -> list[tuple[str, int, int]]:
        """(family, width, lsb from `base`) of the last rank's registers, the unit's outputs."""
        c, kind = self.config, self.unit
        regs = []
        if kind.result:
            regs.append((f"{kind.result}_stage", c.width, 0))
            if c.carry_out:
                regs.append((f"{kind.chain[0]}_stage", 1, c.width))
            if c.signed:
                regs.append(("overflow_stage", 1, c.width))
        else:
            regs += [(f"{n}_stage", 1, c.width) for n in kind.output_families(c).values()]
        return regs

    def build_netlist(self):
        from . import leveled

        return leveled.build(self)

    def build_into(self, frame, sources: dict):
        """Build its stages into an enclosing unit's frame (a tree's final adder); returns
        the output expressions by port name (see `leveled.stages`)."""
        from . import leveled

        return leveled.stages(self, frame, sources)

    def structure(self) -> str:
        return (f"pipeline {self.config.pipeline}, {plural(len(self.stages), 'stage')}, "
                "every stage all bits")

    def layout(self) -> str:
        return "Stages: " + "; ".join(f"{s.index}: {s.logic}" for s in self.stages)

    def label(self) -> str:
        c = self.config
        wired = f" wired {c.wire_registers}" if c.wire_registers else ""
        return f"{c.cell} {self.schedule.positions.label(c)}{wired}"

    @property
    def wire_rank_left(self) -> bool:
        """Whether a network level still has no wire rank in front (`wire_registers` could
        grow by one)."""
        return self.config.wire_registers < self.schedule.network.depth

    def moved_input_rank(self) -> "PrefixPlan | None":
        """The same levels unit with its input register spent on one more wire rank instead
        (the trade measured faster on ECP5; docs/modes.md), or None when it does not apply
        (a tree's final adder reads the tree's last rank, not the unit's inputs; a comparator's
        slices and the blocks mode take no such swap; other plans: `Plan`)."""
        c = self.config
        if self.nest is not None or not isinstance(self.schedule.positions, positions.Bits) \
                or not c.register_inputs or not self.wire_rank_left:
            return None
        return make_plan(c.replaced(register_inputs=False,
                                    wire_registers=c.wire_registers + 1))

    @classmethod
    def make(cls, config: Config, nest: Nest | None = None) -> PrefixPlan:
        """The plan of a `levels` or `blocks` config, from its pruned schedule."""
        kind = nest.kind if nest else units.KINDS[config.unit]
        sch = schedule.make_schedule(config, kind, nest.widths if nest else None)
        base = nest.base if nest else 0
        stages = tuple(Stage(index=st.index - 1, lsb=base, width=config.width, cell=config.cell,
                             levels=tuple(k + 1 for k in st.levels), depth=len(st.levels),
                             nodes=st.nodes, delay=st.delay, logic=st.logic)
                       for st in sch.stages)
        return cls(config=config, stages=stages, nest=nest, schedule=sch)


# The plan type of each pipeline mode; `MODES[mode].make(config, nest)` derives the plan.
MODES = {"slices": SlicedPlan, "levels": PrefixPlan, "blocks": PrefixPlan}


def make_plan(config: Config) -> Plan:
    """Derive the plan of a validated config (the plan type is chosen here, once: a
    carry-save kind's tree, else the pipeline mode)."""
    if units.KINDS[config.unit].tree:
        from .treeplan import make_tree_plan

        return make_tree_plan(config)
    return MODES[config.pipeline].make(config)
