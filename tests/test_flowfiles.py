"""The files for build flows: the include file's defines are the plan's figures, the
instantiation template and the include file drop into a design that Icarus compiles and runs,
the filelist names the sources, and FuseSoC (the open CAPI2 package manager) finds the core
and runs its lint (Verilator) and simulation (Icarus) targets."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

from carrypipe import emit, flowfiles
from carrypipe.tools import which
from conftest import make

FUSESOC = which("fusesoc") or (
    str(Path(sys.executable).parent / "fusesoc")
    if (Path(sys.executable).parent / "fusesoc").exists() else None)
KEYS = dict(name="gate_add", width=20, slice_width=6, carry_in=True, valid=True, enable=True,
            reset="async")


@pytest.fixture
def built(tmp_path):
    plan = make(**KEYS)
    emit.write(emit.render(plan, vectors=80), tmp_path / "gate_add")
    return plan, tmp_path / "gate_add"


def test_the_manifest_lists_the_flow_files(built):
    plan, folder = built
    names = {"gate_add.vh", "gate_add_inst.v", "gate_add.f", "gate_add.core"}
    manifest = (folder / "gate_add.json").read_text()
    assert all(f'"{n}"' in manifest for n in names)


def test_the_include_file_holds_the_plans_figures(built):
    plan, folder = built
    text = (folder / "gate_add.vh").read_text()
    defines = dict(re.findall(r"^`define (GATE_ADD_\w+)\s+(\d+)", text, re.M))
    assert defines["GATE_ADD_LATENCY"] == str(plan.latency)
    assert defines["GATE_ADD_WIDTH"] == "20"
    assert defines["GATE_ADD_REGISTER_BITS"] == str(plan.registers.total)
    for p in plan.ports:
        if p.name not in ("clk", "rst", "en"):
            assert defines[f"GATE_ADD_{p.name.upper()}_WIDTH"] == str(p.width)
    assert text.splitlines()[1:3] == ["`ifndef GATE_ADD_VH", "`define GATE_ADD_VH"]


@pytest.mark.parametrize("enable", [True, False])
def test_the_latency_comment_names_en_only_when_the_unit_has_it(enable):
    """The latency counts rising edges; only a unit with `enable` counts those with en high."""
    text = flowfiles.include(make(**{**KEYS, "enable": enable}))
    line = next(x for x in text.splitlines() if "GATE_ADD_LATENCY" in x)
    assert line.endswith("rising edges with en high from inputs to results" if enable
                         else "// rising edges from inputs to results")


@pytest.mark.parametrize("slices, edge", [([20], "n"), ([6, 6, 8], "n+2")])
def test_the_timing_line_counts_edges_from_n(slices, edge):
    """Latency L: inputs set up before edge n are seen right after edge n + L - 1 (the
    unit's own registers, the first of them loaded on edge n); L = 1 is edge n itself."""
    plan = make(**{k: v for k, v in KEYS.items() if k != "slice_width"}, slices=slices)
    assert plan.latency == len(slices)
    text = flowfiles.instance(plan)
    assert f"give their results right after edge {edge};" in text.replace("\n//   ", " ")
    assert "n+0" not in text


def test_the_template_drops_into_a_design(built, tmp_path):
    """A top level written the way a user would: wires sized by the include file's defines,
    the template pasted as it is, a check that sum arrives `LATENCY` edges later."""
    if not which("iverilog"):
        pytest.skip("Icarus Verilog is not installed")
    plan, folder = built
    template = (folder / "gate_add_inst.v").read_text()
    top = folder / "top.v"
    top.write_text("\n".join([
        '`include "gate_add.vh"',
        "module top;",
        "  reg clk = 0, rst = 1, en = 1, cin = 0, in_valid = 1;",
        "  reg [`GATE_ADD_A_WIDTH-1:0] a = 20'h12345;",
        "  reg [`GATE_ADD_B_WIDTH-1:0] b = 20'h0abcd;",
        "  wire [`GATE_ADD_SUM_WIDTH-1:0] sum;",
        "  wire cout, out_valid;",
        template,
        "  always #5 clk = ~clk;",
        "  initial begin",
        "    #2 rst = 0;",
        "    repeat (`GATE_ADD_LATENCY) @(posedge clk);",
        f"    #1 if (sum == 20'h{(0x12345 + 0x0ABCD) % (1 << 20):x} && cout == 0 && out_valid)"
        " $display(\"OK\");",
        "    else $display(\"BAD %h\", sum);",
        "    $finish;",
        "  end",
        "endmodule", ""]))
    out = subprocess.run(["iverilog", "-g2005", "-I", ".", "-o", "top.vvp", "-c",
                          "gate_add.f", "top.v"], cwd=folder, capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    run = subprocess.run(["vvp", "-n", "top.vvp"], cwd=folder, capture_output=True, text=True)
    assert run.stdout.strip() == "OK"  # the expected sum is Python's


def test_the_template_names_every_port_once_in_order(built):
    plan, folder = built
    text = (folder / "gate_add_inst.v").read_text()
    assert re.findall(r"^\s+\.(\w+)\s*\(", text, re.M) == [p.name for p in plan.ports]
    assert f"latency {plan.latency}" in text


@pytest.mark.skipif(not (FUSESOC and which("verilator") and which("iverilog")),
                    reason="fusesoc (pip install 'carrypipe[test]'), verilator and iverilog "
                           "are needed")
def test_fusesoc_finds_the_core_and_runs_its_targets(built, tmp_path):
    plan, folder = built
    work = tmp_path / "work"
    work.mkdir()
    core = "carrypipe:units:gate_add"

    def fusesoc(target):
        return subprocess.run([FUSESOC, "--cores-root", str(folder), "run", "--target", target,
                               core], cwd=work, capture_output=True, text=True, timeout=600)

    lint = fusesoc("lint")
    assert lint.returncode == 0, lint.stdout + lint.stderr
    sim = fusesoc("sim")
    assert sim.returncode == 0, sim.stdout + sim.stderr
    assert "PASS 80 vectors" in sim.stdout
    # Teeth: the lint target fails on a unit with a warning.
    unit = folder / "gate_add.v"
    unit.write_text(unit.read_text().replace("endmodule", "  wire spare = a[0];\nendmodule"))
    assert fusesoc("lint").returncode != 0


@pytest.mark.parametrize("keys", [dict(unit="addsub", width=33, slice_width=8, carry_in=True,
                                       signed=True, valid=True),
                                  dict(unit="subtractor", width=1000, slice_width=250,
                                       carry_in=True, signed=True)])
def test_the_template_wraps_its_port_comments(keys):
    # A new-user trial: a port's meaning ran the template's lines to 105 columns and more.
    plan = make(name="u", **keys)
    text = flowfiles.instance(plan)
    assert max(map(len, text.splitlines())) <= 100
    assert re.findall(r"^\s+\.(\w+)\s*\(", text, re.M) == [p.name for p in plan.ports]
    lines = text.splitlines()
    column = next(ln for ln in lines if ln.startswith("  .")).index("//")
    continued = [ln for ln in lines if ln.startswith(" ") and ln.lstrip().startswith("//   ")]
    assert continued and all(ln.index("//") == column for ln in continued)


TOP_CORE = """CAPI=2:
name: "trial:design:top:1"
filesets:
  rtl:
    files: [top.v]
    file_type: verilogSource
    depend: ["carrypipe:units:gate_add"]
targets:
  default:
    filesets: [rtl]
    toplevel: top
"""


@pytest.mark.skipif(not FUSESOC, reason="fusesoc (pip install 'carrypipe[test]') is needed")
def test_a_design_that_depends_on_the_core_gets_the_vhdl_package_but_not_in_verilog_tools(
        built, tmp_path):
    """FuseSoC gives a dependent design the core's default target: the VHDL package for a
    mixed-language tool (GHDL here stands for one), the Verilog alone for Icarus, which
    would warn about a VHDL file."""
    plan, folder = built
    (tmp_path / "top").mkdir()
    (tmp_path / "top" / "top.core").write_text(TOP_CORE)
    (tmp_path / "top" / "top.v").write_text("module top; endmodule\n")

    def sources(tool):
        work = tmp_path / f"work_{tool}"
        work.mkdir()
        out = subprocess.run([FUSESOC, "--cores-root", str(folder), "--cores-root",
                              str(tmp_path / "top"), "run", "--setup", "--tool", tool,
                              "trial:design:top"], cwd=work, capture_output=True, text=True,
                             timeout=600)
        assert out.returncode == 0, out.stdout + out.stderr
        eda, = work.glob("build/*/*/*.eda.yml")
        names = re.findall(r"name: (\S+)", eda.read_text())
        return [Path(n).name for n in names], out.stdout + out.stderr

    mixed, _ = sources("ghdl")
    assert "gate_add_pkg.vhd" in mixed and "gate_add.v" in mixed
    verilog, log = sources("icarus")
    assert "gate_add.v" in verilog and "gate_add_pkg.vhd" not in verilog
    assert "unknown file type" not in log


def test_a_unit_without_a_package_lists_no_vhdl_in_its_core():
    """A name VHDL cannot carry (a reserved word here) gets no package, so no fileset."""
    files = emit.render(make(**{**KEYS, "name": "signal"}), vectors=10)
    assert "signal_pkg.vhd" not in files
    assert "vhdl" not in files["signal.core"]
    assert "vhdlSource" in emit.render(make(**KEYS), vectors=10)["gate_add.core"]
