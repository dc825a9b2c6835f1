"""The plan: everything about a pipelined unit that can be known without HDL.

From a validated `Config` the plan derives the slices, the cycles each operand bit waits
before its slice adds it (input skew) and each result bit waits after (output deskew), the
latency, the register bits of every kind, and the unit-gate delay of every stage.  Every
number that the Verilog header, the manifest, the report, the chart and the tests show is
read from here.

Timing.  Inputs applied before rising edge n give their results right after edge n+L-1,
with L = S (+1 with `register_inputs`) for S slices.  Slice i adds its bits in cycle i
(counted after the input register, if any) and registers its sum and carry at the end of it.

Register bits (closed forms, S slices, slice i starting at bit lsb_i, lsb_0 = 0):
  stage   = W + (S - 1) + [carry_out]          every sum bit once, one carry between slices
  skew    = 2 * sum_{i=1}^{S-1} (W - lsb_i)    a and b bits above slice i wait until cycle i
  deskew  = sum_{i=1}^{S-1} lsb_i              result bits below slice i travel with it
  input   = [register_inputs] * (2W + [carry_in])
  control = [valid] * L                        the valid bit, delayed like the data
For an even split into S slices of k bits (W = S*k) this gives skew = k*S*(S-1) and
deskew = k*S*(S-1)/2: two triangles, the skew one twice as large because both operands wait.

The prefix modes (`pipeline: levels` or `blocks`) are planned by `schedule.py` instead: a
`PrefixPlan` whose stages each span every bit, so L = (stages) (+1 with `register_inputs`),
and whose register bits are exact counts from the pruned schedule (see there).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

from . import prefix, schedule
from .config import PREFIX_CELLS, Config


@dataclass(frozen=True)
class Slice:
    """One pipeline stage's run of bits [lsb, msb] and its adder cell."""

    index: int
    lsb: int
    width: int
    cell: str
    carry_in: bool  # has a carry input: from the previous slice, or `cin` for slice 0
    carry_out: bool  # its carry is registered: for the next slice, or as `cout`
    wait_before: int  # cycles its operand bits wait in the skew registers
    wait_after: int  # cycles its result bits wait in the deskew registers
    depth: int  # logic levels of its carry network (ripple: width - 1)
    nodes: int  # carry-operator cells in its carry network
    delay: int  # unit-gate critical path, register to register

    @property
    def msb(self) -> int:
        return self.lsb + self.width - 1

    def network(self) -> prefix.Network:
        """The carry network that the cell style implies (ripple and native: serial)."""
        style = self.cell if self.cell in PREFIX_CELLS else "serial"
        return prefix.network(style, self.width)


@dataclass(frozen=True)
class Registers:
    """Register bit counts by kind."""

    input: int
    stage: int
    skew: int
    deskew: int
    control: int
    # Prefix modes only (None otherwise): group terms and the bit g/p feeding them, result
    # bits on their way to the output (block sums, finished sum bits), wire-register copies.
    prefix: int | None = None
    result: int | None = None
    wire: int | None = None

    @property
    def total(self) -> int:
        return (self.input + self.stage + self.skew + self.deskew + self.control
                + (self.prefix or 0) + (self.result or 0) + (self.wire or 0))

    def as_dict(self) -> dict:
        extra = {k: v for k, v in (("prefix", self.prefix), ("result", self.result),
                                   ("wire", self.wire)) if v is not None}
        return {"input": self.input, "stage": self.stage, **extra, "skew": self.skew,
                "deskew": self.deskew, "control": self.control, "total": self.total}


@dataclass(frozen=True)
class Word:
    """One register word of the unit, as named in the Verilog.

    `lsb` is the operand/result bit position of the word's bit 0 (a carry sits at the bit
    above its slice), and `edge` the rising edge that loads it, counted from 1 for the first
    edge after the inputs are applied.  Charts and register counts are drawn from these.
    """

    kind: str  # input, stage, skew, deskew, control; prefix modes: prefix, result, wire
    name: str
    lsb: int
    width: int
    edge: int


