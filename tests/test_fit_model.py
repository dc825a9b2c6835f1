"""The per-device delay model against captured place-and-route runs (no tools run here).

The references are outside the model: nextpnr's Fmax of units measured by
`tests/bench_model.py` (tests/data/fit/measured.json), Yosys's synthesized slices
(tests/data/fit/slice_depth.json), and nextpnr reports captured by hand (`*_w8_report.json`).
"""

import json
import statistics
from pathlib import Path

import pytest

import bench_model
from carrypipe import candidates, config, devices, model, timing, units
from carrypipe.plan import make_plan
from conftest import make

DATA = Path(__file__).parent / "data" / "fit"
CAPTURE = json.loads((DATA / "measured.json").read_text())
CAPTURED = sorted(CAPTURE["devices"])


def test_every_device_has_a_model_for_the_placer_fit_uses():
    assert CAPTURED == sorted(devices.DEVICES)
    for name, dev in devices.DEVICES.items():
        assert model.entry_for(name) is not None, name
        assert CAPTURE["devices"][name]["placer"] == model.placer(dev)
    assert model.placer(devices.get("ecp5-85k")) == "static"  # --placer static in the flow
    assert model.placer(devices.get("ice40-hx8k")) == model.DEFAULT_PLACER


def test_no_prediction_for_another_placer_or_device(monkeypatch):
    plan = make(width=16, slice_width=4)
    assert model.predict(plan, "ice40-hx8k") is not None
    assert model.predict(plan, "no-such-device") is None
    ecp5 = devices.get("ecp5-85k")
    other = devices.Device(ecp5.name, devices.Family(**{**ecp5.family.__dict__,
                                                        "pnr_extra": ("--placer", "sa")}),
                           ecp5.args, ecp5.logic_cells, ecp5.flip_flops, ecp5.part, None)
    monkeypatch.setitem(devices.DEVICES, "ecp5-85k", other)
    assert model.predict(plan, "ecp5-85k") is None  # calibrated for the static placer only


@pytest.mark.parametrize("name", CAPTURED)
def test_model_file_is_the_fit_of_the_capture(name):
    """The shipped coefficients are what the documented procedure fits to the capture."""
    shipped = model.models()["devices"][name][model.placer(devices.get(name))]
    fitted = bench_model.fitted_entry(name, CAPTURE)
    assert shipped["coefficients"] == fitted["coefficients"]
    assert shipped["kinds"] == fitted["kinds"]
    assert shipped["floor_ns"] == fitted["floor_ns"]
    tables = json.loads((DATA / "slice_depth.json").read_text())
    assert model.models()["depth"][devices.get(name).family.name] == \
        tables[devices.get(name).family.name]["tables"]


@pytest.mark.parametrize("name", CAPTURED)
def test_held_out_error(name):
    """Median error of the prediction over units the model was not fitted to (other widths):
    at most 10 %, and as the model file records it."""
    entry = CAPTURE["devices"][name]
    depth = bench_model.read_depth(devices.get(name))
    fitted = model.entry_for(name)
    held = bench_model.errors(entry, fitted, "held-out", depth)
    rel = [e for e, _, _ in held]
    assert len(rel) >= 15
    assert statistics.median(rel) <= 0.10
    assert fitted["held_out"] == {"units": len(rel), "median": round(statistics.median(rel), 4),
                                  "worst": round(max(rel), 4)}
    held_widths = {u["config"]["width"] for u in entry["units"] if u["set"] == "held-out"}
    cal_widths = {u["config"]["width"] for u in entry["units"] if u["set"] == "calibration"}
    assert not held_widths & cal_widths


def generated(width: int, unit: str = "adder"):
    base = config.from_mapping({"name": "dut", "width": width, "unit": unit})
    return candidates.generate(base, config.CELLS)


@pytest.mark.parametrize("name", ["ice40-up5k", "ecp5-85k", "machxo2-1200", "gowin-gw1n9",
                                  "nexus-40k"])
def test_every_candidate_gets_a_prediction(name):
    """Every mode, cell style and unit kind `fit` generates is predicted, within the span
    from the device's floor (register -> LUT -> register) down; the carry-save kinds (sums
    and multipliers, counter trees) are not, and `fit` bounds them by measured misses."""
    floor = 1000 / model.entry_for(name)["floor_ns"]
    for unit in config.UNITS:
        if units.KINDS[unit].tree:
            continue
        for cfg in generated(24, unit):
            mhz = model.predict(make_plan(cfg), name)
            assert mhz is not None and 0 < mhz <= floor + 0.1, (unit, cfg)
    for tree in ("dadda", "native"):
        cfg = config.from_mapping({"name": "dut", "unit": "sum", "operands": 4, "width": 12,
                                   "tree": tree})
        assert model.predict(make_plan(cfg), name) is None


