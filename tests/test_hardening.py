"""Hardening: random valid configs against Python integers, fuzzed bad configs, atomic output,
byte-identical builds, and clear messages for missing tools.

The soak (documented in docs/verification.md) is the same property test, longer:
    CARRYPIPE_SOAK_CONFIGS=200 CARRYPIPE_SOAK_VECTORS=1000 CARRYPIPE_SOAK_SIM=icarus \\
        python -m pytest -q tests/test_hardening.py -k random_configs
"""

import os
import random

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
BAD_VALUES = {
    "name": ["../x", "module", "1abc", "a b", "", "x" * 65, "endmodule", "$x", 7, None, True,
             ["u"], {"u": 1}, "a-b", "é"],
    "width": [0, -1, 4097, 10**30, -(10**30), "8", 8.0, 8.5, True, None, [8], {"w": 8}, "wide"],
    "slice_width": [0, -4, 9, 10**20, "4", 4.0, False, None, [4]],
    "slices": [[], [0, 8], [4, 4, 1], [9], [-1, 9], "4,4", [4.0, 4.0], [True, 7], None, 8,
               [[4], [4]]],
    "cell": ["kogge", "", 3, None, ["ripple"], "Ripple", "ripple "],
    "carry_in": ["yes", 1, 0, None, "true", [True]],
    "carry_out": ["no", 2, None],
    "valid": ["on", -1, 1.5],
    "enable": ["off", 1, {}],
    "reset": ["async", "", True, None, 0, "SYNC"],
    "register_inputs": ["true", 1],
    "unit": ["multiplier", None, 1],
    "pipeline": ["stages", None, 3],
}


def _bad_texts():
    """At least 500 invalid config texts (or bytes), each with what it exercises."""
    import yaml

    cases = []
    for key, values in BAD_VALUES.items():
        for value in values:
            cases.append((f"{key}={value!r}", yaml.safe_dump({**GOOD, key: value})))
    for key in ("name", "width"):
        cases.append((f"missing {key}", yaml.safe_dump({k: v for k, v in GOOD.items() if k != key})))
    for key in ("widht", "slice", "Name", "carry", "cells", "x", "1", "true"):
        cases.append((f"unknown {key}", yaml.safe_dump({**GOOD, key: 1})))
    cases.append(("both splits", yaml.safe_dump({**GOOD, "slices": [4, 4]})))
    cases += [("non-mapping " + t, t) for t in
              ("- 1\n- 2\n", "42\n", "just text\n", "[name, width]\n", "null\n", "~\n", "true\n",
               "'quoted'\n", "!!binary aGVsbG8=\n")]
    cases += [("empty", ""), ("blank", "   \n\n"), ("comment only", "# nothing\n"),
              ("bad yaml", "name: [u\nwidth: 8\n"), ("tab", "name:\tu\n\twidth: 8\n"),
              ("duplicate-ish", "name: u\nwidth: 8\nwidth: x\n"), ("nul", "name: u\x00\n"),
              ("python tag", "name: !!python/object:os.system ls\nwidth: 8\n"),
              ("huge", "name: u\nwidth: 8\n#" + "x" * (1 << 20) + "\n"),
              ("alias", "a: &a u\nname: *a\nwidth: 8\n"),
              ("bomb", "a: &a [x, x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a]\n"
                       "c: &c [*b, *b, *b, *b, *b, *b, *b]\nd: [*c, *c, *c, *c, *c, *c, *c]\n"),
              ("merge key", "base: &b {width: 8}\nname: u\n<<: *b\n")]
    rng = random.Random(4)
    for k in range(160):
        junk = bytes(rng.getrandbits(8) for _ in range(rng.randrange(1, 300)))
        cases.append((f"junk {k}", junk))
    for k in range(240):  # random mixes of good keys with one bad value
        key = rng.choice(list(BAD_VALUES))
        data = {kk: vv for kk, vv in GOOD.items() if rng.random() < 0.9 or kk not in ("name", "width")}
        data[key] = rng.choice(BAD_VALUES[key])
        cases.append((f"mix {k}: {key}={data[key]!r}", yaml.safe_dump(data)))
    return cases


BAD = _bad_texts()


def test_enough_bad_configs():
    assert len(BAD) >= 500


def test_bad_configs_give_one_line_and_exit_2(tmp_path):
    runner = CliRunner()
    out = tmp_path / "out"
    for what, text in BAD:
        cfg = tmp_path / "bad.yaml"
        cfg.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
        for args in (["build", str(cfg), "-o", str(out)], ["plan", str(cfg)]):
            res = runner.invoke(main, args)
            lines = res.output.strip().splitlines()
            assert res.exit_code == 2 and len(lines) == 1, (what, res.output, res.exception)
            assert lines[0].startswith("carrypipe: error: bad.yaml"), (what, lines)
            assert isinstance(res.exception, SystemExit), (what, res.exception)
        assert not out.exists(), what


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
    assert "reg [63:0] sum_stage_63" in text
    assert text.count("sum_stage_") >= 64
