"""`carrypipe plan`: the printed plan, the --chart file, what-if splits validated like the
config, and the chart that `build` writes beside the unit."""

from __future__ import annotations

import json
import re

import pytest
from click.testing import CliRunner

from carrypipe import chart
from carrypipe.cli import main
from conftest import make

UNIT = "name: acc\nwidth: 24\ncell: ripple\nslice_width: 8\ncarry_in: true\nvalid: true\n"


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def section(output: str, heading: str) -> list[str]:
    lines = output.splitlines()
    start = lines.index(heading) + 1
    end = lines.index("", start)
    return lines[start:end]


def register_lines(output: str) -> dict[str, int]:
    return {k: int(v) for k, v in (line.split() for line in section(output, "Register bits"))}


def stage_rows(output: str) -> list[str]:
    return [line for line in section(output, next(h for h in output.splitlines()
                                                  if h.startswith("Slices (LSB first")))
            if re.match(r"\s+\d+\s+\[", line)]


@pytest.mark.parametrize("width, k", [(24, 8), (64, 16), (4096, 512)])
def test_plan_prints_slices_latency_and_register_bits(write_config, width, k):
    s = width // k
    r = run("plan", write_config(f"name: acc\nwidth: {width}\nslice_width: {k}\n"))
    assert r.exit_code == 0, r.output
    assert f"Latency   {s} cycles" in r.output
    rows = stage_rows(r.output)
    assert [row.split()[1] for row in rows] == [f"[{k * i + k - 1}:{k * i}]" for i in range(s)]
    bits = register_lines(r.output)
    # Even split of S slices of k bits: skew = k*S*(S-1), deskew = k*S*(S-1)/2 (our own
    # derivation, plan.py's docstring); stage = every sum bit + one carry per hand-off + cout.
    assert bits["skew"] == k * s * (s - 1) and bits["deskew"] == k * s * (s - 1) // 2
    assert bits["stage"] == width + s
    assert bits["total"] == sum(v for kind, v in bits.items() if kind != "total")


def test_plan_marks_the_slowest_stage_only(write_config):
    # Ripple slices without a carry into slice 0: the 10-bit slice is the longest path.
    r = run("plan", write_config("name: acc\nwidth: 24\ncell: ripple\n"), "--slices", "7,10,7")
    assert r.exit_code == 0, r.output
    marked = [row.split()[0] for row in stage_rows(r.output) if row.endswith("<- slowest")]
    assert marked == ["1"]
    delays = [int(row.split()[5]) for row in stage_rows(r.output)]
    assert delays[1] == max(delays) and delays.count(max(delays)) == 1
    assert "Slowest: stage 1 at " in r.output


def test_plan_names_every_tied_slowest_stage(write_config):
    # Ripple slices of 10, 4, 10 bits, all with a carry-in: t_pg + (w-1) t_AO + t_xor
    # (common practice) gives 2 + 2*9 + 2 = 22 units for the outer two, 10 for the middle one.
    r = run("plan", write_config("name: acc\nwidth: 24\ncell: ripple\ncarry_in: true\n"),
            "--slices", "10,4,10")
    assert r.exit_code == 0, r.output
    marked = [row.split()[0] for row in stage_rows(r.output) if row.endswith("<- slowest")]
    assert marked == ["0", "2"]
    assert "Slowest: stages 0, 2 at 22 units, 12 more than the next slowest (10)." in r.output


def test_plan_marks_no_stage_when_all_tie(write_config):
    r = run("plan", write_config(UNIT))
    assert r.exit_code == 0
    assert not any(row.endswith("<- slowest") for row in stage_rows(r.output))
    assert "Every stage has the same unit-gate delay" in r.output


def test_plan_chart_is_written_with_its_folder(write_config, tmp_path):
    dest = tmp_path / "new" / "folder" / "acc.svg"
    r = run("plan", write_config(UNIT), "--chart", dest)
    assert r.exit_code == 0, r.output
    assert r.output.splitlines()[-1] == f"Chart: {dest}"
    assert dest.read_text() == chart.svg(make(name="acc", width=24, cell="ripple",
                                              slice_width=8, carry_in=True, valid=True))
    assert [p.name for p in dest.parent.iterdir()] == ["acc.svg"]  # no temporary left over


def test_a_chart_goes_through_a_link_and_keeps_the_mode_it_replaces(write_config, tmp_path):
    real = tmp_path / "docs" / "acc.svg"
    real.parent.mkdir()
    real.write_text("old")
    real.chmod(0o640)
    link = tmp_path / "acc.svg"
    link.symlink_to(real)
    r = run("plan", write_config(UNIT), "--chart", link)
    assert r.exit_code == 0, r.output
    assert link.is_symlink() and real.read_text().startswith("<svg")  # as a shell's > would
    assert real.stat().st_mode & 0o777 == 0o640


