"""Benchmark of the carry-save units against hand-written peers and the fabric (not a test).

On the same device and seeds, inside `fit`'s measurement harness, it measures
  - the peers: registered inputs, then one registered `a * b` (a multiplier) or
    `x0 + ... + x{N-1}` (a sum), left to synthesis with its defaults (DSP blocks allowed:
    `synth_ecp5` maps `*` onto MULT18X18D blocks; the iCE40 HX8K has none);
  - the fabric figure: register -> one LUT4 -> register (`bench_fit.fabric_verilog`);
  - generated units (carrypipe) of the presets below, or of `--configs` YAML files,
and prints MHz, LUTs, carry cells, DSP-free flip-flops and latency with the ratios
generated / peer and generated / fabric, and the best generated unit at each latency bound.

    python tests/bench_trees.py --devices ecp5-85k --preset mul32 --seeds 3 --jobs 2
    python tests/bench_trees.py --devices ecp5-85k,ice40-hx8k --preset sum8x32 --seeds 3

Results are cached like `fit`'s (docs/fit.md), so a rerun prints at once.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from bench_fit import fabric_verilog, measure, print_table  # noqa: E402

from carrypipe import cache, config, devices, emit, toolflow  # noqa: E402
from carrypipe.plan import make_plan  # noqa: E402


def mul_peer(name: str, m: int, n: int) -> str:
    """Registered inputs, then one registered a * b (what a designer writes by hand)."""
    return f"""module {name} (input wire clk, input wire [{m - 1}:0] a, input wire [{n - 1}:0] b,
  output reg [{m + n - 1}:0] product);
  reg [{m - 1}:0] a_r;
  reg [{n - 1}:0] b_r;
  always @(posedge clk) begin
    a_r <= a;
    b_r <= b;
    product <= a_r * b_r;
  end
endmodule
"""


def sum_peer(name: str, operands: int, w: int) -> str:
    """Registered inputs, then one registered x0 + ... + x{N-1}."""
    out = w + (operands - 1).bit_length()
    ins = ", ".join(f"input wire [{w - 1}:0] x{i}" for i in range(operands))
    regs = "\n".join(f"  reg [{w - 1}:0] x{i}_r;" for i in range(operands))
    loads = "\n".join(f"    x{i}_r <= x{i};" for i in range(operands))
    total = " + ".join(f"{{{out - w}'d0, x{i}_r}}" for i in range(operands))
    return f"""module {name} (input wire clk, {ins},
  output reg [{out - 1}:0] sum);
{regs}
  always @(posedge clk) begin
{loads}
    sum <= {total};
  end
endmodule
"""


def _mul(**keys) -> dict:
    return {"unit": "multiplier", "width": 32, **keys}


def _sum(**keys) -> dict:
    return {"unit": "sum", "operands": 8, "width": 32, **keys}


# Generated candidates: trees x levels per stage x final adder split, and native ranks.
PRESETS = {
    "mul32": [
        _mul(slices=[21, 21, 20]),
        _mul(slices=[21, 21, 20], cell="kogge-stone"),
        _mul(pipeline="levels", cell="kogge-stone", levels_per_stage=3),
        _mul(tree="wallace", slices=[19, 19, 18]),
        _mul(tree="wallace", pipeline="levels", cell="kogge-stone", levels_per_stage=3),
        _mul(partial_products="booth4", slices=[13, 13, 13, 12, 12]),
        _mul(partial_products="booth4", pipeline="levels", cell="kogge-stone",
             levels_per_stage=2),
        _mul(tree_levels_per_stage=2, pipeline="levels", cell="kogge-stone",
             levels_per_stage=1),
        _mul(tree="native", native_stages=1),
        _mul(tree="native", native_stages=3),
    ],
    "sum8x32": [
        _sum(slice_width=34),
        _sum(slice_width=18),
        _sum(slice_width=12),
        _sum(slice_width=9),
        _sum(tree="wallace", slice_width=12),
        _sum(pipeline="levels", cell="kogge-stone", levels_per_stage=2),
        _sum(pipeline="levels", cell="kogge-stone"),
        _sum(pipeline="levels", cell="kogge-stone", local_width=16, wire_registers=1),
        _sum(tree="native", native_stages=1),
        _sum(tree="native", native_stages=3),
    ],
}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", default="ecp5-85k")
    ap.add_argument("--preset", default="mul32", choices=sorted(PRESETS))
    ap.add_argument("--configs", nargs="*", help="YAML configs instead of the preset")
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--max-latency", type=int, default=None)
    args = ap.parse_args(argv)
    seeds = tuple(range(1, args.seeds + 1))
    store = cache.Cache()
    if args.configs:
        cfgs = [config.load(p) for p in args.configs]
    else:
        cfgs = [config.from_mapping({"name": "gen", **keys}) for keys in PRESETS[args.preset]]
    for dev_name in args.devices.split(","):
        device = devices.get(dev_name)
        versions = toolflow.versions(device.family, "wheel")
        t0 = time.monotonic()
        first = cfgs[0]
        shape = ({"width_b": first.width_b} if first.unit == "multiplier"
                 else {"operands": first.operands})
        peer_cfg = config.from_mapping({"name": "peer", "unit": first.unit, "width": first.width,
                                        **shape, "tree": "native", "register_inputs": True})
        if peer_cfg.unit == "multiplier":
            text = mul_peer("peer", peer_cfg.width, peer_cfg.width_b)
        else:
            text = sum_peer("peer", peer_cfg.operands, peer_cfg.width)
        peer = measure(store, versions, device, "peer (registered, synthesis)", peer_cfg, text,
                       seeds, "peer-" + peer_cfg.unit, args.jobs)
        fab_cfg = config.from_mapping({"name": "fabric", "width": 32, "register_inputs": True})
        fabric = measure(store, versions, device, "fabric limit", fab_cfg,
                         fabric_verilog("fabric", 32), seeds, "fabric", args.jobs)
        rows = [peer, fabric]
        for cfg in cfgs:
            plan = make_plan(cfg)
            if args.max_latency and plan.latency > args.max_latency:
                continue
            row = measure(store, versions, device, plan.label(), cfg, emit.unit_verilog(plan),
                          seeds, "generated", args.jobs)
            rows.append(row)
            print(f"  measured {row['name']} ({time.monotonic() - t0:.0f} s)", file=sys.stderr,
                  flush=True)
        for row in rows[2:]:
            row["peer"] = peer
        print_table(device, versions, seeds, rows, fabric)
        print(f"({time.monotonic() - t0:.0f} s)\n", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
