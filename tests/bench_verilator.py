"""Benchmark (not a test): one million random vectors of a 256-bit adder through Verilator.

Run:  python tests/bench_verilator.py [VECTORS]
Prints the time of each step (vector generation, vector file, compile + run) and vectors/s
for the whole `carrypipe check --sim verilator` path.  Aim: under 60 s on a 2-core machine.
"""

import sys
import time

from carrypipe import sim
from carrypipe.config import from_mapping
from carrypipe.plan import make_plan
from carrypipe.vectors import hex_lines, suite


def main(count: int) -> None:
    plan = make_plan(from_mapping({"name": "bench256", "width": 256, "cell": "native",
                                   "slice_width": 32, "carry_in": True, "valid": True}))
    t0 = time.monotonic()
    vecs = suite(plan, count, 1)
    t1 = time.monotonic()
    text = hex_lines(plan, vecs)
    t2 = time.monotonic()
    result = sim.run(plan, vecs, "verilator")
    t3 = time.monotonic()
    print(f"vectors: {count}, 256-bit adder, 8 slices of 32 bits, latency {plan.latency}")
    print(f"  generate vectors   {t1 - t0:6.1f} s")
    print(f"  vector file        {t2 - t1:6.1f} s  ({len(text) / 1e6:.0f} MB)")
    print(f"  verilator (write, compile, run; regenerates the file) {t3 - t2:6.1f} s")
    total = (t1 - t0) + (t3 - t2)
    print(f"  end to end         {total:6.1f} s  = {count / total:,.0f} vectors/s")
    print(f"  verdict            {result.message}")
    sys.exit(0 if result.passed else 1)


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
