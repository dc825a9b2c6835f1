"""Benchmark of `fit`'s measurements: generated units against a hand-written peer and the fabric.

Not a test (pytest does not collect it): it places and routes real designs and prints one
table per device.  On the same device and seeds it measures
  - the peer: registered inputs, then one registered `a + b` (hand-written below), per width;
  - the fabric limit: register -> one LUT4 -> register (hand-written below);
  - generated units (carrypipe) at each slice width, per cell style;
each inside the same measurement harness, and prints MHz, LUTs, carry cells, flip-flops and
latency with the ratios generated/peer (same width) and generated/fabric limit.  With
`--calibrate` it also prints the delay-model constants fitted to the generated units.

    python tests/bench_fit.py --devices ice40-hx8k,ecp5-85k --widths 64 --seeds 3
    python tests/bench_fit.py --devices ecp5-85k --widths 256 --slice-widths 256,64,16,8
    python tests/bench_fit.py --devices machxo2-1200,gowin-gw1n9,nexus-40k --widths 16 \
        --peer-widths 16,32,64 --cells native,kogge-stone --seeds 3 --jobs 2

Every device of `carrypipe.devices` works, each family with its own harness pins (see
docs/fit.md); the fabric figure is measured in the same harness on every family.

Results are cached like `fit`'s (see docs/fit.md), so a rerun prints at once.
"""

from __future__ import annotations

import argparse
import datetime
import json
import statistics
import sys
import time

from carrypipe import cache, config, devices, emit, executor, model, toolflow
from carrypipe.plan import make_plan

PEER_WIDTHS = (32, 64, 128, 256)


def peer_verilog(name: str, w: int) -> str:
    """Registered inputs, then one registered a + b (what a designer writes by hand)."""
    return f"""module {name} (input wire clk, input wire [{w - 1}:0] a, input wire [{w - 1}:0] b,
  output reg [{w - 1}:0] sum, output reg cout);
  reg [{w - 1}:0] a_r, b_r;
  always @(posedge clk) begin
    a_r <= a;
    b_r <= b;
    {{cout, sum}} <= a_r + b_r;
  end
endmodule
"""


def fabric_verilog(name: str, w: int) -> str:
    """Register -> one 4-input LUT -> register on every bit (the fabric's limit)."""
    return f"""module {name} (input wire clk, input wire [{w - 1}:0] a, input wire [{w - 1}:0] b,
  output reg [{w - 1}:0] sum, output reg cout);
  reg [{w - 1}:0] a_r, b_r;
  wire [{w - 1}:0] a_n = {{a_r[0], a_r[{w - 1}:1]}}, b_n = {{b_r[0], b_r[{w - 1}:1]}};
  always @(posedge clk) begin
    a_r <= a;
    b_r <= b;
    sum <= a_r ^ b_r ^ a_n ^ b_n;
    cout <= a_r[0] ^ b_r[{w - 1}];
  end
endmodule
"""


def _place(item):
    """One seed of one design (an executor item: plain data, so it can run in a worker; the
    device itself, since bench_modes --pnr-args changes its nextpnr options)."""
    normalized, text, device, seed = item
    plan = make_plan(config.from_mapping(normalized))
    return toolflow.place_and_route(plan, text, device, (seed,))[0]


