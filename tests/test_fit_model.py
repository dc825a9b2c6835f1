"""The per-device delay model: least-squares calibration and predictions against real runs."""

import json
from pathlib import Path

import pytest

from carrypipe import devices, model, timing
from conftest import make

DATA = Path(__file__).parent / "data" / "fit"


def test_table_model_interpolates_and_extends():
    pts = [[2, 3.0], [4, 4.0], [8, 10.0]]
    assert model.interpolate(pts, 4) == 4.0
    assert model.interpolate(pts, 6) == 7.0  # halfway between (4, 4) and (8, 10)
    assert model.interpolate(pts, 10) == 13.0  # the last segment extended
    assert model.interpolate(pts, 1) == 2.5  # the first segment extended
    table = model.calibrate([(2, 250), (2, 500), (2, 200), (4, 125)])
    assert table == {"points": [[2, 4.0], [4, 8.0]]}  # median period per x


def test_devices_with_a_model():
    # iCE40 and ECP5 are calibrated; the newer families get no prediction until they are,
    # and fit measures their candidates (tests/test_fit_candidates.py, the bounded search).
    with_model = {d.name for d in devices.DEVICES.values() if d.family.name in ("ice40", "ecp5")}
    assert set(model.models()) == with_model
    assert model.predict(make(width=8), "gowin-gw1n9") is None


@pytest.mark.parametrize("device", ["ice40-hx8k", "ecp5-85k"])
def test_prediction_is_near_a_captured_run(device):
    fam = devices.get(device).family
    rep = timing.place_report((DATA / f"{fam.name}_w8_report.json").read_text(), fam)
    plan = make(width=8, slice_width=4, carry_in=True, valid=True, reset="sync")
    # The model is a screening tool: within 20 % of the measured figure is what fit needs
    # (candidates predicted within MARGIN of the target are measured anyway).
    assert model.predict(plan, device) == pytest.approx(rep.mhz, rel=0.20)


def test_narrower_native_slices_are_predicted_faster():
    mhz = [model.predict(make(width=128, slice_width=k), "ecp5-85k") for k in (128, 64, 32, 16, 8)]
    assert mhz == sorted(mhz) and len(set(mhz)) == 5


def test_no_prediction_without_a_model():
    assert model.predict(make(width=8), "no-such-device") is None


def test_model_file_is_plain_data():
    text = (Path(model.__file__).parent / "data" / model.DATA).read_text()
    for dev in json.loads(text).values():
        assert dev["source"] and dev["floor_ns"] > 0
        assert all(y > dev["floor_ns"] for c in dev["styles"].values() for _, y in c["points"])
