"""Calibration of `fit`'s delay model: measure a fixed set of units on every device, fit the
model, and print its error on units it was not fitted to.

Not a test (pytest does not collect it): it places and routes real designs with `fit`'s own
flow (`toolflow.measure`, the measurement harness, seed 1 as `fit` uses by default) and
caches every result like `fit` does, so a rerun only measures what is missing.

Two sets of units per device, told apart by width:
  - calibration: widths 12, 24, 48 and 96;
  - held out: widths 16, 32, 64 and 128, including every candidate `fit` generates for the
    device's case in `tests/bench_search.py` (so that benchmark runs on units the model was
    not fitted to).
Both sets cover every pipeline mode, several cell styles, every unit kind and the options
that add logic (valid, enable, reset, carry-in, signed, input register).  A unit whose
flip-flops exceed the device is left out (as `fit` leaves it out).

    python tests/bench_model.py --measure --jobs 2              # every device, then write
    python tests/bench_model.py --measure --devices gowin-gw1n9 # one device
    python tests/bench_model.py --fit                           # calibrate from the capture

`--measure` writes what it measured to tests/data/fit/measured.json (the capture the tests
and `--fit` read); `--fit` fits the model of every device in the capture, writes
gen/carrypipe/data/delay_models.json and prints, per device, the median and worst error of
the prediction against the measurement over the held-out units.  `--calibrate` does both.
"""

from __future__ import annotations

import argparse
import datetime
import json
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

import bench_fit
from carrypipe import (cache, candidates, cells, config, devices, emit, executor, harness, model,
                       tools, toolflow, units)
from carrypipe.plan import make_plan

ROOT = Path(__file__).resolve().parent.parent
CAPTURE = ROOT / "tests" / "data" / "fit" / "measured.json"
DEPTH = ROOT / "tests" / "data" / "fit" / "slice_depth.json"
MODELS = ROOT / "gen" / "carrypipe" / "data" / model.DATA
NAME = "gen"  # every unit's name (the cache key holds it; bench_search uses it too)
SEED = 1  # fit's default: one seed

CAL_WIDTHS = (12, 24, 48, 96)
HELD_WIDTHS = (16, 32, 64, 128)
SPLITS = (1, 2, 3, 4, 6, 8, 12, 16, 24, 32)  # slices per unit for native even splits
# The width of each device's case in tests/bench_search.py: every candidate `fit` makes for
# an adder of this width joins the held-out set.  The ECP5-85k has none: its fabric's case is
# the ECP5-25k's, where place-and-route takes about a third of the time.
SEARCH_WIDTH = {"ice40-up5k": 128, "ice40-hx8k": 64, "ecp5-25k": 128, "machxo2-1200": 32,
                "gowin-gw1n9": 16, "nexus-40k": 32}
# Devices measured on fewer units (each slice count but every other): place-and-route is
# slow there (the ECP5-85k: 15-60 s even for a 12-bit unit; Nexus) or the device shares
# its fabric with a sibling (the iCE40 UP5K with the HX8K, the ECP5-25K with the 85K).
REDUCED = ("ice40-up5k", "ecp5-25k", "ecp5-85k", "nexus-40k")


def sliced(w, n, **keys):
    return {"width": w, "slices": list(candidates.balanced(w, n)), **keys}


def levels(w, cell, per_stage=1, **keys):
    return {"width": w, "pipeline": "levels", "cell": cell, "levels_per_stage": per_stage, **keys}


def blocks(w, cell, k, **keys):
    return {"width": w, "pipeline": "blocks", "cell": cell, "block_width": k, **keys}