def test_plan_chart_follows_the_what_if(write_config, tmp_path):
    dest = tmp_path / "w.svg"
    r = run("plan", write_config(UNIT), "--slices", "4,10,10", "--chart", dest)
    assert r.exit_code == 0, r.output
    assert 'data-latency="3"' in dest.read_text()
    assert dest.read_text() == chart.svg(make(name="acc", width=24, cell="ripple",
                                              slices=[4, 10, 10], carry_in=True, valid=True))


BAD_WHAT_IF = [
    (["--slice-width", "x"], "--slice-width: key 'slice_width': value 'x' is not allowed; "
                             "expected an integer from 1 to width (24)"),
    (["--slice-width", "0"], "--slice-width: key 'slice_width': value 0 is not allowed; "
                             "expected an integer from 1 to width (24)"),
    (["--slice-width", "25"], "value 25 is not allowed; expected an integer from 1 to width (24)"),
    (["--slice-width", "-3"], "value '-3' is not allowed; expected an integer from 1 to width"),
    (["--slice-width", "1_6"], "value '1_6' is not allowed; expected an integer from 1 to width "
                               "(24), written in plain decimal digits"),
    (["--slices", "4_0,24"], "value '4_0,24' is not allowed; expected comma-separated positive "
                             "integers written in plain decimal digits"),
    (["--slices", "8,8"], "--slices: key 'slices': value [8, 8] is not allowed; expected "
                          "slice widths that sum to width (24), not 16"),
    (["--slices", "0,24"], "value [0, 24] is not allowed; expected a list of positive integers"),
    (["--slices", "8,,16"], "value '8,,16' is not allowed; expected comma-separated positive "
                            "integers"),
    (["--slices", "8,16", "--slice-width", "8"], "options --slice-width and --slices are both "
                                                 "given; expected at most one of them"),
    (["--chart", "acc.png"], "--chart: value 'acc.png' is not allowed; expected the name of an "
                             "SVG file ending in .svg"),
]


@pytest.mark.parametrize("args, message", BAD_WHAT_IF, ids=[" ".join(a) for a, _ in BAD_WHAT_IF])
def test_bad_options_one_line_exit_2_no_chart(write_config, tmp_path, args, message):
    dest = tmp_path / "out" / "c.svg"
    extra = [] if "--chart" in args else ["--chart", dest]
    r = run("plan", write_config(UNIT), *args, *extra)
    assert r.exit_code == 2
    lines = r.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("carrypipe: error: ") and message in lines[0]
    assert not dest.parent.exists()


@pytest.mark.parametrize("option, value", [("--slice-width", "8"), ("--slices", "16,16")])
@pytest.mark.parametrize("mode", ["levels", "blocks"])
def test_what_if_split_is_refused_in_prefix_modes(write_config, tmp_path, mode, option, value):
    # A prefix-mode unit takes no split (docs/modes.md): the what-if is a mistake, not a no-op.
    dest = tmp_path / "out" / "c.svg"
    cfg = write_config(f"name: acc\nwidth: 32\npipeline: {mode}\ncell: kogge-stone\n")
    r = run("plan", cfg, option, value, "--chart", dest)
    assert r.exit_code == 2 and not dest.parent.exists()
    assert r.output == (f"carrypipe: error: {option}: value '{value}' is not allowed with pipeline "
                        f"'{mode}' (unit.yaml); expected --slice-width or --slices only with "
                        "pipeline 'slices' (or a comparator's 'levels')\n")


def test_what_if_split_of_a_native_tree_names_the_tree(write_config):
    # The native tree leaves the whole operation to synthesis: no final adder, no split.
    cfg = write_config("name: m8\nunit: multiplier\nwidth: 8\ntree: native\n")
    r = run("plan", cfg, "--slice-width", "4")
    assert r.exit_code == 2
    assert r.output == ("carrypipe: error: --slice-width: value '4' is not allowed: unit.yaml "
                        "has no final adder to split (tree 'native')\n")


def test_chart_into_a_folder_or_under_a_file_is_refused(write_config, tmp_path):
    cfg = write_config(UNIT)
    (tmp_path / "taken.svg").mkdir()
    r = run("plan", cfg, "--chart", tmp_path / "taken.svg")
    assert r.exit_code == 2 and "(not a folder)" in r.output
    (tmp_path / "plain").write_text("x")
    r = run("plan", cfg, "--chart", tmp_path / "plain" / "c.svg")
    assert r.exit_code == 2
    assert re.fullmatch(r"carrypipe: error: --chart: value '.*c\.svg' is not allowed; .*plain "
                        r"is a file, not a folder\n", r.output)


def test_build_writes_the_chart_and_lists_it(write_config, tmp_path):
    out = tmp_path / "o"
    r = run("build", write_config(UNIT), "-o", out, "--vectors", 20)
    assert r.exit_code == 0, r.output
    svg = (out / "acc_chart.svg").read_text()
    assert svg == chart.svg(make(name="acc", width=24, cell="ripple", slice_width=8,
                                 carry_in=True, valid=True))
    assert "acc_chart.svg" in json.loads((out / "acc.json").read_text())["files"]
