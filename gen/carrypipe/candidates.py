"""Which splits `fit` tries, in which order, and which one it picks: pure functions.

Candidates are config variants made with the public config API (`config.from_mapping` on a
normalized config), so every candidate is validated like a user's file.  Each pipeline mode
contributes a generator to `GENERATORS`; `generate` runs those of the modes asked for, with
the cell styles asked for, and `distinct` keeps one candidate per circuit (`circuit`).

Selection rule: among the candidates that meet the target, the least latency; ties go to
fewer register bits, then fewer LUTs.

Search: a candidate with a prediction is measured when its corrected prediction (model x
the measured/predicted ratio of its kind so far) is within a margin of the target (the
delay model's median held-out error on the device, 5-10 %: `model.margin`).  A candidate
without one (no delay model for the device and placer) is bounded by measurements of its
own kind instead: one whose slowest stage is no shorter (unit-gate delay) than a measured
miss of the same cell and mode is taken to miss, and each kind is probed at its middle
candidate, so a kind of n splits costs about log2(n) runs rather than n.
"""

from __future__ import annotations

import json
import statistics
from functools import singledispatch
from dataclasses import dataclass, field

from . import config, harness, units
from .config import Config
from .plan import Plan, PrefixPlan, SlicedPlan
from .treeplan import NativePlan, TreePlan

MAX_STAGES = 32  # even splits go from 1 slice up to this many (and down to 2-bit slices)
MARGIN = 0.10  # a prediction this far below the target may still meet it (no model: 10 %)
LAST_RESORT = 2  # before "none meets", unmeasured kinds are tried this many margins down
JUST_MISSED = 0.10  # a measured miss this close to the target gets uneven variants
# A candidate whose every seed failed in the tools (nextpnr-machxo2 fails to route the global
# clock for some placements, about a third of seed-1 runs) gets up to this many more seeds.
RETRY_SEEDS = 2
SEED_SPREAD = 0.05
"""How far nextpnr's placements of one design differ from seed to seed, about (measured:
±5-6 % over seeds 1-9 for the 64- and 256-bit units in docs/modes.md)."""
CONFIRM_FACTOR = 3  # a choice inside SEED_SPREAD is confirmed on this many times the seeds


def balanced(width: int, stages: int) -> tuple[int, ...]:
    """`stages` slice widths summing to `width` that differ by at most one (wider ones first)."""
    full, extra = divmod(width, stages)
    return tuple(full + 1 if i < extra else full for i in range(stages))


def variant(base: Config, **keys) -> Config:
    """`base` with some keys replaced, validated again (keys of the other modes dropped, and
    the counter tree's keys for `tree: native`)."""
    drop = set(config.MODE_KEYS) | {"pipeline", "slices"}
    if keys.get("tree", base.tree) == "native" and units.KINDS[base.unit].tree:
        drop |= set(config.COUNTER_TREE_KEYS)
    data = {k: v for k, v in base.normalized().items() if k not in drop}
    data.update(keys)
    return config.from_mapping(data, where="candidate")


def span(base: Config) -> int:
    """The bits a split divides: the unit's width, or a sum's or multiplier's final adder."""
    return config.split_span(base)[0]


