"""`fit`: predict every candidate split, place and route the promising ones, pick the winner.

Flow: candidates (config variants of the modes and cell styles asked for) -> plan figures
and a model prediction for each, one candidate per circuit -> the batches
`candidates.next_batch` asks for are measured (cache first, then the executor) -> uneven
variants of near misses join -> stop when the answer is confirmed.  `run` returns an
`Outcome` and writes nothing; `files` turns it into the output folder's contents.
"""

from __future__ import annotations

import csv
import io
import json
import time
from dataclasses import dataclass, field

from . import __version__, cache, candidates, config, config_edit, devices, emit, harness, model
from . import plot, toolflow, tools
from .candidates import Row
from .config import Config
from .header import plural
from .netlist import NameClash
from .plan import make_plan


INPUT_RANK_NOTE = ("the config registers the inputs (`register_inputs: true`); when the "
                   "operands come straight from registers, `register_inputs: false` lets a "
                   "levels unit spend that cycle on a wire rank instead, which measured about "
                   "3 % faster on ECP5 at the same latency (docs/modes.md)")


@dataclass
class Settings:
    target_mhz: float
    device: devices.Device
    cells: tuple[str, ...] | None = None  # None: the config's cell (and prefix defaults)
    seeds: int = 1
    tools: str = "wheel"
    timeout: float | None = None
    use_cache: bool = True
    modes: tuple[str, ...] = config.PIPELINES
    trees: tuple[str, ...] = config.TREES  # a sum's or multiplier's trees to try
    # A choice less than SEED_SPREAD above the target is measured on seeds 1..confirm_seeds
    # before it is accepted (no more seeds when this is not above `seeds`).
    confirm_seeds: int = 0


@dataclass
class Outcome:
    settings: Settings
    rows: list[Row]
    tool_versions: dict
    chosen: Row | None
    best: Row | None
    notes: list[str] = field(default_factory=list)
    measurements: int = 0  # seeds x candidates measured, from the cache or the tools
    cached: int = 0  # of those, served from the cache
    broken: bool = False  # the search stopped: every run broke in the tools (`tool_broken`)


def make_row(cfg: Config, origin: str, device: devices.Device, seeds: int = 1) -> Row:
    """A candidate's plan figures, prediction and whether its flip-flops fit the device."""
    plan = make_plan(cfg)
    row = Row(plan, origin, predicted=model.predict(plan, device.name), seeds=seeds)
    need = harness.design_flip_flops(plan)
    if need > device.flip_flops:
        # Logic cells: at least one per flip-flop (each holds one) on the families here.
        mark_no_fit(row, device, need, need, f"{need} flip-flops (unit {plan.registers.total}, "
                                             f"harness {harness.flip_flops(plan)}) > "
                                             f"{device.flip_flops} on {device.name}")
    return row


def _named_apart(rows: list[Row]) -> tuple[list[Row], int]:
    """The rows whose unit has no signal named like the unit (`netlist.NameClash`), and how
    many others there were: the config's own unit is checked when it is read, another
    mode's or split's names may still meet it."""
    kept = []
    for row in rows:
        try:
            row.plan.build_netlist()
        except NameClash:
            continue
        kept.append(row)
    return kept, len(rows) - len(kept)


def mark_no_fit(row: Row, device: devices.Device, logic: int, flip_flops: int,
                size: str) -> None:
    """Mark a candidate that does not fit `device`, naming a device with room for it."""
    row.fits = False
    larger = devices.room_for(device, logic, flip_flops)
    row.size = size + (f"; try --device {larger.name}" if larger and larger is not device
                       else "; no larger device in the table")


class Progress:
    """One status line: candidates done, the current one, elapsed time and an ETA."""

    def __init__(self, echo):
        self.echo, self.start, self.done, self.spent = echo, time.monotonic(), 0, 0.0

    def step(self, label: str, seconds: float, left: int) -> None:
        self.done += 1
        self.spent += seconds
        eta = self.spent / self.done * left
        self.echo(f"[{plural(self.done, 'run')} done, up to {left} more] {label}: "
                  f"elapsed {_clock(time.monotonic() - self.start)}, ETA at most {_clock(eta)}")


def _clock(seconds: float) -> str:
    m, s = divmod(int(round(seconds)), 60)
    return f"{m}:{s:02d}"