def calibration_units(reduced: bool) -> list[dict]:
    """The units the model is fitted to (widths CAL_WIDTHS); `reduced`: about two thirds."""
    splits = {12: (1, 2, 3, 6), 24: (1, 2, 4, 12), 48: SPLITS[:-1], 96: SPLITS}
    out = [sliced(w, n) for w, ns in splits.items() for n in (ns[::2] + ns[-1:] if reduced
                                                               and w > 24 else ns)]
    out += [levels(12, "kogge-stone", 1), levels(12, "kogge-stone", 2),
            levels(24, "kogge-stone", 1), levels(24, "kogge-stone", 3),
            levels(24, "han-carlson", 2), levels(96, "kogge-stone", 1),
            levels(96, "kogge-stone", 2), levels(96, "han-carlson", 1),
            levels(96, "han-carlson", 3)]
    out += [levels(48, cell, n) for cell in ("kogge-stone", "han-carlson") for n in (1, 2, 3)]
    out += [levels(96, "kogge-stone", local_width=16, wire_registers=n) for n in (0, 1, 2)]
    out += [levels(48, "han-carlson", local_width=16), levels(48, "sklansky"),
            levels(48, "brent-kung"), levels(24, "ladner-fischer", 2)]
    out += [sliced(24, 1, cell="kogge-stone"), sliced(24, 3, cell="kogge-stone"),
            sliced(48, 1, cell="kogge-stone"), sliced(48, 4, cell="kogge-stone"),
            sliced(48, 12, cell="kogge-stone"), sliced(96, 12, cell="kogge-stone"),
            sliced(48, 4, cell="brent-kung"), sliced(48, 2, cell="sklansky"),
            sliced(24, 1, cell="han-carlson"), sliced(48, 4, cell="ladner-fischer"),
            sliced(12, 3, cell="ripple"), sliced(24, 1, cell="ripple")]
    out += [blocks(24, "kogge-stone", 8), blocks(48, "kogge-stone", 8),
            blocks(48, "kogge-stone", 16), blocks(48, "han-carlson", 8),
            blocks(96, "kogge-stone", 16), blocks(96, "kogge-stone", 32)]
    for unit in ("subtractor", "addsub", "comparator", "accumulator"):
        out += [sliced(48, n, unit=unit) for n in (1, 12)]
    out += [sliced(48, 4, unit="accumulator"), sliced(24, 3, unit="addsub"),
            levels(24, "kogge-stone", unit="subtractor"), levels(48, "kogge-stone", unit="addsub"),
            blocks(48, "kogge-stone", 16, unit="addsub"),
            levels(48, "kogge-stone", unit="comparator", slices=[8] * 6),
            levels(24, "kogge-stone", 2, unit="comparator", slices=[4] * 6)]
    out += [sliced(48, 4, valid=True, reset="sync"), sliced(48, 8, enable=True),
            sliced(48, 6, carry_in=True, signed=True), sliced(48, 1, register_inputs=True),
            levels(48, "kogge-stone", valid=True, enable=True, reset="async")]
    return out[::3] + out[1::3] if reduced else out


def held_out_units(reduced: bool) -> list[dict]:
    """Units of other widths (HELD_WIDTHS) the model is checked on (besides the search case)."""
    out = [sliced(16, 2), sliced(32, 3), sliced(64, 6), sliced(128, 1), sliced(128, 8),
           levels(32, "kogge-stone", 2), levels(64, "han-carlson", 1),
           levels(128, "kogge-stone", local_width=16, wire_registers=1),
           sliced(32, 1, cell="kogge-stone"), sliced(64, 8, cell="kogge-stone"),
           sliced(32, 4, cell="sklansky"), sliced(64, 2, cell="brent-kung"),
           sliced(16, 1, cell="ladner-fischer"), sliced(16, 2, cell="ripple"),
           levels(32, "sklansky"), levels(64, "brent-kung", 2),
           blocks(32, "kogge-stone", 8), blocks(128, "han-carlson", 16),
           sliced(32, 2, unit="subtractor"), sliced(64, 8, unit="addsub"),
           levels(32, "han-carlson", unit="addsub"), sliced(64, 1, unit="comparator"),
           sliced(64, 8, unit="comparator"),
           levels(64, "kogge-stone", unit="comparator", slices=[8] * 8),
           sliced(32, 1, unit="accumulator"), sliced(64, 16, unit="accumulator"),
           sliced(64, 8, valid=True, enable=True),
           levels(32, "kogge-stone", carry_in=True, signed=True)]
    return out[::2] if reduced else out


def search_units(width: int) -> list[dict]:
    """Every candidate `fit` generates for a plain adder of `width` bits (default cells)."""
    base = config.from_mapping({"name": NAME, "width": width})
    return [c.normalized() for c in candidates.generate(base)]


