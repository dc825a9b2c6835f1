"""The plan of a carry-save unit (`unit: sum` or `multiplier`): a counter tree pipelined by
levels, then a final adder of any pipeline mode; or, with `tree: native`, the operation
left to synthesis with register ranks after it.

`TreePlan` owns what the unit shares with every other plan (ports, input register, valid
chain, latency, register words) and nests the final adder's own plan (`SlicedPlan` or
`PrefixPlan`, with `plan.Nest`): its stages follow the tree's, its bit 0 is the first column
the tree leaves two dots in, and its operands are the tree's last rank, `row0` (every
column's first dot) and `row1` (the second, where there is one).  The result bits below
that column are finished by the tree and wait in `<result>_low_<stage>` registers while the
final adder runs.

Timing.  Stage i (counted after the input register) holds `tree_levels_per_stage` counter
levels (a multiplier's partial products count as the first level) and loads its register
rank at the end of cycle i; the final adder's stages follow.  L = tree stages + final
adder stages + [register_inputs].
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import cached_property

from . import reduction, units
from .config import Config
from .header import plural, runs
from .plan import DIRECT_UP_TO, MODES, Nest, Plan, Word

# `prove --method auto` proves a tree directly up to this many partial-product rows and
# result bits (docs/verification.md), compositionally above.
DIRECT_ROWS, DIRECT_BITS = 6, 12


@dataclass(frozen=True)
class TreeStage:
    """One stage of the counter tree (or of a native unit's ranks)."""

    index: int
    lsb: int
    width: int
    cell: str  # the tree (dadda, wallace, native)
    levels: tuple[int, ...]  # counter levels evaluated here (0: the partial products)
    depth: int  # counter levels
    nodes: int  # counters
    delay: int  # unit-gate critical path, register to register
    logic: str
    heights: tuple[int, ...] = ()  # dots per column at the end of the stage
    full: int = 0  # full adders
    half: int = 0  # half adders
    wait_before: int = 0
    wait_after: int = 0

    @property
    def msb(self) -> int:
        return self.lsb + self.width - 1


def _result_width(config: Config) -> int:
    return units.KINDS[config.unit].result_width(config)


@dataclass(frozen=True)
class TreePlan(Plan):
    """A counter tree with a register rank every `tree_levels_per_stage` levels, then the
    final adder (`adder`, nested) on the two rows it leaves."""

    tree: reduction.Tree | None = None
    adder: Plan | None = None

    mode = "tree"
    proof_methods = ("direct", "compositional")

    @cached_property
    def rank_words(self) -> dict[tuple[int, int], tuple[Word, ...]]:
        """The tree's register words by (stage, row): row r of a stage's rank holds each
        column's r-th dot, in runs of columns (`row<r>_stage_<i>`, then `..._<first column>`
        for every further run)."""
        return {(stage, row): tuple(Word("tree", f"row{row}_stage", stage, lsb, last - lsb + 1,
                                         self.edge(stage), position=lsb if n else None)
                                    for n, (lsb, last) in enumerate(found))
                for stage, rank in enumerate(self.tree.ranks)
                for row, found in enumerate(_row_runs(rank))}

    @cached_property
    def low_columns(self) -> tuple[int, ...]:
        """The result bits below the final adder that the tree finished (a dot there)."""
        return tuple(k for k in range(self.rows.low) if self.tree.final[k]) \
            if self.adder is not None else ()

    @cached_property
    def low_words(self) -> dict[int, tuple[Word, ...]]:
        """The registers of those bits beside each stage of the final adder (by the adder's
        stage index): `<result>_low_<stage>`, then `..._<first column>` for further runs."""
        return {s.index: tuple(Word("deskew", f"{self.unit.result}_low",
                                    self.adder.number(s.index), lsb, last - lsb + 1,
                                    self.edge(self.tree.stages + s.index),
                                    position=lsb if n else None)
                               for n, (lsb, last) in enumerate(runs(self.low_columns)))
                for s in self.adder.stages} if self.low_columns else {}

    def row_register(self, stage: int, row: int, column: int) -> str:
        """The name of the register holding the `row`-th dot of `column` after `stage`."""
        return next(w.name for w in self.rank_words[stage, row]
                    if w.lsb <= column < w.lsb + w.width)

    @property
    def result_width(self) -> int:
        return _result_width(self.config)

    def part(self, stage: int) -> str:
        return "tree" if stage < self.tree.stages else "adder"

    @cached_property
    def other_tree(self) -> str | None:
        """The other counter placement (`dadda` or `wallace`) when it builds another tree
        (a 3-operand sum has one level, which both place alike), else None."""
        other = "wallace" if self.config.tree == "dadda" else "dadda"
        tree = self.unit.counter_tree(replace(self.config, tree=other))
        return other if tree.digest != self.tree.digest else None

    @property
    def rows(self) -> reduction.Rows:
        return self.tree.rows

    @property
    def tree_stages(self) -> tuple:
        return self.stages[:self.tree.stages]

    @property
    def adder_stages(self) -> tuple:
        return self.stages[self.tree.stages:]

    @property
    def numbered_adder(self) -> Plan | None:
        """The final adder's plan with its stages numbered as the unit's (for every text
        that shows them: the header, the report, the manifest)."""
        return None if self.adder is None else replace(self.adder, stages=self.adder_stages)

    @property
    def register_kinds(self) -> tuple[str, ...]:
        """The tree's kind and every kind of the final adder's mode, present or not (a
        unit without a final adder lists them at 0 too)."""
        inner = MODES[self.config.pipeline].register_kinds
        return ("input", "tree", *[k for k in inner if k not in ("input", "control")],
                "control")

    @cached_property
    def words(self) -> tuple[Word, ...]:
        """Every register: the tree's ranks (`row<r>_stage_<i>`, runs of columns holding an
        r-th dot), the finished low result bits waiting for the final adder, and the final
        adder's own words."""
        words = self.io_words()
        for row_words in self.rank_words.values():
            words += row_words
        for low_words in self.low_words.values():
            words += low_words
        if self.adder is not None:
            words += self.adder.words
        return tuple(sorted(words, key=lambda x: (x.edge, x.kind, x.lsb, x.name)))

    def build_netlist(self):
        from . import carrysave

        return carrysave.build(self)

    @property
    def compose_obstacle(self) -> str | None:
        if self.config.reset_data:
            return "reset_data: true"
        if self.adder_width > DIRECT_UP_TO:
            return f"a final adder of {self.adder_width} bits"
        return None

    @property
    def adder_width(self) -> int:
        return self.rows.adder_width

    @property
    def composes_by_default(self) -> bool:
        # The direct proof took 1 s for a 6 x 6 multiplier, 22 s at 8 x 8, more than 300 s
        # at 10 x 10, and 67 s for a sum of 8 operands of 8 bits (docs/verification.md).
        return self.can_compose and (len(self.tree.matrix.rows) > DIRECT_ROWS
                                     or self.result_width > DIRECT_BITS)

    def prove_parts(self, net: dict, module: str, timeout):
        from . import treeproof

        return treeproof.prove_tree(self, net, module, timeout)

    def structure(self) -> str:
        c, t = self.config, self.tree
        tree = (f"{c.tree.capitalize()} tree of {plural(len(self.tree_stages), 'stage')} "
                f"({plural(self.counter_levels, 'counter level')}, "
                f"{counters_phrase(t.fa(), t.ha())})")
        if self.adder is None:
            return tree + ", no final adder (at most one dot left per column)"
        return f"{tree}, then a {self.rows.adder_width}-bit final adder: {self.adder.structure()}"

    @property
    def counter_levels(self) -> int:
        return sum(1 for lv in self.tree.levels if lv.index > 0)

    def layout(self) -> str:
        t = "Tree stages: " + "; ".join(f"{s.index}: {s.logic}" for s in self.tree_stages)
        if self.adder is None:
            return t
        r = self.rows
        return (f"{t}. Final adder on columns [{r.top - 1}:{r.low}]; "
                f"{self.numbered_adder.layout()}")

    def label(self) -> str:
        c = self.config
        per = f"/{c.tree_levels_per_stage}"
        pp = " booth4" if c.partial_products == "booth4" else ""  # a sum's is always "and"
        return f"{c.tree}{per}{pp} + " + (self.adder.label() if self.adder else "none")


@dataclass(frozen=True)
class NativePlan(Plan):
    """`tree: native`: the whole sum or product written as `+` or `*` for synthesis (FPGA
    tools may use DSP blocks), registered, then `native_stages - 1` more register ranks for
    the tools to retime into."""

    mode = "native"
    timed = False  # synthesis chooses the logic: the stages have no unit-gate delay
    # Every kind a sliced tree lists (a native unit reads no `pipeline`), most of them 0.
    register_kinds = ("input", "tree", "stage", "skew", "deskew", "control")

    @property
    def result_width(self) -> int:
        return _result_width(self.config)

    @cached_property
    def words(self) -> tuple[Word, ...]:
        words = self.io_words()
        name = f"{self.unit.result}_stage"
        for s in self.stages:
            words.append(Word("stage", name, s.index, 0, self.result_width, self.edge(s.index)))
        return tuple(sorted(words, key=lambda x: (x.edge, x.kind, x.lsb, x.name)))

    def build_netlist(self):
        from . import carrysave

        return carrysave.build_native(self)

    def structure(self) -> str:
        return (f"`{self.unit.operator}` left to synthesis, then "
                f"{plural(len(self.stages), 'register rank')} for the tools to retime into")

    def layout(self) -> str:
        return "Stages: " + "; ".join(f"{s.index}: {s.logic}" for s in self.stages)

    def label(self) -> str:
        return f"native x{self.config.native_stages}"

    @property
    def compose_obstacle(self) -> str:
        return "tree: native"


def _row_runs(rank) -> list[list[tuple[int, int]]]:
    """For each row r of a rank (the r-th dot of each column), its runs of columns."""
    top = max((len(col) for col in rank), default=0)
    return [runs(k for k, col in enumerate(rank) if len(col) > r) for r in range(top)]


def counters_phrase(full: int, half: int) -> str:
    """`12 full and 3 half adders`, `4 half adders`, `1 full adder`, `no counters`."""
    if not full and not half:
        return "no counters"
    if full and half:
        return f"{full} full and {plural(half, 'half adder')}"
    return plural(full, "full adder") if full else plural(half, "half adder")


def _describe(tree: reduction.Tree, stage: int) -> str:
    parts = []
    for lv in tree.stage_levels(stage):
        if lv.index == 0:
            parts.append("partial products")
            continue
        parts.append(f"level {lv.index} (to height {max(lv.heights)}): "
                     f"{counters_phrase(lv.full, lv.half)}")
    return "; ".join(parts)


def make_tree_plan(config: Config) -> Plan:
    """The plan of a `sum` or `multiplier` config."""
    kind = units.KINDS[config.unit]
    width = kind.result_width(config)
    if config.tree == "native":
        stages = tuple(TreeStage(i, 0, width, "native", (), 0, 0, 0,
                                 f"`{kind.operator}` of the operands"
                                 if i == 0 else "register rank to retime into")
                       for i in range(config.native_stages))
        return NativePlan(config=config, stages=stages)
    tree = kind.counter_tree(config)
    if tree.width != width:  # the dot matrix's arithmetic against the unit's result port
        raise AssertionError(f"a tree of {tree.width} columns for a {width}-bit result")
    stages = []
    for s in range(1, tree.stages + 1):
        levels = tree.stage_levels(s)
        full, half = sum(lv.full for lv in levels), sum(lv.half for lv in levels)
        stages.append(TreeStage(s - 1, 0, width, config.tree,
                                tuple(lv.index for lv in levels),
                                sum(1 for lv in levels if lv.index), full + half,
                                tree.stage_delay(s), _describe(tree, s), levels[-1].heights,
                                full, half))
    rows = tree.rows
    adder = None
    if rows.adder_width:
        inner = replace(config, width=rows.adder_width, carry_in=False,
                        carry_out=rows.carry_out, signed=False, valid=False, enable=False,
                        reset="none", reset_data=False, register_inputs=False)
        nest = Nest(units.FinalAdder(kind.result, tree.flip_carry), rows.low, tree.stages,
                    tree.stages + (1 if config.register_inputs else 0),
                    (rows.adder_width, rows.pairs - rows.low))
        adder = MODES[config.pipeline].make(inner, nest)
        stages += [replace(s, index=tree.stages + s.index) for s in adder.stages]
    return TreePlan(config=config, stages=tuple(stages), tree=tree, adder=adder)
