"""How many single-operator and bit-range mutants of emitted units `prove` catches, and how many
the emitted testbench catches at its default vector count (a measurement, not a test).

    python tests/bench_mutants.py            # every unit of tests/mutants.py::UNITS
    python tests/bench_mutants.py --vectors 200

Each mutant is one operator swapped or one part-select shifted in one line of logic of the
emitted Verilog (tests/mutants.py).  `prove` runs on the mutant's text; the testbench runs in
Icarus Verilog with the build's own vectors.  A mutant the testbench misses is one whose
effect the default vectors do not reach; the proof covers every input.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from mutants import UNITS, mutants  # noqa: E402

from carrypipe import emit, prove  # noqa: E402
from carrypipe.config import from_mapping  # noqa: E402
from carrypipe.plan import make_plan  # noqa: E402
from carrypipe.tools import which


def testbench_catches(files: dict, text: str) -> bool:
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        for name, body in {**files, "u.v": text}.items():
            (work / name).write_text(body)
        comp = subprocess.run(["iverilog", "-g2005", "-o", "tb.vvp", "u.v", "u_tb.v"], cwd=work,
                              capture_output=True, text=True, timeout=120)
        if comp.returncode != 0:
            return True  # does not even compile with the testbench
        out = subprocess.run(["vvp", "-n", "tb.vvp"], cwd=work, capture_output=True, text=True,
                             timeout=300)
        return out.returncode != 0 or "PASS" not in out.stdout


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--vectors", type=int, default=emit.DEFAULT_VECTORS)
    args = ap.parse_args()
    if not which("iverilog"):
        sys.exit("Icarus Verilog is needed for the testbench column")
    print(f"{'unit':<58} {'mutants':>7} {'prove':>6} {'tb':>6}")
    totals = [0, 0, 0]
    start = time.monotonic()
    for keys in UNITS:
        plan = make_plan(from_mapping({"name": "u", **keys}))
        files = emit.render(plan, vectors=args.vectors)
        found = mutants(files["u.v"])
        by_proof = sum(not prove.prove(plan, verilog=text).proved for _, text in found)
        by_tb = sum(testbench_catches(files, text) for _, text in found)
        label = ", ".join(f"{k}={v}" for k, v in keys.items())[:58]
        print(f"{label:<58} {len(found):>7} {by_proof:>6} {by_tb:>6}", flush=True)
        for k, n in enumerate((len(found), by_proof, by_tb)):
            totals[k] += n
    print(f"{'all':<58} {totals[0]:>7} {totals[1]:>6} {totals[2]:>6}")
    print(f"testbench at {args.vectors} vectors; {time.monotonic() - start:.0f} s")


if __name__ == "__main__":
    main()
