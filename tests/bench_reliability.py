"""Benchmark (not a test): output folders under concurrent builds, orphans after timeouts
and signals.  Prints the figures of the README's "Reliability" section.

Run:  python tests/bench_reliability.py [--pairs 500] [--cli-pairs 50] [--rounds 5]

- pairs: two builds of different configs released together by a barrier, straight into
  `emit.write`, into one folder (every third pair into a folder that does not exist yet);
  after each pair the folder must hold exactly one of the two builds, byte for byte.
- cli-pairs: the same with two `carrypipe build` processes started together.
- rounds: each timeout and signal case of tests/test_processes.py, run that many times;
  the living processes of carrypipe's session left after it exits are counted.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from test_output import A, B, _writer, whole  # noqa: E402
from test_processes import carrypipe, finish, orphans, wait_for  # noqa: E402

from carrypipe import emit  # noqa: E402
from carrypipe.config import from_mapping  # noqa: E402
from carrypipe.plan import make_plan  # noqa: E402
from carrypipe.tools import which


def _fresh(out: Path, pair: int) -> None:
    if pair % 3 == 0 and out.exists():
        shutil.rmtree(out)


def direct_pairs(count: int, work: Path) -> tuple[int, int, set]:
    builds = [emit.render(make_plan(from_mapping(k)), vectors=30) for k in (A, B)]
    ctx = multiprocessing.get_context("fork")
    errors = ctx.Queue()
    out, failed, mixed, seen = work / "direct" / "o", 0, 0, set()
    for pair in range(count):
        _fresh(out, pair)
        barrier = ctx.Barrier(2)
        procs = [ctx.Process(target=_writer, args=(f, out, barrier, errors)) for f in builds]
        for p in procs:
            p.start()
        for p in procs:
            p.join()
        while not errors.empty():
            errors.get()
            failed += 1
        k = whole(out, builds)
        mixed += k < 0
        seen.add(k)
    return failed, mixed, seen


def cli_pairs(count: int, work: Path) -> tuple[int, int, set]:
    builds = [emit.render(make_plan(from_mapping(k)), vectors=30) for k in (A, B)]
    cfgs = []
    for keys in (A, B):
        path = work / f"{keys['name']}.yaml"
        path.write_text("".join(f"{k}: {str(v).lower() if isinstance(v, bool) else v}\n"
                                for k, v in keys.items()))
        cfgs.append(path)
    env = {**os.environ, "PYTHONPATH": str(HERE.parent / "gen")}
    out, failed, mixed, seen = work / "cli" / "o", 0, 0, set()
    for pair in range(count):
        _fresh(out, pair)
        procs = [subprocess.Popen([sys.executable, "-m", "carrypipe", "build", str(c), "-o",
                                   str(out), "--vectors", "30"], env=env,
                                  stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
                 for c in cfgs]
        for p in procs:
            _, err = p.communicate()
            failed += p.returncode != 0
        k = whole(out, builds)
        mixed += k < 0
        seen.add(k)
    return failed, mixed, seen


def fake_icarus(work: Path) -> Path:
    fake = work / "fakebin"
    fake.mkdir(exist_ok=True)
    (fake / "iverilog").write_text("#!/bin/sh\nsh -c 'sleep 120 & sleep 120' &\nsleep 120\n")
    (fake / "vvp").write_text("#!/bin/sh\nexit 0\n")
    for tool in fake.iterdir():
        tool.chmod(0o755)
    return fake


def signal_case(work, args, wait_word, how, path_first=None, env=None):
    proc = carrypipe(args, work, path_first, env)
    if wait_word:
        wait_for(proc.pid, wait_word, 120)
    if how == "SIGTERM":
        time.sleep(0.5)
        os.kill(proc.pid, signal.SIGTERM)
    elif how == "SIGINT":
        time.sleep(0.5)
        os.killpg(proc.pid, signal.SIGINT)
    code, _, _ = finish(proc, 120)
    return code, len(orphans(proc.pid))


def orphan_cases(rounds: int, work: Path) -> None:
    (work / "u.yaml").write_text("name: u\nwidth: 8\n")
    (work / "v.yaml").write_text("name: v\nwidth: 256\nslice_width: 8\ncell: kogge-stone\n")
    (work / "w.yaml").write_text("name: w512\nwidth: 512\nslice_width: 64\n")
    (work / "f.yaml").write_text("name: f\nwidth: 16\ncell: native\n")
    fake = fake_icarus(work)
    fit = ["fit", "f.yaml", "--target-mhz", "900", "--device", "ice40-hx8k", "--jobs", "2",
           "--no-cache", "--cells", "native,kogge-stone,brent-kung"]
    cases = [
        ("check, tool tree, --timeout 1", ["check", "u.yaml", "--sim", "icarus", "--timeout",
                                           "1"], "sleep 120", None, fake, None),
        ("check, tool tree, SIGTERM", ["check", "u.yaml", "--sim", "icarus"], "sleep 120",
         "SIGTERM", fake, None),
        ("check, tool tree, SIGINT to the group", ["check", "u.yaml", "--sim", "icarus"],
         "sleep 120", "SIGINT", fake, None),
    ]
    if which("verilator"):
        cases.append(("check --sim verilator --timeout 2 (compiling)",
                      ["check", "v.yaml", "--sim", "verilator", "--timeout", "2"], None, None,
                      None, None))
    cases += [
        ("prove 512-bit --timeout 1", ["prove", "w.yaml", "--timeout", "1"], None, None, None,
         None),
        ("fit --jobs 2, SIGTERM", fit, "yowasp", "SIGTERM", None, "cache"),
        ("fit --jobs 2, SIGINT to the group", fit, "yowasp", "SIGINT", None, "cache"),
    ]
    total = 0
    for label, args, word, how, path_first, cache in cases:
        codes, left = [], 0
        for _ in range(rounds):
            env = {"CARRYPIPE_CACHE": str(work / "cache")} if cache else None
            code, n = signal_case(work, args, word, how, path_first, env)
            codes.append(code)
            left += n
        total += left
        print(f"  {label:<48} exit {sorted(set(codes))}, orphans {left} in {rounds} runs")
    print(f"  orphans in all: {total}")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--pairs", type=int, default=500)
    parser.add_argument("--cli-pairs", type=int, default=50)
    parser.add_argument("--rounds", type=int, default=5)
    opts = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="carrypipe-bench-") as tmp:
        work = Path(tmp)
        t = time.monotonic()
        failed, mixed, seen = direct_pairs(opts.pairs, work)
        print(f"concurrent pairs (emit.write, barrier): {opts.pairs} pairs, {failed} failed "
              f"builds, {mixed} mixed folders, winners {sorted(seen)} "
              f"({time.monotonic() - t:.1f} s)")
        t = time.monotonic()
        failed, mixed, seen = cli_pairs(opts.cli_pairs, work)
        print(f"concurrent pairs (carrypipe build): {opts.cli_pairs} pairs, {failed} failed "
              f"builds, {mixed} mixed folders, winners {sorted(seen)} "
              f"({time.monotonic() - t:.1f} s)")
        print(f"orphans after timeouts and signals ({opts.rounds} runs each):")
        orphan_cases(opts.rounds, work)


if __name__ == "__main__":
    main()
