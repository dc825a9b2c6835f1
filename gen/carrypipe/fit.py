"""`fit`: predict every candidate split, place and route the promising ones, pick the winner.

Flow: candidates (config variants) -> plan figures and a model prediction for each -> the
batches `candidates.next_batch` asks for are measured (cache first, then the executor) ->
uneven variants of near misses join -> stop when the answer is confirmed.  `run` returns an
`Outcome` and writes nothing; `files` turns it into the output folder's contents.
"""

from __future__ import annotations

import csv
import io
import json
import time
from dataclasses import dataclass, field

import yaml

from . import __version__, cache, candidates, devices, emit, harness, model, plot, toolflow
from .candidates import Row
from .config import Config
from .plan import make_plan

WARMUP_NOTE = ("note: the first call of each WebAssembly tool (yowasp-*) on a machine can take "
               "about a minute while it compiles; later calls start in a second")


INPUT_RANK_NOTE = ("the config registers the inputs (`register_inputs: true`); when the "
                   "operands come straight from registers, `register_inputs: false` lets a "
                   "levels unit spend that cycle on a wire rank instead, which measured about "
                   "3 % faster on ECP5 at the same latency (docs/modes.md)")


@dataclass
class Settings:
    target_mhz: float
    device: devices.Device
    cells: tuple[str, ...]
    seeds: int = 1
    tools: str = "wheel"
    timeout: float | None = None
    use_cache: bool = True


@dataclass
class Outcome:
    settings: Settings
    rows: list[Row]
    tool_versions: dict
    chosen: Row | None
    best: Row | None
    notes: list[str] = field(default_factory=list)


def make_row(cfg: Config, origin: str, device: devices.Device) -> Row:
    """A candidate's plan figures, prediction and whether its flip-flops fit the device."""
    plan = make_plan(cfg)
    row = Row(plan, origin, predicted=model.predict(plan, device.name))
    need = plan.registers.total + harness.flip_flops(plan)
    if need > device.flip_flops:
        mark_no_fit(row, device, need, f"{need} flip-flops (unit {plan.registers.total}, "
                                       f"harness {harness.flip_flops(plan)}) > "
                                       f"{device.flip_flops} on {device.name}")
    return row


