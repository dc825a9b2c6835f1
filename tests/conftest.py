"""Shared fixtures: small configs, and the one simulation helper every simulating test uses."""

from __future__ import annotations

import shutil

import pytest

from carrypipe import config, plan, sim, vectors

needs_icarus = pytest.mark.skipif(not (shutil.which("iverilog") and shutil.which("vvp")),
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