def run(base: Config, settings: Settings, executor, echo=lambda text: None,
        store: cache.Cache | None = None) -> Outcome:
    """Search the candidates of `base` for the least latency meeting the target."""
    dev, target = settings.device, settings.target_mhz
    versions = toolflow.versions(dev.family, settings.tools, settings.timeout)
    store = store or cache.Cache(read=settings.use_cache)
    new_row = lambda c, origin: make_row(c, origin, dev, settings.seeds)  # noqa: E731
    rows, clashing = _named_apart(candidates.distinct(
        [new_row(c, "even") for c in candidates.generate(base, settings.cells, settings.modes,
                                                         settings.trees)]))
    # Said once, before the first runs, when a wheel has yet to compile on this machine (a
    # cluster's workers have caches of their own).
    warned = (settings.tools != "wheel" or not executor.here
              or all(tools.compiled(t) for t in ("yosys", dev.family.pnr)))
    progress, broken = Progress(echo), False
    measurements = cached = 0
    margin = model.margin(dev.name)
    while batch := candidates.next_batch(rows, target, executor.jobs, margin,
                                         settings.confirm_seeds):
        todo, keys = [], {}
        factors = candidates.scale(rows)
        for row in batch:
            if row.basis is None:
                row.basis = candidates.corrected(row, factors)
            norm = row.config.normalized()
            seeds = row.seeds_to_run()
            for seed in seeds:
                keys[id(row), seed] = cache.key(norm, dev.name, seed, versions)
                hit = store.get(keys[id(row), seed], seed)
                if hit is not None:
                    row.measured.append(hit)
                    cached += 1
            measurements += len(seeds)
            missing = tuple(s for s in seeds if all(m.seed != s for m in row.measured))
            if missing:
                todo.append((row, missing))
        # Fewer rows than workers (a choice being confirmed): a row's seeds go out in parts.
        parts = max(1, executor.jobs // max(1, len(todo)))
        jobs = [(row, toolflow.Job(row.config.normalized(), dev.name, part, settings.tools,
                                   settings.timeout))
                for row, missing in todo for part in split_seeds(missing, parts)]
        if jobs and not warned:
            echo(tools.WARMUP_NOTE)
            warned = True
        left = len(jobs)
        by_job = {id(job): row for row, job in jobs}
        for job, results in executor.submit_all(toolflow.measure, [j for _, j in jobs]):
            row = by_job[id(job)]
            left -= 1
            for m in results:
                row.measured.append(m)
                store.put(keys[id(row), m.seed], m)
            progress.step(row.label, sum(m.seconds for m in results),
                          left + _queued(rows, target, margin, settings.confirm_seeds,
                                         executor.jobs))
        for row in batch:
            row.measured.sort(key=lambda m: m.seed)
            full = [m for m in row.measured if m.status == "no-fit"]
            if full and row.fits:
                mark_no_fit(row, dev, full[0].logic_used or 0,
                            harness.design_flip_flops(row.plan),
                            full[0].message)
        if broken := tool_broken(rows, executor.jobs):
            break  # environment_failure says so
        more, left_out = _named_apart(candidates.uneven_rows(rows, target, new_row))
        rows += more
        clashing += left_out
    chosen = candidates.select(rows, target)
    outcome = Outcome(settings, rows, versions, chosen, candidates.best(rows),
                      measurements=measurements, cached=cached, broken=broken)
    if clashing:
        outcome.notes.append(f"{plural(clashing, 'candidate')} left out: the name "
                             f"{base.name!r} is one of their own signal names (a module "
                             "named like one of its signals fails Verilator's -Wall lint)")
    if not plot.available():
        outcome.notes.append(plot.MISSING)
    if model.entry_for(dev.name) is None:
        outcome.notes.append(f"no delay model for {dev.name} with nextpnr's "
                             f"{model.placer(dev)} placer: candidates are measured "
                             "without a prediction, each kind (cell style and mode) probed at "
                             "its middle split, and a split whose slowest stage is no shorter "
                             "than a measured miss of its kind is taken to miss")
    if store.unwritable:
        outcome.notes.append(f"the cache folder {store.path} could not be written "
                             f"({store.unwritable}): these measurements are not kept for "
                             "the next run")
    if base.register_inputs and any(r.ok and r.plan.moved_input_rank() for r in rows):
        outcome.notes.append(INPUT_RANK_NOTE)
    if chosen and candidates.inside_spread(chosen, target):
        figures = ", ".join(f"{m.mhz:g}" for m in chosen.ok)
        outcome.notes.append(
            f"{chosen.label} is {100 * (chosen.mhz / target - 1):.1f} % above the target by "
            f"its median (seeds: {figures} MHz); nextpnr's placements of one design differ by "
            f"about {100 * candidates.SEED_SPREAD:g} %, so other seeds, or your design around "
            f"the unit, may miss {target:g} MHz: aim higher, or confirm on more seeds "
            f"(--confirm-seeds {candidates.CONFIRM_FACTOR * len(chosen.measured)})")
    for row in rows:
        for m in row.ok:
            if m.inside is False:
                outcome.notes.append(f"{row.label} seed {m.seed}: the critical path "
                                     f"({m.start} -> {m.end}) is not the unit's (it ends in "
                                     "a harness register); the unit is at "
                                     "least this fast")
    return outcome


def split_seeds(seeds: tuple[int, ...], parts: int) -> list[tuple[int, ...]]:
    """`seeds` in at most `parts` runs of consecutive seeds, as even as can be."""
    parts = min(parts, len(seeds))
    size, extra = divmod(len(seeds), parts)
    out, start = [], 0
    for i in range(parts):
        end = start + size + (i < extra)
        out.append(seeds[start:end])
        start = end
    return out


def tool_broken(rows: list[Row], jobs: int) -> bool:
    """Every run so far broke (a tool killed or silent: status `broken`, never a verdict on
    the design), 1 + RETRY_SEEDS runs a worker or more: the tool, not the candidates, is at
    fault, so the search stops there, whatever the target."""
    measured = [m for row in rows for m in row.measured]
    return (len(measured) >= (1 + candidates.RETRY_SEEDS) * jobs
            and all(m.status == "broken" for m in measured))


def environment_failure(outcome: Outcome) -> str | None:
    """When every measurement of every candidate failed for a reason of the environment (a
    tool timed out or failed), what to say; else None.  Nothing was then learnt about the
    design, so `fit` exits with the environment's status, not with "none meets"."""
    measured = [m for row in outcome.rows for m in row.measured]
    if not measured or any(m.status not in ("timeout", "error", "broken") for m in measured):
        return None
    return (f"no candidate could be measured on {outcome.settings.device.name}: "
            f"{measured[0].message}")


def _queued(rows: list[Row], target: float, margin: float, confirm: int, size: int) -> int:
    """Runs that may still come: those of the promising candidates, of the choice when it is
    still to be confirmed on more seeds and, while none meets the target, of the last
    resort's and, while no run has given a figure, of the best predictions with their retry
    seeds (so "up to N more" is not an undercount)."""
    factors = candidates.scale(rows)
    todo = [r for r in rows if candidates.promising(r, target, factors, rows, margin)]
    chosen = candidates.select(rows, target)
    retries = 0
    if chosen is None:
        todo += candidates.last_resort(rows, target, factors, margin)
        looks = candidates.first_look(rows, size)
        todo += looks  # one not measured yet may fail and take its retry seeds too
        retries = candidates.RETRY_SEEDS * sum(not r.measured for r in looks)
    elif candidates.to_confirm(chosen, target, confirm):
        todo.append(chosen)
    return sum(r.runs_left for r in {id(r): r for r in todo}.values()) + retries


def ordered(rows: list[Row]) -> list[Row]:
    """Rows for the table: by latency, then the selection rule's tie-breaks."""
    return sorted(rows, key=lambda r: (*candidates.rank(r), r.label))


COLUMNS = ("latency", "candidate", "origin", "register_bits", "predicted_mhz", "model_mhz",
           "measured_mhz", "luts", "carry", "flip_flops", "meets", "note")


def record(row: Row, outcome: Outcome) -> dict:
    """The figures of one candidate (the CSV columns; the JSON adds the per-seed detail).

    `predicted_mhz` is the prediction that decided: the model's figure corrected by the
    measured/predicted ratio of its kind (cell style and mode) when the candidate was sent
    to be measured (for one never measured, the final ratio); `model_mhz` is the model's
    own figure, given only where it differs.
    """
    target, rows = outcome.settings.target_mhz, outcome.rows
    factors = candidates.scale(rows)
    first = row.measured[0] if row.measured else None
    decided = row.basis if row.measured else candidates.corrected(row, factors)
    if not row.fits:
        note = "does not fit: " + row.size
    elif row.ok:
        path = row.median_seed
        note = f"critical path {harness.path_words(path, row.plan)}"
        if path.routing_share is not None:
            note += f", {path.routing_share} % routing"
        if path.inside is False:
            note += " (not the unit's: it ends in the harness)"
    elif row.measured:
        note = f"{first.status}: {first.message}"
    elif outcome.broken:
        note = "not run: the search stopped, every run so far broke in the tools"
    else:
        note = candidates.why_not_run(row, rows, target, factors, outcome.chosen,
                                      model.margin(outcome.settings.device.name))
    if row.seeds > outcome.settings.seeds:
        note = (f"measured on seeds 1-{row.seeds} to confirm it (its first median was within "
                f"{100 * candidates.SEED_SPREAD:g} % of the target); " + note)
    if row.hopeful:
        note = "run as the last resort; " + note
    if row.same:
        note += "; also stands for " + ", ".join(row.same) + " (the same circuit, not listed)"
    return {"latency": row.latency, "candidate": row.label, "origin": row.origin,
            "register_bits": row.register_bits, "predicted_mhz": decided,
            "model_mhz": row.predicted if row.predicted != decided else None,
            "measured_mhz": row.mhz, "luts": first.luts if first else None,
            "carry": first.carry if first else None,
            "flip_flops": first.flip_flops if first else None,
            "meets": candidates.meets(row, target), "note": note}


def table(outcome: Outcome) -> str:
    """The table printed on screen."""
    wide = max([24, *(len(r.label) for r in outcome.rows)])
    head = (f"{'lat':>3}  {'candidate':<{wide}} {'regs':>6} {'pred':>6} {'model':>6} "
            f"{'MHz':>7} {'LUTs':>6} {'carry':>5} {'FFs':>6}  {'':4} note")
    lines = [head]
    for row in ordered(outcome.rows):
        r = record(row, outcome)
        mark = ("<- " if row is outcome.chosen else "") + ("ok" if r["meets"] else "")
        lines.append(f"{r['latency']:>3}  {r['candidate']:<{wide}} {r['register_bits']:>6} "
                     f"{_num(r['predicted_mhz'])} {_num(r['model_mhz'], blank='')} "
                     f"{_num(r['measured_mhz'], 7)} {_num(r['luts'])} {_num(r['carry'], 5)} "
                     f"{_num(r['flip_flops'])}  {mark:<4} {r['note']}")
    lines.append("pred: the model corrected by the measured/predicted ratio of its kind (cell "
                 "style and mode; what decided); model: the model's own figure where it "
                 "differs")
    return "\n".join(lines)


def _num(v, width: int = 6, blank: str = "-") -> str:
    return f"{blank if v is None else v:>{width}}"


def seed_words(row: Row, many: str = "median of {n} seeds") -> str:
    """Which seeds a row's figure comes from: "seed 1", "median of 3 seeds", or the seeds
    themselves when some failed in the tools and others were measured instead."""
    got = [m.seed for m in row.ok]
    if len(got) == 1:
        return f"seed {got[0]}"
    if got == list(range(1, len(got) + 1)):
        return many.format(n=len(got))
    return "median of seeds " + ", ".join(map(str, got))


def summary(outcome: Outcome) -> str:
    s = outcome.settings
    if not s.use_cache:
        source = f"; {outcome.measurements} measurements, the cache not read (--no-cache)"
    else:
        source = (f"; {outcome.cached} of {outcome.measurements} measurements from the cache")
    if outcome.chosen:
        c = outcome.chosen
        return (f"chosen: {c.label}, latency {c.latency}, {c.register_bits} register bits, "
                f"{c.mhz} MHz ({seed_words(c)}) >= target {s.target_mhz:g} MHz on {s.device.name}"
                + source)
    if outcome.best:
        b = outcome.best
        return (f"no candidate meets {s.target_mhz:g} MHz on {s.device.name}; best: {b.label}, "
                f"latency {b.latency}, {b.mhz} MHz ({seed_words(b)})" + source)
    return (f"no candidate meets {s.target_mhz:g} MHz on {s.device.name}; none could be "
            "measured" + source)


def measured_section(outcome: Outcome) -> str:
    """The chosen unit's measurement, for the end of its report: device, tools, the seeds'
    Fmax and the critical path at the median seed."""
    s, row = outcome.settings, outcome.chosen
    path, stage = row.median_seed, row.measured_stage
    where = f", ends in stage {stage}" if stage is not None else ", ends outside the unit's stages"
    per_seed = ", ".join(f"seed {m.seed}: {m.mhz:g}" for m in row.ok)
    delay = [] if path.routing_share is None else [
        f"  Delay     {path.total_ns:.3f} ns: {path.logic_ns:.3f} in cells (clock-to-out and "
        f"setup included), {path.routing_ns:.3f} routing ({path.routing_share} %)"]
    return "\n".join([
        "Measured by carrypipe fit (open-tool estimate, not sign-off)",
        f"  Device    {s.device.name} ({s.device.part}), target {s.target_mhz:g} MHz",
        f"  Tools     {', '.join(outcome.tool_versions.values())}",
        f"  Fmax      {row.mhz:g} MHz, median of {plural(len(row.ok), 'seed')} ({per_seed})",
        f"  Critical path at seed {path.seed}: "
        f"{harness.path_words(path, row.plan)}{where}",
        *delay,
        ""])


def chart_figures(outcome: Outcome) -> tuple[dict[int, float], str]:
    """The chart's measured figure (stage -> ns) and the words beside it: the median Fmax's
    period at the stage where the critical path ends (the unit-gate model's slowest stage
    when the path names none), the seeds, the device and the path."""
    s, row = outcome.settings, outcome.chosen
    path = row.median_seed
    seeds = seed_words(row, "median of seeds 1-{n}")
    at = "" if row.measured_stage is not None else "; stage by the unit-gate model"
    return ({row.slowest_stage: round(1000 / row.mhz, 3)},
            f"{row.mhz:g} MHz, {seeds}, {s.device.name}, nextpnr; critical path "
            f"{harness.path_words(path, row.plan)}{at}")


def files(outcome: Outcome, source: str | None = None) -> dict[str, str | bytes]:
    """The output folder: the chosen unit as `build` writes it (its report and chart with
    the measurement), its config, the figures.  `source` is the user's config text: the
    written `<name>.yaml` is that file with only the keys `fit` chose changed."""
    s = outcome.settings
    target = s.target_mhz
    rows = ordered(outcome.rows)
    out: dict[str, str | bytes] = {}
    if outcome.chosen:
        chosen = outcome.chosen
        cfg = chosen.config
        measured, words = chart_figures(outcome)
        out.update(emit.render(chosen.plan, measured=measured, measured_source=words))
        out[f"{cfg.name}.txt"] += "\n" + measured_section(outcome)
        out[f"{cfg.name}.yaml"] = config_edit.rewrite(
            source if source is not None else f"name: {cfg.name}\nwidth: {cfg.width}\n", cfg)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=COLUMNS, lineterminator="\n")
    writer.writeheader()
    records = [record(row, outcome) for row in rows]
    for rec in records:
        writer.writerow({k: "" if v is None else v for k, v in rec.items()})
    out["fit.csv"] = buf.getvalue()
    doc = {
        "generator": {"name": "carrypipe", "version": __version__},
        "target_mhz": target, "device": s.device.name, "part": s.device.part,
        "seeds": s.seeds, "confirm_seeds": s.confirm_seeds, "tools": outcome.tool_versions,
        "chosen": outcome.chosen.label if outcome.chosen else None,
        "candidates": [{**rec, "config": r.config.normalized(), "same_circuit": r.same,
                        "measurements": [{k: v for k, v in m.as_dict().items() if k != "seconds"}
                                         for m in r.measured]} for r, rec in zip(rows, records)],
    }
    out["fit.json"] = json.dumps(doc, indent=2, sort_keys=True) + "\n"
    title = (f"{rows[0].config.name if rows else ''}: {s.device.name}, target "
             f"{target:g} MHz")
    if plot.available():
        pics = plot.figures(outcome.rows, target, outcome.chosen, title)
        out["fit.png"], out["fit.svg"] = pics["png"], pics["svg"]
    return out