def unit_set(device: devices.Device) -> list[tuple[str, config.Config]]:
    """(set, config) per unit to measure on `device`: one per circuit, each fitting it."""
    reduced = device.name in REDUCED
    wanted = [("calibration", k) for k in calibration_units(reduced)]
    if device.name in SEARCH_WIDTH:
        wanted += [("held-out", k) for k in held_out_units(reduced)]
        wanted += [("held-out", k) for k in search_units(SEARCH_WIDTH[device.name])]
    else:  # no search case to add: every held-out unit, enough to judge the model by
        wanted += [("held-out", k) for k in held_out_units(False)]
    out, seen = [], set()
    for group, keys in wanted:
        cfg = config.from_mapping({**keys, "name": NAME})
        plan = make_plan(cfg)
        key = candidates.circuit(plan)
        if key in seen or plan.registers.total + harness.flip_flops(plan) > device.flip_flops:
            continue
        seen.add(key)
        out.append((group, cfg))
    return out


def _measure_job(job):
    return toolflow.measure(job)


def measure_device(device: devices.Device, jobs: int, timeout: float, echo) -> dict:
    """Measure the device's unit set (cache first) and its fabric figure; the capture entry.

    Seed 1 for every unit, as `fit` measures by default; a unit whose seed failed in the
    tools gets the next seed, up to `candidates.RETRY_SEEDS` more, as in `fit`."""
    versions = toolflow.versions(device.family, "wheel")
    store = cache.Cache()
    units = unit_set(device)
    found: dict[int, toolflow.Measurement] = {}
    t0 = time.monotonic()
    for seed in range(SEED, SEED + 1 + candidates.RETRY_SEEDS):
        todo = []
        for i, (_, cfg) in enumerate(units):
            if i in found and found[i].status != "error":
                continue
            k = cache.key(cfg.normalized(), device.name, seed, versions)
            hit = store.get(k, seed)
            if hit is None:
                todo.append((i, k, toolflow.Job(cfg.normalized(), device.name, (seed,),
                                                "wheel", timeout)))
            else:
                found[i] = hit
        echo(f"{device.name}, seed {seed}: {len(todo)} units to place and route")
        by_job = {id(j): (i, k) for i, k, j in todo}
        for n, (job, results) in enumerate(executor.Local(jobs).submit_all(
                _measure_job, [j for _, _, j in todo]), 1):
            i, k = by_job[id(job)]
            found[i] = results[0]
            store.put(k, results[0])
            echo(f"  [{n}/{len(todo)}] {describe_config(units[i][1])}: {results[0].status} "
                 f"{results[0].mhz} ({time.monotonic() - t0:.0f} s)")
    fab_cfg = config.from_mapping({"name": "fabric", "width": 32, "register_inputs": True})
    fabric = bench_fit.measure(store, versions, device, "fabric limit", fab_cfg,
                               bench_fit.fabric_verilog("fabric", 32), (SEED,), "fabric", jobs)
    rows = []
    for i, (group, cfg) in enumerate(units):
        m = found[i]
        norm = {k: v for k, v in cfg.normalized().items() if k != "name"}
        rows.append({"set": group, "config": norm, "seed": m.seed, "status": m.status,
                     "mhz": m.mhz, "luts": m.luts, "carry": m.carry,
                     "flip_flops": m.flip_flops, "end": m.end})
    return {"part": device.part, "placer": model.placer(device), "tools": versions,
            "fabric_mhz": fabric["mhz"], "units": rows}


def samples(entry: dict, group: str, depth: dict) -> list[tuple[dict, model.Sample]]:
    """(unit, sample) of the units of `group` that placed and routed; a sample is timed at
    the stage where the measured critical path ended, when its end names one."""
    out = []
    for unit in entry["units"]:
        if unit["set"] == group and unit["status"] == "ok":
            plan = make_plan(config.from_mapping({**unit["config"], "name": NAME}))
            stage = harness.stage_of(unit["end"], plan) if unit["end"] else None
            out.append((unit, model.Sample(model.figures(plan, depth), unit["mhz"], stage)))
    return out