def measure(store, versions, device, name, cfg, text, seeds, kind, jobs=1):
    """Median over seeds of one design (cached by its Verilog text, device, seed, tools);
    seeds not in the cache run `jobs` at a time."""
    plan = make_plan(cfg)
    keys = {seed: cache.key({"bench": kind, "verilog": text}, device.name, seed, versions)
            for seed in seeds}
    found = {seed: store.get(k, seed) for seed, k in keys.items()}
    todo = [(cfg.normalized(), text, device, s) for s in seeds if found[s] is None]
    for item, hit in executor.Local(jobs).submit_all(_place, todo):
        found[item[3]] = hit
        store.put(keys[item[3]], hit)
    results = [found[s] for s in seeds]
    ok = [m for m in results if m.status == "ok"]
    first = results[0]
    return {"name": name, "latency": plan.latency, "mhz": statistics.median(m.mhz for m in ok)
            if ok else None, "luts": first.luts, "carry": first.carry, "ffs": first.flip_flops,
            "status": first.status, "inside": all(m.inside for m in ok) if ok else None,
            "x": model.feature(plan), "cell": cfg.cell, "width": cfg.width,
            "regs": plan.registers.total}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", default="ice40-hx8k,ecp5-85k")
    ap.add_argument("--widths", default="64", help="widths of the generated units")
    ap.add_argument("--cells", default="native,kogge-stone,brent-kung")
    ap.add_argument("--slice-widths", help="default: every power of two from the width down to 2")
    ap.add_argument("--peer-widths", default=",".join(map(str, PEER_WIDTHS)))
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--calibrate", action="store_true")
    ap.add_argument("--jobs", type=int, default=1, help="place-and-route runs at a time")
    args = ap.parse_args(argv)
    seeds = tuple(range(1, args.seeds + 1))
    store = cache.Cache()
    for dev_name in args.devices.split(","):
        device = devices.get(dev_name)
        versions = toolflow.versions(device.family, "wheel")
        t0 = time.monotonic()
        rows = []
        for w in map(int, args.peer_widths.split(",")):
            cfg = config.from_mapping({"name": "peer", "width": w, "register_inputs": True})
            rows.append(measure(store, versions, device, f"peer {w}", cfg,
                                peer_verilog("peer", w), seeds, "peer", args.jobs))
        cfg = config.from_mapping({"name": "fabric", "width": 32, "register_inputs": True})
        fabric = measure(store, versions, device, "fabric limit", cfg,
                         fabric_verilog("fabric", 32), seeds, "fabric", args.jobs)
        rows.append(fabric)
        peers = {r["width"]: r for r in rows if r["name"].startswith("peer")}
        for w in map(int, args.widths.split(",")):
            ks = ([int(k) for k in args.slice_widths.split(",")] if args.slice_widths
                  else [w >> i for i in range(w.bit_length()) if w >> i >= 2])
            for cell in args.cells.split(","):
                for k in ks:
                    cfg = config.from_mapping({"name": "gen", "width": w, "cell": cell,
                                               "slice_width": k})
                    plan = make_plan(cfg)
                    row = measure(store, versions, device, f"{cell} {w}/{k}", cfg,
                                  emit.unit_verilog(plan), seeds, "generated", args.jobs)
                    row["peer"] = peers.get(w)
                    rows.append(row)
                    print(f"  measured {row['name']} ({time.monotonic() - t0:.0f} s)",
                          file=sys.stderr, flush=True)
        print_table(device, versions, seeds, rows, fabric)
        if args.calibrate:
            gen = [r for r in rows if "peer" in r and r["mhz"]]
            styles = {}
            for cell in sorted({r["cell"] for r in gen}):
                pts = [(r["x"], r["mhz"]) for r in gen if r["cell"] == cell]
                styles[cell] = model.calibrate(pts)
            entry = {"floor_ns": round(1000 / fabric["mhz"], 4), "styles": styles}
            print(f"delay model for {device.name}: {json.dumps(entry, sort_keys=True)}")
        print(f"({time.monotonic() - t0:.0f} s)\n")
    return 0


def print_table(device, versions, seeds, rows, fabric):
    when = datetime.date.today().isoformat()
    print(f"{device.name} ({device.part}), {when}, {', '.join(versions.values())}, "
          f"seeds {','.join(map(str, seeds))} (median), harness: serial in, captured out")
    print(f"{'design':<24} {'lat':>3} {'MHz':>7} {'LUTs':>6} {'carry':>5} {'FFs':>6} "
          f"{'/peer':>6} {'/fabric':>7}  note")
    for r in rows:
        peer = r.get("peer")
        vs_peer = f"{r['mhz'] / peer['mhz']:.2f}" if peer and peer["mhz"] and r["mhz"] else ""
        vs_fab = f"{r['mhz'] / fabric['mhz']:.2f}" if fabric["mhz"] and r["mhz"] else ""
        note = "" if r["status"] == "ok" else r["status"]
        if r["inside"] is False:
            note = "critical path ends in the harness"
        mhz = f"{r['mhz']:.1f}" if r["mhz"] else "-"
        print(f"{r['name']:<24} {r['latency']:>3} {mhz:>7} {r['luts'] if r['luts'] is not None else '-':>6} "
              f"{r['carry'] if r['carry'] is not None else '-':>5} "
              f"{r['ffs'] if r['ffs'] is not None else '-':>6} {vs_peer:>6} {vs_fab:>7}  {note}")


if __name__ == "__main__":
    sys.exit(main())
