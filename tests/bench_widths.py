"""Benchmark (not a test): build time and peak memory at the top of the width range.

Run:  python tests/bench_widths.py
Each case runs `carrypipe build` (default 1000 vectors) in a fresh Python process that
reports its own peak resident set size (ru_maxrss) when it exits.
"""

import subprocess
import sys
import tempfile
import time
from pathlib import Path

CASES = [
    ("w4096_one_slice", "width: 4096\ncell: native\n"),
    ("w4096_slice64", "width: 4096\ncell: native\nslice_width: 64\n"),
    ("w4096_ks_slice64", "width: 4096\ncell: kogge-stone\nslice_width: 64\n"),
    ("w1024_bit_per_stage", "width: 1024\ncell: ripple\nslice_width: 1\n"),
    ("w2048_bit_per_stage", "width: 2048\ncell: ripple\nslice_width: 1\n"),
    ("w4096_bk_levels", "width: 4096\ncell: brent-kung\npipeline: levels\n"),
    ("w4096_ks_levels_local16", "width: 4096\ncell: kogge-stone\npipeline: levels\n"
     "local_width: 16\nwire_registers: 2\n"),
    ("w4096_bk_blocks4", "width: 4096\ncell: brent-kung\npipeline: blocks\n"
     "block_width: 4\n"),
]


CHILD = ("import atexit, resource, sys\n"
         "atexit.register(lambda: sys.stderr.write('PEAK_KIB %d\\n' % "
         "resource.getrusage(resource.RUSAGE_SELF).ru_maxrss))\n"
         "sys.argv[0] = 'carrypipe'\n"
         "from carrypipe.cli import main\n"
         "main()\n")


def main() -> None:
    print(f"{'case':<24} {'seconds':>8} {'peak MiB':>9} {'Verilog MB':>11}")
    for name, body in CASES:
        with tempfile.TemporaryDirectory() as tmp:
            cfg = Path(tmp) / f"{name}.yaml"
            cfg.write_text(f"name: {name}\n{body}")
            t0 = time.monotonic()
            out = subprocess.run([sys.executable, "-c", CHILD, "build", str(cfg),
                                  "-o", str(Path(tmp) / "out")], capture_output=True, text=True)
            seconds = time.monotonic() - t0
            peak = int(out.stderr.rsplit("PEAK_KIB ", 1)[-1].split()[0])
            size = (Path(tmp) / "out" / f"{name}.v").stat().st_size / 1e6 if out.returncode == 0 else 0
            note = "" if out.returncode == 0 else f"  FAILED: {out.stderr.strip()[-200:]}"
            print(f"{name:<24} {seconds:8.1f} {peak / 1024:9.0f} {size:11.1f}{note}",
                  flush=True)


if __name__ == "__main__":
    main()