def errors(entry: dict, fitted: dict, group: str, depth: dict) -> list[tuple[float, dict, float]]:
    """(relative error of the prediction, unit, predicted MHz) over a group, worst last."""
    out = []
    for unit, sample in samples(entry, group, depth):
        ns, _ = model.period(sample.figures, fitted)
        pred = 1000.0 / max(ns, fitted["floor_ns"])
        out.append((abs(pred - sample.mhz) / sample.mhz, unit, pred))
    return sorted(out, key=lambda e: e[0])


def describe(unit: dict) -> str:
    return describe_config(config.from_mapping({**unit["config"], "name": NAME}))


def describe_config(cfg: config.Config) -> str:
    """A unit in a few words: kind (unless an adder), label, width."""
    kind = "" if cfg.unit == "adder" else cfg.unit + " "
    return f"{kind}{make_plan(cfg).label()} ({cfg.width} bits)"


def read_depth(device: devices.Device) -> dict:
    return json.loads(DEPTH.read_text())[device.family.name]["tables"]


def fitted_entry(name: str, data: dict) -> dict:
    """The model entry of device `name` fitted to the capture's calibration units."""
    entry = data["devices"][name]
    depth = read_depth(devices.get(name))
    cal = samples(entry, "calibration", depth)
    fitted = model.calibrate([x for _, x in cal], 1000.0 / entry["fabric_mhz"])
    fitted["source"] = (f"tests/bench_model.py: {len(cal)} units of widths "
                        f"{', '.join(map(str, CAL_WIDTHS))}, seed 1 (the next where it "
                        f"failed), {', '.join(entry['tools'].values())}, {data['date']}")
    return fitted


def fit_models(data: dict, names: list[str]) -> str:
    """Fit every device of the capture, write the model file, and report the errors."""
    stored = json.loads(MODELS.read_text()) if MODELS.exists() else {}
    stored = {"devices": stored.get("devices", {}),
              "depth": {fam: v["tables"] for fam, v in json.loads(DEPTH.read_text()).items()}}
    lines = [f"{'device':<13} {'placer':<7} {'cal':>4} {'held':>4} {'median':>7} {'worst':>7}"
             f"  worst held-out unit (predicted / measured MHz)"]
    for name in names:
        entry = data["devices"].get(name)
        if entry is None:
            continue
        fitted = fitted_entry(name, data)
        held = errors(entry, fitted, "held-out", read_depth(devices.get(name)))
        rel = [e for e, _, _ in held]
        fitted["held_out"] = {"units": len(rel), "median": round(statistics.median(rel), 4),
                              "worst": round(max(rel), 4)}
        stored["devices"].setdefault(name, {})[entry["placer"]] = fitted
        worst = held[-1]
        cal = sum(u["set"] == "calibration" and u["status"] == "ok" for u in entry["units"])
        lines.append(f"{name:<13} {entry['placer']:<7} {cal:>4} {len(held):>4} "
                     f"{100 * statistics.median(rel):>6.1f}% "
                     f"{100 * worst[0]:>6.1f}%  {describe(worst[1])} "
                     f"({worst[2]:.0f} / {worst[1]['mhz']:.0f})")
    MODELS.write_text(dump(stored))
    return "\n".join(lines)


def dump(data) -> str:
    """JSON with every innermost list of numbers on one line."""
    text = json.dumps(data, indent=1, sort_keys=True)
    return re.sub(r"\[\s+([-+0-9.e,\s]+?)\s+\]",
                  lambda m: "[" + ", ".join(x.strip() for x in m.group(1).split(",")) + "]",
                  text) + "\n"


# Slice widths synthesized for the depth tables: every kind's native slice, and the adder's
# slice in each LUT-logic cell style (up to 64 bits: wider ones are never fast).
DEPTH_WIDTHS = (1, 2, 3, 4, 6, 8, 12, 16, 24, 32, 48, 64, 96, 128)
LOGIC_WIDTHS = DEPTH_WIDTHS[:-2]


def depth_items(family: devices.Family) -> list[tuple]:
    """(family, kind, cell, widths) of every depth table: one Yosys run each."""
    out = [(family.name, name, "native", DEPTH_WIDTHS) for name, kind in units.KINDS.items()
           if not kind.tree]  # the model does not read the carry-save kinds' trees
    out += [(family.name, "adder", cell, LOGIC_WIDTHS) for cell in cells.STYLES
            if cells.STYLES[cell].family != "behavioural"]
    return out


