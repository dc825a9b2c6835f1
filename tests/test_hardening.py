"""Hardening: random valid configs against Python integers, atomic output, byte-identical
builds (the fuzzed bad configs are in test_bad_configs.py).

The soak (documented in docs/verification.md) is the same property test, longer:
    CARRYPIPE_SOAK_CONFIGS=200 CARRYPIPE_SOAK_VECTORS=1000 CARRYPIPE_SOAK_SIM=icarus \\
        python -m pytest -q tests/test_hardening.py -k random_configs
"""

import os

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from carrypipe import emit, sim
from carrypipe.cli import main
from carrypipe.config import CELLS, ConfigError, from_mapping
from carrypipe.plan import make_plan
from carrypipe.vectors import suite

SOAK_CONFIGS = int(os.environ.get("CARRYPIPE_SOAK_CONFIGS", "60"))
SOAK_VECTORS = int(os.environ.get("CARRYPIPE_SOAK_VECTORS", "40"))
SOAK_SIM = os.environ.get("CARRYPIPE_SOAK_SIM", "amaranth")


@st.composite
def configs(draw):
    width = draw(st.integers(1, 48))
    keys = {"name": "u", "width": width, "cell": draw(st.sampled_from(CELLS))}
    split = draw(st.sampled_from(["one", "slice_width", "slices", "levels", "blocks"]))
    if split == "slice_width":
        keys["slice_width"] = draw(st.integers(1, width))
    elif split == "slices":
        parts, left = [], width
        while left:
            parts.append(draw(st.integers(1, left)))
            left -= parts[-1]
        keys["slices"] = parts
    elif split in ("levels", "blocks"):
        keys["pipeline"] = split
        keys["levels_per_stage"] = draw(st.integers(1, 3))
        keys["wire_registers"] = draw(st.integers(0, 2))
        if split == "blocks":
            keys["block_width"] = draw(st.integers(1, width))
    for key in ("carry_in", "carry_out", "valid", "enable", "register_inputs"):
        keys[key] = draw(st.booleans())
    keys["reset"] = draw(st.sampled_from(["none", "sync"]))
    return keys


@settings(max_examples=SOAK_CONFIGS, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(keys=configs(), seed=st.integers(0, 2**32 - 1))
def test_random_configs_add_like_python_integers(keys, seed):
    try:
        plan = make_plan(from_mapping(keys))
    except ConfigError:
        assume(False)  # e.g. a prefix mode with more wire registers than levels
    result = sim.run(plan, suite(plan, SOAK_VECTORS, seed), SOAK_SIM)
    assert result.passed, f"{keys}: {result.message}"


GOOD = {"name": "u", "width": 8, "slice_width": 4, "cell": "ripple"}
def test_failed_build_leaves_the_folder_as_it_was(tmp_path, monkeypatch):
    plan = make_plan(from_mapping(GOOD))
    out = tmp_path / "out"
    emit.write(emit.render(plan, vectors=20), out)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    other = make_plan(from_mapping({**GOOD, "width": 12}))
    files = emit.render(other, vectors=20)
    calls = {"n": 0}
    real = os.fdopen

    def failing_fdopen(*args, **kwargs):
        calls["n"] += 1
        if calls["n"] == 3:
            raise OSError(28, "No space left on device")
        return real(*args, **kwargs)

    monkeypatch.setattr(os, "fdopen", failing_fdopen)
    with pytest.raises(OSError):
        emit.write(files, out)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before

    def failing_report(plan):
        raise RuntimeError("injected failure while rendering")

    monkeypatch.setattr(emit.report, "report", failing_report)
    with pytest.raises(RuntimeError):
        emit.write(emit.render(other, vectors=20), out)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before


def test_same_config_same_bytes_from_any_folder(tmp_path, monkeypatch):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 20\nslice_width: 6\ncell: brent-kung\nvalid: true\n")
    runner = CliRunner()
    trees = []
    for where, arg in (("one", str(cfg)), ("two/deeper", "../../u.yaml")):
        folder = tmp_path / where
        folder.mkdir(parents=True)
        monkeypatch.chdir(folder)
        res = runner.invoke(main, ["build", arg, "-o", "built"])
        assert res.exit_code == 0, res.output
        trees.append({p.name: p.read_bytes() for p in (folder / "built").iterdir()})
    assert trees[0] == trees[1]
    assert not any(str(tmp_path).encode() in data for data in trees[0].values())




def test_top_of_the_range_builds():
    """W = 4096 in 64-bit slices emits and keeps its register count (time: bench_widths.py)."""
    plan = make_plan(from_mapping({"name": "u", "width": 4096, "slice_width": 64}))
    text = emit.unit_verilog(plan)
    assert "reg [4095:4032] sum_stage_63;" in text
    assert text.count("sum_stage_") >= 64