@pytest.mark.parametrize("family,name", [("ice40", "ice40-hx8k"), ("ecp5", "ecp5-85k"),
                                         ("machxo2", "machxo2-1200"), ("gowin", "gowin-gw1n9"),
                                         ("nexus", "nexus-40k")])
def test_prediction_is_near_a_captured_run(family, name):
    """A report captured by hand (8 bits, two 4-bit native slices, carry_in, valid, sync
    reset, seed 1), apart from the calibration runs."""
    fam = devices.get(name).family
    rep = timing.place_report((DATA / f"{family}_w8_report.json").read_text(), fam)
    plan = make(width=8, slice_width=4, carry_in=True, valid=True, reset="sync")
    assert model.predict(plan, name) == pytest.approx(rep.mhz, rel=0.25)


def test_narrower_native_slices_are_predicted_faster():
    for name in devices.DEVICES:
        mhz = [model.predict(make(width=128, slice_width=k), name) for k in (128, 64, 32, 16)]
        assert mhz == sorted(mhz) and len(set(mhz)) == 4, name


def test_more_levels_per_stage_are_predicted_slower():
    for name in devices.DEVICES:
        mhz = [model.predict(make(width=64, pipeline="levels", cell="kogge-stone",
                                  levels_per_stage=n), name) for n in (1, 2, 3)]
        assert mhz == sorted(mhz, reverse=True), name


def test_slice_depth_interpolates_and_extends():
    depth = {"adder/native": [[8, 1, 8], [16, 1, 16], [32, 2, 32]]}
    assert model.slice_depth(depth, "adder", "native", 8) == (1, 8)
    assert model.slice_depth(depth, "adder", "native", 24) == (1.5, 24)
    assert model.slice_depth(depth, "adder", "native", 64) == (4, 64)  # last segment extended
    assert model.slice_depth(depth, "subtractor", "native", 16) == (1, 16)  # the adder's
    assert model.slice_depth(depth, "adder", "ripple", 8) is None


def test_calibrate_recovers_a_known_law():
    """Samples made by a known set of coefficients (from real plans' figures) give those
    coefficients back.  The prefix-mode samples carry the stage where their path ends, as
    measured units do (all but a few in the capture); the sliced ones do not, and the fit
    finds their slowest stage itself."""
    law = {"coefficients": {"chain0": 2.0, "pair0": 3.0, "chain_ns": 0.1, "logic0": 1.0,
                            "lut_ns": 0.7, "span_ns": 0.05, "fanout_ns": 0.08,
                            "size_ns": 0.02},
           "kinds": {"comparator": 0.5, "comparator:chain_ns": 0.03}, "floor_ns": 1.0}
    depth = bench_model.read_depth(devices.get("ecp5-85k"))
    plans = [make(width=w, slice_width=k, unit=u) for w in (24, 48, 96) for k in (4, 12, w)
             for u in ("adder", "comparator")]
    plans += [make(width=w, pipeline=p, cell=c, **keys) for w in (24, 48) for c in
              ("kogge-stone", "sklansky") for p, keys in
              (("levels", {"levels_per_stage": 1}), ("levels", {"levels_per_stage": 2}),
               ("blocks", {"block_width": 8}))]
    plans += [make(width=w, slice_width=k, cell="brent-kung") for w in (16, 32) for k in (4, 16)]
    samples = []
    for p in plans:
        fig = model.figures(p, depth)
        ns, stage = model.period(fig, law)
        samples.append(model.Sample(fig, 1000 / ns, None if p.mode == "slices" else stage))
    got = model.calibrate(samples, 1.0)
    for key, value in law["coefficients"].items():
        assert got["coefficients"][key] == pytest.approx(value, abs=2e-3), key
    for key, value in law["kinds"].items():
        assert got["kinds"][key] == pytest.approx(value, abs=2e-3), key


def test_model_file_is_plain_data():
    for name, placers in model.models()["devices"].items():
        for entry in placers.values():
            assert entry["source"] and entry["floor_ns"] > 0
            assert set(entry["coefficients"]) == set(model.TERMS)
            assert all(entry["coefficients"][t] >= 0 for t in model.SLOPES)