def slice_depth_of(item) -> list[list[float]]:
    """Synthesize one slice of each width (Yosys, the family's pass, no harness; one Yosys
    run for all) and walk each netlist: [width, LUT levels, carry-chain bits] of the
    longest register-to-register path, a chain bit counted as a tenth of a LUT level when
    two paths compete."""
    fam_name, kind, cell, widths = item
    fam = next(f for f in devices.FAMILIES if f.name == fam_name)
    with tempfile.TemporaryDirectory(prefix="carrypipe-depth-") as tmp:
        script = []
        for w in widths:
            plan = make_plan(config.from_mapping({"name": f"w{w}", "width": w, "unit": kind,
                                                  "cell": cell}))
            (Path(tmp) / f"w{w}.v").write_text(emit.unit_verilog(plan))
            script.append(f"design -reset; read_verilog w{w}.v; {fam.synth} -top w{w} "
                          f"-json w{w}.json")
        run = tools.run([toolflow.executable("yosys", "wheel"), "-q", "-p", "; ".join(script)],
                        tmp, 3600)
        if run.returncode != 0:
            raise RuntimeError(f"yosys failed on {item}: {run.stderr[-300:]}")
        out = []
        for w in widths:
            netlist = json.loads((Path(tmp) / f"w{w}.json").read_text())
            out.append([w, *longest_path(netlist["modules"][f"w{w}"], fam)])
    return out


def longest_path(module: dict, fam: devices.Family) -> tuple[float, float]:
    """(LUT levels, chain bits) of the longest path from a flip-flop or input to a
    flip-flop in a Yosys JSON module: a carry cell adds `carry_bits`, any other cell with
    inputs one level (LUTs and the wide-function muxes); constants add nothing."""
    cellmap = module["cells"]
    driver = {}
    for name, c in cellmap.items():
        for port, way in c.get("port_directions", {}).items():
            if way == "output":
                for b in c["connections"][port]:
                    driver[b] = name
    memo: dict = {}
    weight = lambda a: a[0] + a[1] / 10  # noqa: E731

    def inputs(c):
        return [b for p, way in c["port_directions"].items() if way == "input"
                for b in c["connections"][p] if isinstance(b, int)]

    def arrival(bit):
        stack = [bit]
        while stack:
            b = stack[-1]
            if b in memo:
                stack.pop()
                continue
            name = driver.get(b)
            c = cellmap[name] if name else None
            if c is None or c["type"].startswith(fam.ff_prefix):
                memo[b] = (0.0, 0.0)
                stack.pop()
                continue
            todo = [x for x in inputs(c) if x not in memo]
            if todo:
                stack.extend(todo)
                continue
            ins = inputs(c)
            best = max((memo[x] for x in ins), key=weight, default=(0.0, 0.0))
            if c["type"] == fam.carry:
                memo[b] = (best[0], best[1] + fam.carry_bits)
            elif ins:
                memo[b] = (best[0] + 1, best[1])
            else:
                memo[b] = (0.0, 0.0)
            stack.pop()
        return memo[bit]

    worst = (0.0, 0.0)
    for c in cellmap.values():
        if c["type"].startswith(fam.ff_prefix):
            for p, way in c["port_directions"].items():
                if way == "input" and p not in ("C", "CLK", "CK"):
                    for b in c["connections"][p]:
                        if isinstance(b, int) and weight(arrival(b)) > weight(worst):
                            worst = arrival(b)
    return worst


def depth_tables(family: devices.Family, jobs: int, echo) -> dict:
    """The family's depth tables ("<kind>/<cell>" -> [[width, LUT levels, chain bits]]),
    synthesized once per Yosys version and kept in DEPTH."""
    yosys = toolflow.versions(family, "wheel")["yosys"]
    data = json.loads(DEPTH.read_text()) if DEPTH.exists() else {}
    known = data.get(family.name, {})
    if known.get("yosys") == yosys:
        return known["tables"]
    tables: dict[str, list] = {}
    items = depth_items(family)
    echo(f"{family.name}: synthesizing {len(items)} slices for the depth tables")
    for item, points in executor.Local(jobs).submit_all(slice_depth_of, items):
        tables[f"{item[1]}/{item[2]}"] = points
    tables = dict(sorted(tables.items()))
    data = json.loads(DEPTH.read_text()) if DEPTH.exists() else {}
    data[family.name] = {"yosys": yosys, "script": family.synth, "tables": tables}
    DEPTH.write_text(dump(data))
    return tables