@dataclass(frozen=True)
class Port:
    name: str
    direction: str  # "input" or "output"
    width: int
    meaning: str


@dataclass(frozen=True)
class Plan:
    config: Config
    slices: tuple[Slice, ...]

    @property
    def width(self) -> int:
        return self.config.width

    @property
    def input_cycles(self) -> int:
        return 1 if self.config.register_inputs else 0

    @property
    def latency(self) -> int:
        return len(self.slices) + self.input_cycles

    @cached_property
    def registers(self) -> Registers:
        c, w = self.config, self.width
        inner = self.slices[1:]
        return Registers(
            input=(2 * w + int(c.carry_in)) if c.register_inputs else 0,
            stage=w + len(inner) + int(c.carry_out),
            skew=2 * sum(w - s.lsb for s in inner),
            deskew=sum(s.lsb for s in inner),
            control=self.latency if c.valid else 0,
        )

    @cached_property
    def words(self) -> tuple[Word, ...]:
        """Every register word, by the edge that loads it (see the module docstring)."""
        w, first = self.width, self.input_cycles
        words = list(self.io_words())
        for s in self.slices:
            edge = first + s.index + 1
            words.append(Word("stage", f"sum_stage_{s.index}", s.lsb, s.width, edge))
            if s.carry_out:
                words.append(Word("stage", f"carry_stage_{s.index}", s.lsb + s.width, 1, edge))
            if s.index > 0:
                words += [Word("skew", f"{op}_skew_{s.index}", s.lsb, w - s.lsb, edge - 1)
                          for op in ("a", "b")]
                words.append(Word("deskew", f"sum_deskew_{s.index}", 0, s.lsb, edge))
        return tuple(sorted(words, key=lambda x: (x.edge, x.kind, x.name)))

    def io_words(self) -> list[Word]:
        """The input-register and valid-chain words, the same in every pipeline mode."""
        c, w = self.config, self.width
        words = []
        if c.register_inputs:
            words += [Word("input", "a_in", 0, w, 1), Word("input", "b_in", 0, w, 1)]
            if c.carry_in:
                words.append(Word("input", "cin_in", 0, 1, 1))
        if c.valid:
            words += [Word("control", f"valid_{k}", 0, 1, k) for k in range(1, self.latency + 1)]
        return words

    @property
    def slowest(self) -> Slice:
        """The stage with the longest unit-gate path (the lowest index on a tie)."""
        return max(self.slices, key=lambda s: (s.delay, -s.index))

    @cached_property
    def ports(self) -> tuple[Port, ...]:
        c, w = self.config, self.width
        ports = [Port("clk", "input", 1, "clock; every register updates on its rising edge")]
        if c.reset == "sync":
            ports.append(Port("rst", "input", 1, "synchronous reset of the valid bits only"))
        if c.enable:
            ports.append(Port("en", "input", 1, "clock enable: when low every register holds"))
        ports += [Port("a", "input", w, "first operand"), Port("b", "input", w, "second operand")]
        if c.carry_in:
            ports.append(Port("cin", "input", 1, "carry into bit 0"))
        if c.valid:
            ports.append(Port("in_valid", "input", 1, "marks a, b as valid"))
        ports.append(Port("sum", "output", w, f"(a + b{' + cin' if c.carry_in else ''}) mod 2^{w}"))
        if c.carry_out:
            ports.append(Port("cout", "output", 1, "carry out of the top bit"))
        if c.valid:
            ports.append(Port("out_valid", "output", 1, "in_valid, delayed by the latency"))
        return tuple(ports)


@dataclass(frozen=True)
class Stage:
    """One stage of a prefix-mode pipeline: it spans every bit and evaluates some prefix levels.

    It offers the attributes of `Slice` that reports and manifests read (lsb, width, cell,
    depth, nodes, delay, waits: none, since all bits advance together).
    """

    index: int  # 0-based, like slices
    lsb: int
    width: int
    cell: str
    levels: tuple[int, ...]  # prefix levels evaluated here (1-based, as in the report)
    depth: int  # prefix levels evaluated here
    nodes: int  # prefix nodes of those levels (before pruning)
    delay: int  # unit-gate critical path, register to register
    logic: str
    wait_before: int = 0
    wait_after: int = 0

    @property
    def msb(self) -> int:
        return self.lsb + self.width - 1


