"""Benchmark of the prefix pipeline modes (issue 6 goals) beside the peer and the fabric limit.

Not a test (pytest does not collect it): it places and routes real designs with `fit`'s flow
(`toolflow.place_and_route`, the serial-in / captured-out harness, results cached like
`fit`'s) through `bench_fit.measure`, and prints one table: latency, MHz (median over the
seeds), LUTs, carry cells, flip-flops, the ratio to the fabric limit (register -> one LUT4
-> register) and the critical path's end cells of the first seed.

    python tests/bench_modes.py --width 64 --seeds 3
    python tests/bench_modes.py --width 256 --seeds 3 --only han-carlson/0,kogge-stone/2

A design is `<cell>/<wire_registers>[/<local_width>[/increment]]` (levels mode, one prefix
level per stage unless `--levels-per-stage`, registered inputs unless
`--no-input-register`, "plain" in the table;
`increment` adds `carry_increment: true`); with `--blocks <k>` the designs are blocks mode,
block width k.
`--pnr-args="--tmg-ripup"` (with `=`) adds nextpnr options to every run of the table (fabric limit and
peer included), to compare place-and-route options in one flow; results are cached apart.
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
import time

import bench_fit
from carrypipe import cache, config, devices, emit, harness, toolflow
from carrypipe.plan import make_plan

DESIGNS = ("kogge-stone/0", "kogge-stone/1", "kogge-stone/2", "han-carlson/0",
           "han-carlson/1", "sklansky/0", "brent-kung/0")


def unit_config(width: int, design: str, blocks: int | None,
                inputs: bool = True, levels: int = 1) -> config.Config:
    cell, wires, *local = design.split("/")
    if local[1:] == ["increment"]:
        local = local[:1]
        increment = True
    elif not local[1:]:
        increment = False
    else:
        raise SystemExit(f"unknown design {design!r}: <cell>/<wires>[/<local>[/increment]]")
    keys = {"name": "gen", "width": width, "pipeline": "blocks" if blocks else "levels",
            "cell": cell, "wire_registers": int(wires), "register_inputs": inputs,
            "levels_per_stage": levels}
    if blocks:
        keys["block_width"] = blocks
    if local:
        keys["local_width"] = int(local[0])
    if increment:
        keys["carry_increment"] = True
    return config.from_mapping(keys)


def critical(store, versions, device, plan, text, seed, kind):
    """The first seed's critical path (start -> end cell) and whether it ends in the unit,
    read back from the cache."""
    hit = store.get(cache.key({"bench": kind, "verilog": text}, device.name, seed, versions),
                    seed)
    if not hit or hit.status != "ok":
        return "", None
    return f"{hit.start} -> {hit.end}", harness.inside_unit(hit.end, plan)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--device", default="ecp5-85k")
    ap.add_argument("--width", type=int, default=64)
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--only", help="comma-separated designs "
                    "<cell>/<wire_registers>[/<local_width>[/increment]]")
    ap.add_argument("--blocks", type=int, help="measure blocks mode with this block width")
    ap.add_argument("--no-peer", action="store_true", help="leave out the registered a + b")
    ap.add_argument("--no-input-register", action="store_true",
                    help="units without `register_inputs` (stage 1 reads the harness registers)")
    ap.add_argument("--levels-per-stage", type=int, default=1,
                    help="prefix levels between register ranks (default 1)")
    ap.add_argument("--pnr-args", default="", help="extra nextpnr options for every run")
    ap.add_argument("--jobs", type=int, default=1, help="place-and-route runs at a time")
    args = ap.parse_args(argv)
    seeds = tuple(range(1, args.seeds + 1))
    device = devices.get(args.device)
    extra = tuple(args.pnr_args.split())
    if extra:
        family = dataclasses.replace(device.family, pnr_extra=device.family.pnr_extra + extra)
        device = dataclasses.replace(device, family=family)
    tag = "".join(f" {a}" for a in extra)  # part of the cache key: other options, other runs
    versions = toolflow.versions(device.family, "wheel")
    store = cache.Cache()
    t0 = time.monotonic()
    fab_cfg = config.from_mapping({"name": "fabric", "width": 32, "register_inputs": True})
    fabric = bench_fit.measure(store, versions, device, "fabric limit", fab_cfg,
                               bench_fit.fabric_verilog("fabric", 32), seeds, "fabric" + tag,
                               args.jobs)
    rows = [fabric]
    if not args.no_peer:
        peer_cfg = config.from_mapping({"name": "peer", "width": args.width,
                                        "register_inputs": True})
        rows.append(bench_fit.measure(store, versions, device, f"peer {args.width}", peer_cfg,
                                      bench_fit.peer_verilog("peer", args.width), seeds,
                                      "peer" + tag, args.jobs))
    paths = {}
    for design in (args.only.split(",") if args.only else DESIGNS):
        cfg = unit_config(args.width, design, args.blocks, not args.no_input_register,
                          args.levels_per_stage)
        plan = make_plan(cfg)
        text = emit.unit_verilog(plan)
        mode = f"blocks{args.blocks}" if args.blocks else "levels"
        name = (f"{mode} {design}" + (" plain" if args.no_input_register else "")
                + (f" lps{args.levels_per_stage}" if args.levels_per_stage > 1 else ""))
        row = bench_fit.measure(store, versions, device, name, cfg, text, seeds,
                                "generated" + tag, args.jobs)
        rows.append(row)
        paths[name], row["inside"] = critical(store, versions, device, plan, text, seeds[0],
                                              "generated" + tag)
        print(f"  measured {name}: {row['mhz']} MHz, plan {plan.registers.total} register "
              f"bits ({time.monotonic() - t0:.0f} s)", file=sys.stderr, flush=True)
    bench_fit.print_table(device, versions, seeds, rows, fabric)
    if extra:
        print(f"nextpnr options added to every run: {' '.join(extra)}")
    print("critical paths (first seed):")
    for name, path in paths.items():
        print(f"  {name:<24} {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