def mark_no_fit(row: Row, device: devices.Device, need: int, size: str) -> None:
    row.fits = False
    larger = devices.room_for(device, need, need)
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
        self.echo(f"[{self.done} run, up to {left} more] {label}: "
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
    rows = [make_row(c, "even", dev) for c in candidates.generate(base, settings.cells)]
    progress, warned = Progress(echo), False
    seeds = tuple(range(1, settings.seeds + 1))
    while batch := candidates.next_batch(rows, target, executor.jobs):
        jobs, keys = {}, {}
        for row in batch:
            norm = row.config.normalized()
            for seed in seeds:
                keys[id(row), seed] = cache.key(norm, dev.name, seed, versions)
                hit = store.get(keys[id(row), seed], seed)
                if hit is not None:
                    row.measured.append(hit)
            missing = tuple(s for s in seeds if all(m.seed != s for m in row.measured))
            if missing:
                jobs[id(row)] = (row, toolflow.Job(row.config.normalized(), dev.name,
                                                   missing, settings.tools, settings.timeout))
        if jobs and settings.tools == "wheel" and not warned:
            echo(WARMUP_NOTE)
            warned = True
        left = len(jobs)
        by_job = {id(job): row for row, job in jobs.values()}
        for job, results in executor.submit_all(toolflow.measure, [j for _, j in jobs.values()]):
            row = by_job[id(job)]
            left -= 1
            for m in results:
                row.measured.append(m)
                store.put(keys[id(row), m.seed], m)
            progress.step(row.label, sum(m.seconds for m in results), left + _queued(rows, target))
        for row in batch:
            row.measured.sort(key=lambda m: m.seed)
            full = [m for m in row.measured if m.status == "no-fit"]
            if full and row.fits:
                mark_no_fit(row, dev, full[0].logic_used or 0, full[0].message)
        rows += candidates.uneven_rows(rows, target, lambda c, o: make_row(c, o, dev))
    chosen = candidates.select(rows, target)
    outcome = Outcome(settings, rows, versions, chosen, candidates.best(rows))
    if base.register_inputs and any(r.config.pipeline == "levels" and r.ok for r in rows):
        outcome.notes.append(INPUT_RANK_NOTE)
    for row in rows:
        for m in row.ok:
            if m.inside is False:
                outcome.notes.append(f"{row.label} seed {m.seed}: the critical path "
                                     f"({m.start} -> {m.end}) is not the unit's (it ends in "
                                     "a harness register); the unit is at "
                                     "least this fast")
    return outcome


def environment_failure(outcome: Outcome) -> str | None:
    """When every measurement of every candidate failed for a reason of the environment (a
    tool timed out or failed), what to say; else None.  Nothing was then learnt about the
    design, so `fit` exits with the environment's status, not with "none meets"."""
    measured = [m for row in outcome.rows for m in row.measured]
    if not measured or any(m.status not in ("timeout", "error") for m in measured):
        return None
    return (f"no candidate could be measured on {outcome.settings.device.name}: "
            f"{measured[0].message}")


def _queued(rows: list[Row], target: float) -> int:
    factors = candidates.scale(rows)
    return sum(1 for r in rows if not r.done and candidates.promising(r, target, factors))


def ordered(rows: list[Row]) -> list[Row]:
    """Rows for the table: by latency, then the selection rule's tie-breaks."""
    return sorted(rows, key=lambda r: (*candidates.rank(r), r.label))


COLUMNS = ("latency", "candidate", "origin", "register_bits", "predicted_mhz", "measured_mhz",
           "luts", "carry", "flip_flops", "meets", "note")


def record(row: Row, target: float, factors: dict[str, float]) -> dict:
    """The figures of one candidate (the CSV columns; the JSON adds the per-seed detail).

    `factors` (`candidates.scale`) tells a candidate skipped for its prediction from one
    skipped because a preferred candidate was confirmed first.
    """
    first = row.measured[0] if row.measured else None
    if not row.fits:
        note = "does not fit: " + row.size
    elif row.ok:
        note = f"critical path {row.ok[0].start} -> {row.ok[0].end}"
        if row.ok[0].inside is False:
            note += " (not the unit's: it ends in the harness)"
    elif row.measured:
        note = f"{first.status}: {first.message}"
    else:
        skipped = not candidates.promising(row, target, factors)
        note = ("not run: predicted to miss" if skipped
                else "not run: a preferred candidate was confirmed")
    return {"latency": row.latency, "candidate": row.label, "origin": row.origin,
            "register_bits": row.register_bits, "predicted_mhz": row.predicted,
            "measured_mhz": row.mhz, "luts": first.luts if first else None,
            "carry": first.carry if first else None,
            "flip_flops": first.flip_flops if first else None,
            "meets": candidates.meets(row, target), "note": note}


def table(outcome: Outcome) -> str:
    """The table printed on screen."""
    target = outcome.settings.target_mhz
    wide = max([24, *(len(r.label) for r in outcome.rows)])
    head = (f"{'lat':>3}  {'candidate':<{wide}} {'regs':>6} {'pred':>6} {'MHz':>7} {'LUTs':>6} "
            f"{'carry':>5} {'FFs':>6}  {'':4} note")
    lines, factors = [head], candidates.scale(outcome.rows)
    for row in ordered(outcome.rows):
        r = record(row, target, factors)
        mark = ("<- " if row is outcome.chosen else "") + ("ok" if r["meets"] else "")
        lines.append(f"{r['latency']:>3}  {r['candidate']:<{wide}} {r['register_bits']:>6} "
                     f"{_num(r['predicted_mhz'])} {_num(r['measured_mhz'], 7)} "
                     f"{_num(r['luts'])} {_num(r['carry'], 5)} {_num(r['flip_flops'])}  "
                     f"{mark:<4} {r['note']}")
    return "\n".join(lines)


def _num(v, width: int = 6) -> str:
    return f"{'-' if v is None else v:>{width}}"


def summary(outcome: Outcome) -> str:
    s = outcome.settings
    seeds = f"median of {s.seeds} seeds" if s.seeds > 1 else "seed 1"
    if outcome.chosen:
        c = outcome.chosen
        return (f"chosen: {c.label}, latency {c.latency}, {c.register_bits} register bits, "
                f"{c.mhz} MHz ({seeds}) >= target {s.target_mhz:g} MHz on {s.device.name}")
    if outcome.best:
        b = outcome.best
        return (f"no candidate meets {s.target_mhz:g} MHz on {s.device.name}; best: {b.label}, "
                f"latency {b.latency}, {b.mhz} MHz ({seeds})")
    return f"no candidate meets {s.target_mhz:g} MHz on {s.device.name}; none could be measured"


def files(outcome: Outcome) -> dict[str, str | bytes]:
    """The output folder: the chosen unit as `build` writes it, its config, the figures."""
    s = outcome.settings
    target = s.target_mhz
    rows, factors = ordered(outcome.rows), candidates.scale(outcome.rows)
    out: dict[str, str | bytes] = {}
    if outcome.chosen:
        chosen = outcome.chosen
        cfg = chosen.config
        stage = chosen.measured_stage  # the chart marks it with the measured path
        out.update(emit.render(chosen.plan, measured=None if stage is None else {
            stage: round(1000 / chosen.mhz, 3)}, measured_source=(
                f"critical path at the median Fmax on {s.device.name}, nextpnr")))
        out[f"{cfg.name}.yaml"] = (
            f"# Chosen by carrypipe fit: {outcome.chosen.mhz} MHz on {s.device.name} "
            f"(target {target:g} MHz).\n# Rebuild with: carrypipe build {cfg.name}.yaml\n"
            + yaml.safe_dump(cfg.normalized(), sort_keys=False, default_flow_style=None))
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=COLUMNS, lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: "" if v is None else v for k, v in record(row, target, factors).items()})
    out["fit.csv"] = buf.getvalue()
    doc = {
        "generator": {"name": "carrypipe", "version": __version__},
        "target_mhz": target, "device": s.device.name, "part": s.device.part,
        "seeds": s.seeds, "tools": outcome.tool_versions,
        "chosen": outcome.chosen.label if outcome.chosen else None,
        "candidates": [{**record(r, target, factors), "config": r.config.normalized(),
                        "measurements": [{k: v for k, v in m.as_dict().items() if k != "seconds"}
                                         for m in r.measured]} for r in rows],
    }
    out["fit.json"] = json.dumps(doc, indent=2, sort_keys=True) + "\n"
    title = (f"{rows[0].config.name if rows else ''}: {s.device.name}, target "
             f"{target:g} MHz")
    pics = plot.figures(outcome.rows, target, outcome.chosen, title)
    out["fit.png"], out["fit.svg"] = pics["png"], pics["svg"]
    return out
