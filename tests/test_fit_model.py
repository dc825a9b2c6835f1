"""The per-device delay model: least-squares calibration and predictions against real runs."""

import json
from pathlib import Path

import pytest

from carrypipe import devices, model, timing
from conftest import make

DATA = Path(__file__).parent / "data" / "fit"


def test_calibrate_recovers_a_line():
    # Points on period = 2.5 ns + 0.125 ns * x: ordinary least squares is exact on a line.
    pts = [(x, 1000 / (2.5 + 0.125 * x)) for x in (2, 4, 8, 16, 32)]
    fitted = model.calibrate(pts)
    assert fitted["base_ns"] == pytest.approx(2.5, abs=1e-3)
    assert fitted["per_unit_ns"] == pytest.approx(0.125, abs=1e-4)
    with pytest.raises(ValueError, match="^calibrate needs at least one point$"):
        model.calibrate([])


def test_table_model_interpolates_and_extends():
    pts = [[2, 3.0], [4, 4.0], [8, 10.0]]
    assert model.interpolate(pts, 4) == 4.0
    assert model.interpolate(pts, 6) == 7.0  # halfway between (4, 4) and (8, 10)
    assert model.interpolate(pts, 10) == 13.0  # the last segment extended
    assert model.interpolate(pts, 1) == 2.5  # the first segment extended
    table = model.calibrate_points([(2, 250), (2, 500), (2, 200), (4, 125)])
    assert table == {"points": [[2, 4.0], [4, 8.0]]}  # median period per x


def test_every_device_has_a_model():
    assert set(model.models()) == set(devices.DEVICES)


@pytest.mark.parametrize("device", ["ice40-hx8k", "ecp5-85k"])
def test_prediction_is_near_a_captured_run(device):
    fam = devices.get(device).family
    rep = timing.place_report((DATA / f"{fam.name}_w8_report.json").read_text(), fam)
    plan = make(width=8, slice_width=4, carry_in=True, valid=True, reset="sync")
    # The model is a screening tool: within 20 % of the measured figure is what fit needs
    # (candidates predicted within MARGIN of the target are measured anyway).
    assert model.predict(plan, device) == pytest.approx(rep.mhz, rel=0.20)


def test_narrower_native_slices_are_predicted_faster():
    mhz = [model.predict(make(width=64, slice_width=k), "ecp5-85k") for k in (64, 32, 16, 8)]
    assert mhz == sorted(mhz) and len(set(mhz)) == 4


def test_no_prediction_without_a_model():
    assert model.predict(make(width=8), "no-such-device") is None


def test_model_file_is_plain_data():
    text = (Path(model.__file__).parent / "data" / model.DATA).read_text()
    for dev in json.loads(text).values():
        assert dev["source"] and all(c["base_ns"] > 0 and c["per_unit_ns"] >= 0
                                     for c in dev["styles"].values())