def slice_candidates(base: Config, cells: tuple[str, ...] | None,
                     most: int = MAX_STAGES) -> list[Config]:
    """Even splits from one slice up to `most` slices, slices at least 2 bits wide, for
    each style of `cells` (None: the config's own cell)."""
    bits = span(base)
    top = max(1, min(most, bits // 2))
    return [variant(base, cell=cell, slices=list(balanced(bits, s)))
            for cell in (cells or (base.cell,)) for s in range(1, top + 1)]


LEVELS_PER_STAGE = (1, 2, 3)
# `local_width` tried for units this wide: 16, and 4 (the fastest 64-bit unit measured on
# ECP5-85F, and as fast as 16 at 256 bits with less logic; docs/modes.md).
LOCAL_WIDTHS, LOCAL_FROM = (4, 16), 64
BLOCK_WIDTHS = (8, 16, 32)


# Prefix styles tried in the prefix modes when `--cells` names none: the two that measured
# fastest in `levels` mode on ECP5-85F at 64 and 256 bits (docs/modes.md).
DEFAULT_PREFIX_STYLES = ("kogge-stone", "han-carlson")


def prefix_styles(base: Config, cells: tuple[str, ...] | None) -> list[str]:
    """The styles the prefix modes try: the prefix styles among `cells` (none when `cells`
    names none); with no `cells`, the config's cell if it is a prefix style, else
    DEFAULT_PREFIX_STYLES."""
    if cells is not None:
        return [c for c in cells if c in config.PREFIX_CELLS]
    return [base.cell] if base.cell in config.PREFIX_CELLS else list(DEFAULT_PREFIX_STYLES)


def levels_candidates(base: Config, cells: tuple[str, ...] | None) -> list[Config]:
    """levels x prefix style x levels per stage (and, from 64 bits, 4- and 16-bit local
    networks with 0-2 wire-register ranks, and with 1-2 ranks in the carry-increment
    form)."""
    styles = prefix_styles(base, cells)
    out = [variant(base, pipeline="levels", cell=cell, levels_per_stage=n)
           for cell in styles for n in LEVELS_PER_STAGE]
    local = all(config.reads(key, base.unit, "levels", base.tree)
                for key in ("local_width", "wire_registers", "carry_increment"))
    if local and span(base) >= LOCAL_FROM:  # local networks kept wiring short at 64, 256 bits
        out += [variant(base, pipeline="levels", cell=cell, local_width=k,
                        wire_registers=wires, carry_increment=increment)
                for cell in styles for k in LOCAL_WIDTHS for wires in (0, 1, 2)
                for increment in (False, True)
                if wires or not increment]  # the increment measured best behind wire ranks
    return out


def blocks_candidates(base: Config, cells: tuple[str, ...] | None) -> list[Config]:
    """blocks x prefix style x block width (block widths that leave at least two blocks)."""
    return [variant(base, pipeline="blocks", cell=cell, block_width=k)
            for k in BLOCK_WIDTHS if config.block_count(span(base), k) >= 2
            for cell in prefix_styles(base, cells)]


# Each mode's generator: (base config, cell styles or None for the default) -> configs.
GENERATORS = {"slices": slice_candidates, "levels": levels_candidates,
              "blocks": blocks_candidates}


# A sum's or multiplier's trees: each counter tree with these levels per stage (and the
# final adder's candidates of the modes asked for, sliced into at most TREE_SLICES), and the
# native operation with these register ranks.
TREE_LEVELS_PER_STAGE = (1, 2)
TREE_SLICES = 8
NATIVE_STAGES = (1, 2, 3, 4)


def tree_candidates(base: Config, cells: tuple[str, ...] | None, modes: tuple[str, ...],
                    trees: tuple[str, ...]) -> list[Config]:
    """A sum's or multiplier's candidates: tree x levels per stage x final adder, and
    `tree: native` x register ranks."""
    out = []
    for tree in trees:
        if tree == "native":
            out += [variant(base, tree="native", native_stages=n) for n in NATIVE_STAGES]
            continue
        for per in TREE_LEVELS_PER_STAGE:
            each = variant(base, tree=tree, tree_levels_per_stage=per)
            if span(each) == 0:  # no final adder to split
                out.append(each)
                continue
            for mode in GENERATORS:
                if mode in modes:
                    made = (slice_candidates(each, cells, TREE_SLICES) if mode == "slices"
                            else GENERATORS[mode](each, cells))
                    out += made
    return out


def generate(base: Config, cells: tuple[str, ...] | None = None,
             modes: tuple[str, ...] = config.PIPELINES,
             trees: tuple[str, ...] = config.TREES) -> list[Config]:
    """Every candidate config of the given modes and cell styles (None: the defaults), in
    the modes the unit kind has (a comparator has no `blocks`, an accumulator only
    `slices`); for a sum or multiplier also each of `trees`."""
    kind = units.KINDS[base.unit]
    if kind.tree:
        return tree_candidates(base, cells, tuple(m for m in modes if m in kind.modes), trees)
    return [cfg for mode in GENERATORS if mode in modes and mode in kind.modes
            for cfg in GENERATORS[mode](base, cells)]


# Config keys that describe the structure; `circuit` reads the structure from the plan.
STRUCTURE_KEYS = ("name", "cell", "pipeline", "slices", *config.MODE_KEYS)
# How a counter tree's counters were placed: the key reads the tree as built instead.
TREE_STYLE_KEYS = ("tree", "tree_levels_per_stage")


def circuit(plan: Plan) -> str:
    """A text key equal for two plans exactly when they describe the same circuit.

    The options (ports, input register, valid, enable, reset) as configured, then the
    structure as the builders read it: per slice its width and its logic (`ripple`,
    `native`, or the prefix network's nodes, so two prefix styles whose networks coincide at
    that width give one key); for the prefix modes the pruned schedule, every kept term with
    what forms it, its stage and its last reader, numbered among the kept terms.  The cell
    style, the split and the mode keys themselves do not enter: `levels_per_stage: 2` and
    `3` give one key when every stage holds the same levels; nor do a counter tree's style
    and levels per stage (`TREE_STYLE_KEYS`), which the tree as built replaces.
    """
    return json.dumps(_circuit(plan), sort_keys=True)


@singledispatch
def _circuit(plan: Plan):
    """A native carry-save unit's (`NativePlan`): no two of its configs coincide."""
    return plan.config.normalized()


def _options(plan: Plan) -> dict:
    """The config's keys but those of the structure, which the key reads from the plan (a
    final adder's config repeats its tree's keys too)."""
    return {k: v for k, v in plan.config.normalized().items()
            if k not in STRUCTURE_KEYS and k not in TREE_STYLE_KEYS}


@_circuit.register
def _(plan: TreePlan):
    """The tree as built, then its final adder's circuit: every value (operand bits or
    partial products, counter outputs, registers with their stage) and every counter, not
    the style or the levels per stage that placed them, so Dadda and Wallace, or one and two
    levels per stage, give one key where they build the same tree (a 3-operand sum's one
    level); two prefix styles whose networks coincide over the final adder's blocks do too."""
    return [_options(plan), plan.tree.digest,
            None if plan.adder is None else _circuit(plan.adder)]


@_circuit.register
def _(plan: SlicedPlan):
    return [_options(plan), [[s.width, list(map(list, s.network().levels))
                              if s.cell in config.PREFIX_CELLS else s.cell]
                             for s in plan.stages]]


@_circuit.register
def _(plan: PrefixPlan):
    sch = plan.schedule
    kept = sch.kept()
    order = {t.index: n for n, t in enumerate(kept)}
    return [_options(plan), {
        "mode": sch.mode, "positions": sch.positions.name, "widths": sch.widths,
        "final": sch.final,
        "terms": [[t.kind, t.pos, t.lsb, t.width, t.op, [order[a] for a in t.args], t.stage,
                   sch.last[t.index]] for t in kept],
        "outputs": {name: [order[i] for i in t] if isinstance(t, tuple) else
                    None if t is None else order[t] for name, t in sorted(sch.outputs.items())}}]


def narrowed(cfg: Config, stage: int, bits: int) -> Config | None:
    """The same latency with `bits` fewer bits in slice `stage`, one more in each of `bits`
    other slices (the narrowest first, then the ones farthest from `stage`)."""
    split = list(cfg.slices)
    if len(split) < 2 or not 0 <= stage < len(split) or split[stage] <= bits \
            or bits > len(split) - 1:
        return None
    others = sorted((i for i in range(len(split)) if i != stage),
                    key=lambda i: (split[i], -abs(i - stage), i))[:bits]
    split[stage] -= bits
    for i in others:
        split[i] += 1
    return variant(cfg, slices=split)


@dataclass
class Row:
    """One candidate as `fit` sees it: its plan, the prediction, the measurements."""

    plan: Plan
    origin: str = "even"  # even, or "uneven of <label>"
    predicted: float | None = None
    fits: bool = True  # room on the device (from the plan's flip-flops, or nextpnr)
    size: str = ""  # what it needs, when it does not fit
    measured: list = field(default_factory=list)  # Measurement per seed
    forced: bool = False  # measure even when the prediction is low (uneven variants)
    hopeful: bool = False  # measured as a last resort (`last_resort`)
    spawned: bool = False  # its uneven variants have been added
    basis: float | None = None  # the corrected prediction when it was sent to be measured
    seeds: int = 1  # seeds 1..seeds are measured (more when every one fails in the tools)
    same: list = field(default_factory=list)  # labels of candidates with the same circuit

    @property
    def config(self) -> Config:
        return self.plan.config

    @property
    def latency(self) -> int:
        return self.plan.latency

    @property
    def register_bits(self) -> int:
        return self.plan.registers.total

    @property
    def label(self) -> str:
        return self.plan.label()

    @property
    def ok(self) -> list:
        return [m for m in self.measured if m.status == "ok"]

    @property
    def mhz(self) -> float | None:
        """Median measured Fmax over the seeds that placed and routed."""
        return round(statistics.median(m.mhz for m in self.ok), 2) if self.ok else None

    @property
    def luts(self) -> int | None:
        return self.measured[0].luts if self.measured else None

    @property
    def median_seed(self):
        """The measurement at the median Fmax (the lower middle one for an even count): the
        critical path the report, the chart and the search all name."""
        ok = sorted(self.ok, key=lambda m: (m.mhz, m.seed))
        return ok[(len(ok) - 1) // 2] if ok else None

    @property
    def measured_stage(self) -> int | None:
        """The stage whose register ends the median seed's critical path, when its name
        tells."""
        path = self.median_seed
        return None if path is None else harness.stage_of(path.end, self.plan)

    @property
    def slowest_stage(self) -> int:
        """Where the measured critical path ends, else where the plan expects it."""
        stage = self.measured_stage
        return self.plan.slowest[0].index if stage is None else stage

    def seeds_to_run(self) -> tuple[int, ...]:
        """Seeds still to measure: those of 1..seeds not measured yet (`seeds` grows when a
        choice is confirmed); while every seed so far failed with a tool error or crash (not
        a timeout, not a full device), the next one instead, up to RETRY_SEEDS more."""
        tried = {m.seed for m in self.measured}
        if tried and not self.ok:
            if any(m.status not in ("error", "broken") for m in self.measured):
                return ()
            nxt = max(tried) + 1
            return (nxt,) if nxt <= self.last_retry else ()
        return tuple(s for s in range(1, self.seeds + 1) if s not in tried)

    @property
    def last_retry(self) -> int:
        """The last seed a row whose every seed failed in the tools may still take."""
        return self.seeds + RETRY_SEEDS

    @property
    def done(self) -> bool:
        return not self.fits or not self.seeds_to_run()

    @property
    def runs_left(self) -> int:
        """Runs this row may still take once queued: one for its seeds, or while every seed
        so far failed in the tools, one per retry seed left."""
        if self.done:
            return 0
        if self.measured and not self.ok:
            return self.last_retry - max(m.seed for m in self.measured)
        return 1


def meets(row: Row, target: float) -> bool:
    return row.mhz is not None and row.mhz >= target


def rank(row: Row) -> tuple:
    """Order of preference among candidates that meet the target."""
    return (row.latency, row.register_bits, row.luts if row.luts is not None else 1 << 62)


def select(rows: list[Row], target: float) -> Row | None:
    """The selection rule: least latency meeting target; then fewer register bits, LUTs."""
    winners = [r for r in rows if meets(r, target)]
    return min(winners, key=rank) if winners else None


def best(rows: list[Row]) -> Row | None:
    """The fastest measured candidate (shown when none meets the target)."""
    measured = [r for r in rows if r.mhz is not None]
    return max(measured, key=lambda r: (r.mhz, [-x for x in rank(r)])) if measured else None


def distinct(rows: list[Row]) -> list[Row]:
    """One row per circuit (`circuit`), the first of each; the others' labels go to `same`."""
    kept: dict[str, Row] = {}
    for r in rows:
        first = kept.setdefault(circuit(r.plan), r)
        if first is not r:
            first.same.append(r.label)
    return list(kept.values())


def scale(rows: list[Row]) -> dict[tuple, float]:
    """Per kind of candidate (`kind`): the median of measured / predicted so far, to correct
    the model as results come in."""
    ratios: dict[tuple, list[float]] = {}
    for r in rows:
        if r.mhz is not None and r.predicted:
            ratios.setdefault(kind(r), []).append(r.mhz / r.predicted)
    return {k: statistics.median(v) for k, v in ratios.items()}


def corrected(row: Row, factors: dict[tuple, float]) -> float | None:
    """The model's prediction times the measured/predicted ratio of its kind so far (none
    while no candidate of its kind is measured: one kind's error says little about
    another's, and borrowing it made the search skip winners in the benchmark)."""
    if row.predicted is None:
        return None
    return round(row.predicted * factors.get(kind(row), 1.0), 1)


def kind(row: Row) -> tuple:
    """Candidates compared by their slowest stage: same cell style, mode and mode options
    other than how many levels or bits a stage takes."""
    return _kind(row.plan)


def _adder_kind(c: Config) -> tuple:
    """An adder's kind (and a counter tree's final adder's): cell, mode, mode options (a
    config holds the default of every key its mode does not read: `config.from_mapping`)."""
    return (c.cell, c.pipeline, c.local_width, c.carry_increment, c.wire_registers)


@singledispatch
def _kind(plan: Plan) -> tuple:
    return _adder_kind(plan.config)


@_kind.register
def _(plan: TreePlan) -> tuple:  # and the same tree, levels per stage and partial products
    c = plan.config
    return _adder_kind(c) + (c.tree, c.tree_levels_per_stage, c.partial_products)


@_kind.register
def _(plan: NativePlan) -> tuple:
    return ("native",)


def _deepest(plan: Plan, part: str) -> int:
    """The largest unit-gate delay among a unit's stages of one part (0 when it has none)."""
    return max((s.delay for s in plan.stages if plan.part(s.index) == part), default=0)


def bound(row: Row, rows: list[Row], target: float) -> Row | None:
    """A measured miss of `row`'s kind that failed in a stage no deeper, in unit-gate delay,
    than the deepest stage of the same part of `row` (a counter tree's stages, or the
    adder's: the model's delays compare within a part, not across), or None; with one,
    `row`, which has no prediction, is taken to miss too (the deepest such miss is given).
    A miss whose critical path names no stage bounds nothing.  Measured: on iCE40 HX8K a
    4 x 16 sum, Dadda with 2 levels per stage, missed 350 MHz with Han-Carlson 3 levels per
    stage (260.7 MHz, the path in the final adder), while 1 level per stage, whose slowest
    stage in the model is its tree's, as deep, measured 390.3.  A unit without a delay model
    (`tree: native`: every stage 0) is bounded by nothing: more ranks behind the operation
    may make it faster."""
    if not row.plan.timed:
        return None
    misses = []
    for m in rows:
        stage = m.measured_stage if m.mhz is not None and m.mhz < target else None
        if stage is None or kind(m) != kind(row):
            continue
        if m.plan.stages[stage].delay <= _deepest(row.plan, m.plan.part(stage)):
            misses.append(m)
    return max(misses, key=lambda m: (m.plan.slowest[0].delay, m.mhz)) if misses else None


def promising(row: Row, target: float, factors: dict, rows: list[Row],
              margin: float = MARGIN) -> bool:
    """Could this unmeasured candidate meet the target?  By its corrected prediction, else
    by the measured misses of its kind (`bound`)."""
    if row.forced:
        return True
    if row.predicted is None:
        return bound(row, rows, target) is None
    return corrected(row, factors) >= target * (1 - margin)


def largest_correction(rows: list[Row]) -> float:
    """The most the model under-predicted a kind measured by the rule in this search (1 when
    it did not); the last resort's own measurements do not count, so it does not feed
    itself from one seed's luck to the next."""
    return max([1.0, *scale([r for r in rows if not r.hopeful]).values()])


def last_resort(rows: list[Row], target: float, factors: dict[tuple, float],
                margin: float) -> list[Row]:
    """Before saying that no candidate meets the target: the unmeasured candidates of kinds
    not measured yet whose prediction, scaled by `largest_correction`, comes within
    LAST_RESORT times `margin` of it.  A kind's own correction stays the rule (borrowing
    one made the search skip winners); this only adds runs when the answer would be "none
    meets" (measured: on iCE40 HX8K a local-block network the model put 11 % low, on
    iCE40 UP5K a carry-increment network it put 10 % low, were never run)."""
    best = largest_correction(rows)
    return [r for r in rows if not r.done and not r.forced and r.predicted is not None
            and kind(r) not in factors
            and r.predicted * best >= target * (1 - LAST_RESORT * margin)]


def inside_spread(row: Row, target: float) -> bool:
    """Does a measured row meet `target` by less than the seeds' spread (`SEED_SPREAD`)?"""
    return meets(row, target) and row.mhz < target * (1 + SEED_SPREAD)


def to_confirm(chosen: Row | None, target: float, confirm: int) -> bool:
    """Is the chosen row inside the seeds' spread and measured on fewer than `confirm`
    seeds (so `next_batch` measures it on seeds 1..`confirm` first)?"""
    return chosen is not None and inside_spread(chosen, target) and chosen.seeds < confirm


def next_batch(rows: list[Row], target: float, size: int, margin: float = MARGIN,
               confirm: int = 0) -> list[Row]:
    """The candidates to place and route next; empty when the answer is confirmed.

    Confirmed: a measured candidate meets the target and every candidate the rule would
    prefer is measured or taken to miss (predicted to miss by more than `margin`, or
    bounded by a measured miss of its kind); when none meets, the `last_resort` candidates
    are measured too.  A chosen candidate `inside_spread` of the target is measured on
    seeds 1..`confirm` before it is accepted (its median over them decides; when it then
    misses, the search goes on).  Candidates with a prediction go in the order of the rule;
    of the ones without, each kind sends its middle candidate (by the rule's order), which
    halves what is left of that kind whether it meets or misses.  With no promising
    candidate left and no figure yet, the best `size` predictions are measured so the table
    can show how far off the target is, on more seeds when they failed (`first_look`).
    """
    factors = scale(rows)
    chosen = select(rows, target)
    if to_confirm(chosen, target, confirm):
        chosen.seeds = confirm
    open_rows = [r for r in rows if not r.done]
    todo = [r for r in open_rows if r is chosen or promising(r, target, factors, rows, margin)
            and (chosen is None or rank(r) < rank(chosen))]
    if not todo and chosen is None:
        todo = last_resort(rows, target, factors, margin)
        for r in sorted(todo, key=rank)[:max(size, 1)]:
            r.hopeful = True
    if not todo:
        todo = first_look(rows, size)
    blind: dict[tuple, list[Row]] = {}
    for r in sorted(todo, key=rank):
        if r.predicted is None and not r.forced and r is not chosen:
            blind.setdefault(kind(r), []).append(r)
    probes = {id(group[(len(group) - 1) // 2]) for group in blind.values()}
    todo = [r for r in todo if r.predicted is not None or r.forced or r is chosen
            or id(r) in probes]
    return sorted(todo, key=rank)[:max(size, 1)]


def first_look(rows: list[Row], size: int) -> list[Row]:
    """While no run has given a figure: the best `size` predictions (of the candidates that
    fit or were measured), so the table can show how far off the target is, each on more
    seeds while its seeds fail in the tools (`Row.seeds_to_run`: nextpnr-machxo2 fails to
    route the clock for some placements); no other candidates."""
    if any(r.ok for r in rows):
        return []
    best_first = sorted((r for r in rows if r.measured or not r.done),
                        key=lambda r: -(r.predicted or 0))
    return [r for r in best_first[:max(size, 1)] if not r.done]


def why_not_run(row: Row, rows: list[Row], target: float, factors: dict[tuple, float],
                chosen: Row | None, margin: float = MARGIN) -> str:
    """Why an unmeasured candidate was not placed and routed (for the table)."""
    if chosen is not None and rank(row) > rank(chosen):
        what = ("a higher latency than" if row.latency > chosen.latency
                else "the same latency and more register bits than" if row.register_bits
                > chosen.register_bits else "the same latency and register bits as")
        return f"not run: {what} the chosen {chosen.label}"
    if row.predicted is None:
        miss = bound(row, rows, target)
        if miss is not None:
            return (f"not run: no shorter stages than {miss.label}, which measured "
                    f"{miss.mhz:g} < {target:g} MHz")
        return "not run"
    if chosen is None and kind(row) not in factors:
        best = largest_correction(rows)
        scaled = (f" (x{best:.3g}, this search's largest correction: "
                  f"{row.predicted * best:.1f})" if best > 1 else "")
        return (f"not run: predicted {row.predicted:g}{scaled} < "
                f"{1 - LAST_RESORT * margin:g} x {target:g} MHz (the last resort)")
    return (f"not run: predicted {corrected(row, factors):g} < {1 - margin:g} x "
            f"{target:g} MHz")


def uneven_rows(rows: list[Row], target: float, make_row) -> list[Row]:
    """New uneven variants of even candidates that just missed: narrow the slowest stage.

    The slowest stage is where the measured critical path ends (`stage` of the first seed),
    or the plan's slowest stage.  `make_row(config, origin)` builds the Row; a variant whose
    circuit is already a candidate is left out.
    """
    known = {circuit(r.plan) for r in rows}
    new = []
    for r in rows:
        if (r.origin != "even" or not r.plan.uneven or r.mhz is None
                or not target * (1 - JUST_MISSED) <= r.mhz < target or r.spawned):
            continue
        r.spawned = True
        stage = r.slowest_stage
        for bits in (1, 2):
            cfg = narrowed(r.config, stage, bits)
            if cfg is None:
                continue
            row = make_row(cfg, f"uneven of {r.label}")
            if circuit(row.plan) not in known:
                known.add(circuit(row.plan))
                row.forced = row.predicted is None  # else it goes by its prediction
                new.append(row)
    return new