# Register kind of every schedule term kind.
TERM_KIND = {**{k: "prefix" for k in schedule.PREFIX_KINDS},
             **{k: "result" for k in schedule.RESULT_KINDS}}


@dataclass(frozen=True)
class PrefixPlan(Plan):
    """The plan of a `levels` or `blocks` unit; `slices` holds its stages (see `Stage`)."""

    schedule: schedule.Schedule | None = None

    @property
    def stages(self) -> tuple[Stage, ...]:
        return self.slices

    @cached_property
    def registers(self) -> Registers:
        words = self.words
        bits = {kind: sum(x.width for x in words if x.kind == kind)
                for kind in ("input", "stage", "prefix", "result", "wire", "control")}
        return Registers(skew=0, deskew=0, **bits)

    @cached_property
    def words(self) -> tuple[Word, ...]:
        """Every register word: per rank, each kind's terms in runs of adjacent bits.

        A word is named `<term kind>_<rank>_<first position>` (rank r is loaded at the end of
        stage r, 1-based; a position is a bit in `levels`, a block in `blocks`); the last rank
        is the output register, `sum_stage` and `carry_stage`.
        """
        c, w, first, sch = self.config, self.width, self.input_cycles, self.schedule
        words = self.io_words()
        for rank in range(1, sch.final):
            runs: dict[str, list[list]] = {}
            for t in sorted(sch.crossing(rank), key=lambda t: (t.kind, t.lsb)):
                kind_runs = runs.setdefault(t.kind, [])
                if kind_runs and kind_runs[-1][0] + kind_runs[-1][1] == t.lsb:
                    kind_runs[-1][1] += t.width
                else:
                    kind_runs.append([t.lsb, t.width, t.pos])
            for kind, found in runs.items():
                words += [Word(TERM_KIND.get(kind, "wire"), f"{kind}_{rank}_{pos}", lsb, width,
                               first + rank) for lsb, width, pos in found]
        words.append(Word("stage", "sum_stage", 0, w, first + sch.final))
        if c.carry_out:
            words.append(Word("stage", "carry_stage", w, 1, first + sch.final))
        return tuple(sorted(words, key=lambda x: (x.edge, x.kind, x.lsb, x.name)))


def make_prefix_plan(config: Config) -> PrefixPlan:
    """The plan of a `levels` or `blocks` config, from its pruned schedule."""
    sch = schedule.make_schedule(config)
    stages = tuple(Stage(index=st.index - 1, lsb=0, width=config.width, cell=config.cell,
                         levels=tuple(k + 1 for k in st.levels), depth=len(st.levels),
                         nodes=st.nodes, delay=st.delay, logic=st.logic)
                   for st in sch.stages)
    return PrefixPlan(config=config, slices=stages, schedule=sch)


def make_plan(config: Config) -> Plan:
    """Derive the plan of a validated config."""
    if config.pipeline != "slices":
        return make_prefix_plan(config)
    count = len(config.slices)
    slices, lsb = [], 0
    for index, width in enumerate(config.slices):
        carry_in = index > 0 or config.carry_in
        carry_out = index < count - 1 or config.carry_out
        style = config.cell if config.cell in PREFIX_CELLS else "serial"
        net = prefix.network(style, width)
        slices.append(Slice(
            index=index, lsb=lsb, width=width, cell=config.cell,
            carry_in=carry_in, carry_out=carry_out,
            wait_before=index, wait_after=count - 1 - index,
            depth=net.depth, nodes=net.nodes,
            delay=prefix.critical_path(net, carry_in, carry_out)))
        lsb += width
    return Plan(config=config, slices=tuple(slices))
