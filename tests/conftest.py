"""Shared fixtures: small configs, and the one simulation helper every simulating test uses."""

from __future__ import annotations

import contextlib
import os
import threading

import pytest

from carrypipe import config, plan, sim, vectors
from carrypipe.tools import which

needs_icarus = pytest.mark.skipif(not (which("iverilog") and which("vvp")),
                                  reason="Icarus Verilog (iverilog, vvp) is not on PATH")


def make(**keys) -> plan.Plan:
    """A plan from config keys (name defaults to 'dut')."""
    keys.setdefault("name", "dut")
    return plan.make_plan(config.from_mapping(keys))


def simulate(p: plan.Plan, simulator: str = "amaranth", count: int = 120, seed: int = 1):
    """Directed + seeded random vectors through `p` on `simulator`; assert all match Python."""
    result = sim.run(p, vectors.suite(p, count, seed), simulator)
    assert result.passed, result.message
    return result


@pytest.fixture
def write_config(tmp_path):
    """Write YAML text to a config file and return its path."""
    def _write(text: str, name: str = "unit.yaml"):
        path = tmp_path / name
        path.write_text(text)
        return path
    return _write


@contextlib.contextmanager
def fifo_watchdog(fifo, seconds: float = 10):
    """Guard a test that reads FIFO `fifo`: should the reader block (a regression), a writer
    opens and closes it after `seconds`, ending the read with EOF; the yielded list then
    holds True, which the test asserts against."""
    fired = []

    def unblock():
        fired.append(True)
        os.close(os.open(fifo, os.O_WRONLY))

    watchdog = threading.Timer(seconds, unblock)
    watchdog.daemon = True
    watchdog.start()
    try:
        yield fired
    finally:
        watchdog.cancel()