def seed_spread(device: devices.Device, count: int, jobs: int, timeout: float) -> str:
    """How far seed 1 lies from the median of seeds 1-3, over `count` held-out units spread
    through the set: the part of the model's error that no model of the design can remove
    (`fit` measures seed 1 by default)."""
    versions = toolflow.versions(device.family, "wheel")
    store = cache.Cache()
    held = [cfg for group, cfg in unit_set(device) if group == "held-out"]
    picked = held[::max(len(held) // count, 1)][:count]
    found: dict[tuple, toolflow.Measurement] = {}
    todo = []
    for i, cfg in enumerate(picked):
        for seed in (1, 2, 3):
            k = cache.key(cfg.normalized(), device.name, seed, versions)
            hit = store.get(k, seed)
            if hit is None:
                todo.append(((i, seed, k), toolflow.Job(cfg.normalized(), device.name, (seed,),
                                                        "wheel", timeout)))
            else:
                found[i, seed] = hit
    by_job = {id(j): tag for tag, j in todo}
    for job, results in executor.Local(jobs).submit_all(_measure_job, [j for _, j in todo]):
        i, seed, k = by_job[id(job)]
        found[i, seed] = results[0]
        store.put(k, results[0])
    devs = []
    for i in range(len(picked)):
        mhz = [found[i, s].mhz for s in (1, 2, 3) if found[i, s].status == "ok"]
        if len(mhz) == 3 and found[i, 1].status == "ok":
            devs.append(abs(mhz[0] - statistics.median(mhz)) / statistics.median(mhz))
    return (f"{device.name}: seed 1 against the median of seeds 1-3 over {len(devs)} held-out "
            f"units: median {100 * statistics.median(devs):.1f} %, worst "
            f"{100 * max(devs):.1f} %")


def read_capture() -> dict:
    return json.loads(CAPTURE.read_text()) if CAPTURE.exists() else {"devices": {}}


def write_capture(data: dict) -> None:
    CAPTURE.parent.mkdir(parents=True, exist_ok=True)
    CAPTURE.write_text(dump(data))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", default=",".join(devices.DEVICES))
    ap.add_argument("--measure", action="store_true", help="measure (cache first), write capture")
    ap.add_argument("--fit", action="store_true", help="calibrate from the capture, print errors")
    ap.add_argument("--calibrate", action="store_true", help="--measure, then --fit")
    ap.add_argument("--list", action="store_true", help="print the unit sets and stop")
    ap.add_argument("--depth", action="store_true", help="synthesize the depth tables only")
    ap.add_argument("--spread", type=int, metavar="N",
                    help="measure seeds 2 and 3 of N held-out units: how far seed 1 strays")
    ap.add_argument("--jobs", type=int, default=1, help="place-and-route runs at a time")
    ap.add_argument("--timeout", type=float, default=900, help="seconds per tool run")
    args = ap.parse_args(argv)
    names = args.devices.split(",")
    echo = lambda text: print(text, file=sys.stderr, flush=True)  # noqa: E731
    if args.list:
        for name in names:
            units = unit_set(devices.get(name))
            count = {g: sum(1 for u in units if u[0] == g) for g in ("calibration", "held-out")}
            print(name, count)
        return 0
    if args.spread:
        for name in names:
            print(seed_spread(devices.get(name), args.spread, args.jobs, args.timeout))
        return 0
    if args.depth:
        for fam in dict.fromkeys(devices.get(n).family for n in names):
            depth_tables(fam, args.jobs, echo)
        return 0
    if args.measure or args.calibrate:
        for name in names:
            device = devices.get(name)
            depth_tables(device.family, args.jobs, echo)
            data = read_capture()
            data["devices"][name] = measure_device(device, args.jobs, args.timeout, echo)
            data["date"] = datetime.date.today().isoformat()
            write_capture(data)
    if args.fit or args.calibrate:
        data = read_capture()
        print(fit_models(data, names))
    return 0


if __name__ == "__main__":
    sys.exit(main())
