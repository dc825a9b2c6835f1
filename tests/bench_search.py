"""Efficiency of `fit`'s search: place-and-route runs per `fit`, and the latency it chooses
against the least latency that any candidate meeting the target has.

Not a test (pytest does not collect it).  Per case (device, width, target): every candidate
`fit` generates for a plain adder of that width (default cells, every mode) is measured, seed
1 as `fit` uses by default (from the cache when there, like `fit`; `tests/bench_model.py`
measures the same units, its held-out set); that exhaustive table gives the least latency
meeting the target.  Then `fit.run` searches as a user's `fit` does, with the delay model, and
the benchmark counts the measurements it asked for (seeds x candidates, whether the cache or
the tools answered) until it confirmed its choice.  The same search without a delay model
(each kind probed at its middle candidate, bounded by measured misses) is shown beside it.

Targets are fixed fractions of the device's fabric figure (register -> one LUT -> register,
seed 1, from the capture of bench_model.py): from easy to impossible.

    python tests/bench_search.py --jobs 2
    python tests/bench_search.py --devices ecp5-85k --fractions 0.5,0.85
"""

from __future__ import annotations

import argparse
import statistics
import sys
from unittest import mock

import bench_model
from carrypipe import cache, candidates, config, devices, executor, fit, model, toolflow

FRACTIONS = (0.3, 0.5, 0.7, 0.85, 1.5)  # targets, as fractions of the fabric figure


def target_for(fabric_mhz: float, fraction: float) -> int:
    return int(round(fabric_mhz * fraction / 5) * 5)


def exhaustive(base, device, jobs, timeout):
    """Every distinct candidate that fits the device, measured as `fit` measures it: seed 1,
    and the next seeds while every seed so far failed in the tools (cache first)."""
    rows = candidates.distinct([fit.make_row(c, "even", device)
                                for c in candidates.generate(base)])
    rows = [r for r in rows if r.fits]
    versions = toolflow.versions(device.family, "wheel")
    store = cache.Cache()
    while todo := [(r, s) for r in rows for s in r.seeds_to_run()]:
        jobs_ = []
        for r, seed in todo:
            k = cache.key(r.config.normalized(), device.name, seed, versions)
            hit = store.get(k, seed)
            if hit is None:
                jobs_.append((r, k, toolflow.Job(r.config.normalized(), device.name, (seed,),
                                                 "wheel", timeout)))
            else:
                r.measured.append(hit)
        by_job = {id(j): (r, k) for r, k, j in jobs_}
        for job, results in executor.Local(jobs).submit_all(bench_model._measure_job,
                                                            [j for _, _, j in jobs_]):
            r, k = by_job[id(job)]
            r.measured += results
            store.put(k, results[0])
    return rows


def search(base, device, target, jobs, timeout, with_model=True):
    settings = fit.Settings(target, device, timeout=timeout)
    if with_model:
        return fit.run(base, settings, executor.Local(jobs))
    with mock.patch.object(model, "predict", lambda plan, name: None):
        return fit.run(base, settings, executor.Local(jobs))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", default=",".join(bench_model.SEARCH_WIDTH))
    ap.add_argument("--fractions", default=",".join(map(str, FRACTIONS)))
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--timeout", type=float, default=900)
    ap.add_argument("--no-blind", action="store_true", help="leave out the search without a model")
    args = ap.parse_args(argv)
    capture = bench_model.read_capture()["devices"]
    lines, runs, blind_runs, worse = [], [], [], 0
    head = (f"{'device':<13} {'W':>4} {'target':>6} {'cands':>5} {'best lat':>8} "
            f"{'runs':>4} {'chosen':<28} {'lat':>3} {'MHz':>6}  {'blind runs':>10}  verdict")
    for name in args.devices.split(","):
        device = devices.get(name)
        width = bench_model.SEARCH_WIDTH[name]
        base = config.from_mapping({"name": bench_model.NAME, "width": width})
        every = exhaustive(base, device, args.jobs, args.timeout)
        fabric = capture[name]["fabric_mhz"]
        for fraction in map(float, args.fractions.split(",")):
            target = target_for(fabric, fraction)
            best = candidates.select(every, target)
            out = search(base, device, target, args.jobs, args.timeout)
            blind = None if args.no_blind else search(base, device, target, args.jobs,
                                                       args.timeout, with_model=False)
            chosen = out.chosen
            runs.append(out.measurements)
            if blind:
                blind_runs.append(blind.measurements)
            lat_best = best.latency if best else None
            lat = chosen.latency if chosen else None
            if lat_best is None and lat is None:
                verdict = "none meets: right"
            elif lat_best is not None and lat == lat_best:
                verdict = "least latency"
            else:
                verdict = f"WORSE (best {best.label})" if best else "WRONG"
                worse += 1
            lines.append(f"{name:<13} {width:>4} {target:>6} {len(every):>5} "
                         f"{lat_best if lat_best else '-':>8} {out.measurements:>4} "
                         f"{chosen.label if chosen else '-':<28} {lat if lat else '-':>3} "
                         f"{chosen.mhz if chosen else '-':>6}  "
                         f"{blind.measurements if blind else '-':>10}  {verdict}")
            print(lines[-1], file=sys.stderr, flush=True)
    print(head)
    print("\n".join(lines))
    print(f"runs per fit: mean {statistics.mean(runs):.2f}, max {max(runs)} over "
          f"{len(runs)} cases" + (f"; without a model: mean {statistics.mean(blind_runs):.2f}, "
                                  f"max {max(blind_runs)}" if blind_runs else ""))
    print(f"cases choosing a latency above the least found: {worse}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
