"""The VHDL package `<name>_pkg.vhd`: its component binds to the Verilog unit.

Checked against the tools, not against carrypipe's own text:
- GHDL (IEEE 1076, when installed) analyses the package and elaborates a VHDL design that
  binds its component to an entity whose ports are read from the emitted Verilog's module
  header; a component port of another name, direction or width fails elaboration.
- Icarus Verilog (when installed) compiles a VHDL wrapper that instantiates the component
  together with the Verilog unit, and the unit's own testbench, pointed at the wrapper,
  prints PASS through it.
The wrapper is written from the manifest's documented port list, as a user would.
"""

from __future__ import annotations

import json
import re
import subprocess

import pytest

from carrypipe import config, emit, units, vhdl
from carrypipe.plan import make_plan
from carrypipe.tools import which

GHDL = which("ghdl")
IVERILOG = which("iverilog") and which("vvp")

CASES = [
    {"name": "acc_add", "width": 16, "slice_width": 5, "valid": True, "reset": "sync"},
    {"name": "MixedCase", "unit": "subtractor", "width": 9, "pipeline": "levels",
     "cell": "kogge-stone", "signed": True, "enable": True},
    {"name": "cmp_w", "unit": "comparator", "width": 12, "pipeline": "levels",
     "slice_width": 4, "valid": True, "reset": "async"},
    {"name": "as1", "unit": "addsub", "width": 1, "carry_in": True},
    {"name": "acc_t", "unit": "accumulator", "width": 10, "slice_width": 4},
    {"name": "sum5", "unit": "sum", "operands": 5, "width": 6, "signed": True},
    {"name": "mul_b", "unit": "multiplier", "width": 5, "width_b": 3,
     "partial_products": "booth4", "register_inputs": True},
    {"name": "n" * 64, "width": 6, "carry_out": False},  # config.MAX_NAME: lines broken
]
IDS = [c["name"][:12] for c in CASES]


def _built(tmp_path, keys) -> tuple[dict, dict]:
    plan = make_plan(config.from_mapping(keys))
    files = emit.render(plan, vectors=60)
    emit.write(files, tmp_path / "u")
    return files, json.loads(files[f"{keys['name']}.json"])


def _vhdl_type(width: int) -> str:
    return "std_logic" if width == 1 else f"std_logic_vector({width - 1} downto 0)"


def _wrapper(name: str, ports: list[dict], bind: bool, instance: str | None = None) -> str:
    """A VHDL entity `<name>_vwrap` with the manifest's ports, instantiating the component
    from the package (`bind`: name the entity to bind, for GHDL's default-binding rule;
    `instance`: the instance statement to use, labelled `u_<name>`, instead of our own)."""
    decl = ";\n    ".join(f"{p['name']} : {'in' if p['direction'] == 'input' else 'out'} "
                          f"{_vhdl_type(p['width'])}" for p in ports)
    conn = ", ".join(f"{p['name']} => {p['name']}" for p in ports)
    label = f"u_{name}" if instance else "dut"
    body = instance or f"  dut : {name} port map ({conn});"
    spec = f"  for {label} : {name} use entity work.{name};\n" if bind else ""
    return (f"library ieee;\nuse ieee.std_logic_1164.all;\nuse work.{name}_pkg.all;\n"
            f"entity {name}_vwrap is\n  port (\n    {decl}\n  );\nend entity;\n"
            f"architecture wrap of {name}_vwrap is\n{spec}begin\n"
            f"{body}\nend architecture;\n")


def _printed_instance(package: str) -> str:
    """The instance the package prints in its comments, uncommented."""
    lines = package[package.index("-- An instance"):package.index("end package")].splitlines()
    first = next(k for k, line in enumerate(lines) if line.strip().startswith("--   u_"))
    return "\n".join(line.strip()[len("--"):] for line in lines[first:])


def _stub_from_verilog(name: str, verilog: str) -> str:
    """An entity with the ports the Verilog module header declares (drivers left open)."""
    header = verilog[verilog.index(f"module {name} ("):verilog.index(");")]
    found = re.findall(r"^\s*(input|output)\s+wire\s+(?:\[(\d+):0\]\s+)?(\w+)", header, re.M)
    assert found, header
    decl = ";\n    ".join(f"{n} : {'in' if d == 'input' else 'out'} "
                          f"{_vhdl_type(int(msb) + 1 if msb else 1)}" for d, msb, n in found)
    return (f"library ieee;\nuse ieee.std_logic_1164.all;\nentity {name} is\n  port (\n"
            f"    {decl}\n  );\nend entity;\narchitecture stub of {name} is\nbegin\n"
            "end architecture;\n")


def _run(folder, *cmd) -> subprocess.CompletedProcess:
    return subprocess.run(cmd, cwd=folder, capture_output=True, text=True, timeout=300)


def _ghdl_binds(folder, name: str, verilog: str, package: str, ports: list[dict],
                instance: str | None = None) -> str:
    """'' when GHDL analyses, elaborates and runs the design; else its messages."""
    (folder / "stub.vhd").write_text(_stub_from_verilog(name, verilog))
    (folder / "pkg.vhd").write_text(package)
    (folder / "wrap.vhd").write_text(_wrapper(name, ports, bind=True, instance=instance))
    for op, *rest in (["-a", "stub.vhd", "pkg.vhd", "wrap.vhd"], ["-e", f"{name}_vwrap"],
                      ["-r", f"{name}_vwrap", "--stop-time=1ns"]):
        run = _run(folder, GHDL, op, "--std=93", *rest)
        if run.returncode != 0:
            return run.stdout + run.stderr
    return ""


@pytest.mark.skipif(not GHDL, reason="GHDL is not installed")
@pytest.mark.parametrize("keys", CASES, ids=IDS)
def test_ghdl_binds_the_component_to_the_verilog_ports(tmp_path, keys):
    files, manifest = _built(tmp_path, keys)
    name = keys["name"]
    package = files[f"{name}_pkg.vhd"]
    assert f"{name}_pkg.vhd" in manifest["files"]
    work = tmp_path / "ghdl"
    work.mkdir()
    verilog = files[f"{name}.v"]
    assert _ghdl_binds(work, name, verilog, package, manifest["ports"]) == ""
    # VHDL-2008 reads the package too.
    std08 = tmp_path / "ghdl08"
    std08.mkdir()
    (std08 / "pkg.vhd").write_text(package)
    run = _run(std08, GHDL, "-a", "--std=08", "pkg.vhd")
    assert run.returncode == 0, run.stdout + run.stderr
    # The instance the package prints in its comments, as printed.
    printed = tmp_path / "ghdl_printed"
    printed.mkdir()
    assert _ghdl_binds(printed, name, verilog, package, manifest["ports"],
                       _printed_instance(package)) == ""
    # The same design with a component port a bit narrower, or an output turned into an
    # input, fails: the check can fail.
    mutants = [re.sub(r"(\n\s+\w+\s+: )out(\s+std_logic)", r"\1in \2", package, count=1)]
    wide = [p["width"] for p in manifest["ports"] if p["width"] > 1]
    if wide:
        mutants.append(package.replace(f"std_logic_vector({wide[0] - 1} downto 0)",
                                       f"std_logic_vector({wide[0] - 2} downto 0)", 1))
    for n, mutant in enumerate(mutants):
        assert mutant != package
        bad = tmp_path / f"ghdl_bad{n}"
        bad.mkdir()
        assert _ghdl_binds(bad, name, verilog, mutant, manifest["ports"]) != ""


def _icarus_through_vhdl(tmp_path, keys) -> subprocess.CompletedProcess:
    """Compile the unit, its package, a VHDL wrapper and the testbench pointed at the
    wrapper with Icarus; run the simulation when that compiles."""
    files, manifest = _built(tmp_path, keys)
    name = keys["name"]
    folder = tmp_path / "u"
    (folder / "wrap.vhd").write_text(_wrapper(name, manifest["ports"], bind=False))
    bench = files[f"{name}_tb.v"]
    pointed = re.sub(rf"^(\s*){name} dut \(", rf"\1{name}_vwrap dut (", bench, count=1,
                     flags=re.M)
    assert pointed != bench
    (folder / "tb.v").write_text(pointed)
    compiled = _run(folder, "iverilog", "-g2012", "-o", "sim.vvp", f"{name}_pkg.vhd",
                    "wrap.vhd", f"{name}.v", "tb.v")
    return compiled if compiled.returncode else _run(folder, "vvp", "-n", "sim.vvp")


LOWER = [c for c in CASES if c["name"] == c["name"].lower()]


@pytest.mark.skipif(not IVERILOG, reason="Icarus Verilog is not installed")
@pytest.mark.parametrize("keys", LOWER[:4], ids=[c["name"][:12] for c in LOWER[:4]])
def test_the_testbench_passes_through_a_vhdl_wrapper_in_icarus(tmp_path, keys):
    run = _icarus_through_vhdl(tmp_path, keys)
    assert run.returncode == 0, run.stderr
    assert re.search(r"^PASS \d+ vectors", run.stdout, re.M), run.stdout


@pytest.mark.skipif(not IVERILOG, reason="Icarus Verilog is not installed")
def test_icarus_looks_a_mixed_case_module_up_in_lower_case(tmp_path):
    """What the package's note on capitals says (Icarus Verilog 11.0 here): the
    component MixedCase is looked up as module mixedcase, which the Verilog does not have."""
    run = _icarus_through_vhdl(tmp_path, CASES[1])
    assert run.returncode != 0 and "Unknown module type: mixedcase" in run.stderr, run
    assert "Icarus Verilog does" in vhdl.case_note("MixedCase")


def _plan(name: str, unit: str = "adder"):
    return make_plan(config.from_mapping({"name": name, "unit": unit, "width": 4}))


@pytest.mark.parametrize("name, unit, why", [
    ("Process", "adder", "a VHDL reserved word"), ("add_", "adder", "not a VHDL identifier"),
    ("_add", "adder", "not a VHDL identifier"), ("a__b", "adder", "not a VHDL identifier"),
    ("Sum", "adder", "the unit's own port sum in VHDL"),
    ("LT", "comparator", "the unit's own port lt"),
    ("Work", "adder", "the name of a VHDL library"),
    ("log2", "adder", "declared by ieee.math_real")])
def test_a_name_vhdl_cannot_carry_gets_no_package(name, unit, why):
    """IEEE 1076 names: a basic identifier has a letter first, no underscore at the end or
    twice in a row, is no reserved word, and has no case (so `Sum` is the port `sum`);
    Verilog allows every name here.  GHDL refuses the ones that are no identifier."""
    plan = _plan(name, unit)
    files = emit.render(plan, vectors=10)
    assert not any(f.endswith(".vhd") for f in files)
    assert why in vhdl.unfit(plan)


@pytest.mark.skipif(not GHDL, reason="GHDL is not installed")
def test_ghdl_refuses_the_reserved_words_and_the_underscore_names(tmp_path):
    """The reserved words (listed from memory) against GHDL --std=08, which knows VHDL-2008
    but for five: the PSL words fairness, strong and assume_guarantee, and VHDL-2019's
    private and view, which it takes as names; and the names with bad underscores."""
    takes = {"assume_guarantee", "fairness", "strong", "private", "view"}
    words = sorted(vhdl.RESERVED - takes) + ["add_", "_add", "a__b"]
    (tmp_path / "ok.vhd").write_text("entity ok_name is\nend entity;\n")
    assert _run(tmp_path, GHDL, "-a", "--std=08", "ok.vhd").returncode == 0
    accepted = []
    for word in words:
        (tmp_path / "w.vhd").write_text(f"entity {word} is\nend entity;\n")
        if _run(tmp_path, GHDL, "-a", "--std=08", "w.vhd").returncode == 0:
            accepted.append(word)
    assert accepted == []


def test_every_port_can_be_a_vhdl_port():
    """Every unit kind's ports with every option that adds one: VHDL basic identifiers in
    lower case and no reserved word (`sub` is also a character literal of std.standard: a
    port may shadow it)."""
    names = set()
    for kind in units.KINDS.values():
        keys = {"name": "u", "unit": kind.name, "width": 4, "valid": True, "enable": True,
                "reset": "sync"}
        keys.update({k: True for k in ("carry_in", "signed") if k not in kind.refused})
        keys.update({"operands": 16} if kind.name == "sum" else {})
        names |= {p.name for p in make_plan(config.from_mapping(keys)).ports}
    assert {"sub", "overflow", "cout", "lt", "clear", "x15", "product"} <= names
    for name in names:
        assert name not in vhdl.RESERVED and re.fullmatch(r"[a-z](_?[a-z0-9])*", name), name


@pytest.mark.parametrize("name, note", [
    ("add_", "note: no add__pkg.vhd: add_ is not a VHDL identifier"),
    ("natural", "note: no natural_pkg.vhd: natural is declared by std.standard: a design "
     "that uses both would see neither (VHDL hides two such names from each other)"),
    ("Gain", "note: Gain_pkg.vhd: VHDL reads Gain without its case"),
    ("gain", None)])
def test_build_says_what_the_vhdl_package_cannot_do(tmp_path, name, note):
    from click.testing import CliRunner

    from carrypipe.cli import main

    cfg = tmp_path / "u.yaml"
    cfg.write_text(f"name: {name}\nwidth: 4\n")
    res = CliRunner().invoke(main, ["build", str(cfg), "-o", str(tmp_path / "o")])
    assert res.exit_code == 0, res.output
    notes = [line for line in res.output.splitlines() if line.startswith("note:")]
    assert notes == ([] if note is None else [next(n for n in notes if n.startswith(note))])
    assert (tmp_path / "o" / f"{name}_pkg.vhd").exists() == (note is None or "Gain" in note)


GHDL_SOURCES = {"std.standard": "std/v08/standard.vhdl", "std.textio": "std/v08/textio.vhdl",
                "ieee.std_logic_1164": "ieee2008/std_logic_1164.vhdl",
                "ieee.numeric_std": "ieee2008/numeric_std.vhdl",
                "ieee.math_real": "ieee2008/math_real.vhdl", "std.env": "std/env.vhdl"}


@pytest.mark.parametrize("package", sorted(GHDL_SOURCES))
def test_the_standard_names_kept_apart_are_those_the_packages_declare(package):
    """The names a component must not take against the VHDL-2008 sources of the standard
    packages that GHDL ships: every listed name is in the package's
    declarations, and every type, subtype, subprogram and constant it declares is listed
    (or a reserved word: the operators)."""
    from pathlib import Path

    source = Path("/usr/lib/ghdl/src") / GHDL_SOURCES[package]
    if not source.is_file():
        pytest.skip(f"GHDL's library source {source} is not installed")
    text = re.sub(r"--[^\n]*", "", source.read_text(encoding="latin-1"))
    words = {w.lower() for w in re.findall(r"[A-Za-z]\w*", text)}
    declared = {m.lower() for m in re.findall(
        r"(?i)\b(?:type|subtype|function|procedure|constant)\s+\"?([A-Za-z]\w*)", text)}
    listed = set(vhdl.DECLARED[package].split())
    assert listed <= words
    others = {n for ns in vhdl.DECLARED.values() for n in ns.split()}
    assert declared - others - vhdl.RESERVED <= {"universal_integer", "universal_real"}
    assert package in vhdl.unfit(_plan(sorted(listed)[0]))


@pytest.mark.skipif(not GHDL, reason="GHDL is not installed")
def test_two_packages_whose_names_meet_need_selected_names(tmp_path):
    """What the README says of `gain` and `gain_latency` used together: each declares
    `gain_latency` (a constant, a component), so neither is visible by its simple name."""
    for name in ("gain", "gain_latency"):
        files = emit.render(make_plan(config.from_mapping({"name": name, "width": 4})),
                            vectors=10)
        (tmp_path / f"{name}_pkg.vhd").write_text(files[f"{name}_pkg.vhd"])
    design = ("library ieee;\nuse ieee.std_logic_1164.all;\nuse work.gain_pkg.all;\n"
              "use work.gain_latency_pkg.all;\nentity top is\nend entity;\n"
              "architecture a of top is\n  constant k : natural := {};\nbegin\nend architecture;\n")
    (tmp_path / "simple.vhd").write_text(design.format("GAIN_LATENCY"))
    (tmp_path / "selected.vhd").write_text(design.format("work.gain_pkg.GAIN_LATENCY"))
    base = ["gain_pkg.vhd", "gain_latency_pkg.vhd"]
    simple = _run(tmp_path, GHDL, "-a", "--std=93", *base, "simple.vhd")
    assert simple.returncode != 0 and "gain_latency" in simple.stderr.lower(), simple
    (tmp_path / "work-obj93.cf").unlink(missing_ok=True)
    selected = _run(tmp_path, GHDL, "-a", "--std=93", *base, "selected.vhd")
    assert selected.returncode == 0, selected.stderr


@pytest.mark.skipif(not GHDL, reason="GHDL is not installed")
def test_the_readme_example_analyses_against_the_demo_package(tmp_path):
    """The README's VHDL lines, its `...` filled with an entity and the remaining signals,
    against the package of configs/demo.yaml, in GHDL."""
    from pathlib import Path

    root = Path(__file__).parent.parent
    readme = (root / "README.md").read_text()
    start = readme.index("```vhdl\n") + len("```vhdl\n")
    block = readme[start:readme.index("```", start)]
    first, middle, last = block.split("...\n")
    design = (first + "entity top is\nend entity;\narchitecture a of top is\n"
              "  signal clk, rst, cin, in_valid, cout, out_valid : std_logic;\n" + middle
              + "begin\n" + last + "end architecture;\n")
    plan = make_plan(config.load(str(root / "configs" / "demo.yaml")))
    (tmp_path / "pkg.vhd").write_text(vhdl.package(plan))
    (tmp_path / "top.vhd").write_text(design)
    run = _run(tmp_path, GHDL, "-a", "--std=93", "pkg.vhd", "top.vhd")
    assert run.returncode == 0, run.stdout + run.stderr


USES = {"file_open": 'file_open(f, "x.txt", read_mode);', "file_close": "file_close(f);",
        "endfile": "if endfile(f) then\n    end if;", "flush": "flush(f);",
        "deallocate": "deallocate(l);"}


@pytest.mark.skipif(not GHDL, reason="GHDL is not installed")
@pytest.mark.parametrize("name", sorted(USES))
def test_the_implicit_textio_names_meet_a_component_of_their_name(tmp_path, name):
    """The operations std.textio declares implicitly with its types (so not in its source
    text) against GHDL --std=08: a design using one analyses alone, and not beside a package
    whose component has its name; carrypipe writes no such package."""
    assert name in vhdl.IMPLICIT["std.textio"].split()
    assert "std.textio" in vhdl.unfit(_plan(name))
    (tmp_path / "p.vhd").write_text(f"package p is\n  component {name} is\n  end component;\n"
                                    "end package;\n")
    design = ("use std.textio.all;\n{}entity t is\nend entity;\narchitecture a of t is\n"
              "begin\n  process\n    file f : text;\n    variable l : line;\n  begin\n"
              f"    {USES[name]}\n    wait;\n  end process;\nend architecture;\n")
    (tmp_path / "alone.vhd").write_text(design.format(""))
    (tmp_path / "both.vhd").write_text(design.format("use work.p.all;\n"))
    alone = _run(tmp_path, GHDL, "-a", "--std=08", "alone.vhd")
    assert alone.returncode == 0, alone.stderr
    both = _run(tmp_path, GHDL, "-a", "--std=08", "p.vhd", "both.vhd")
    assert both.returncode != 0 and "conflicts" in both.stderr, both


@pytest.mark.skipif(not IVERILOG, reason="Icarus Verilog is not installed")
def test_icarus_reads_the_package_only_in_a_systemverilog_mode(tmp_path):
    """What the README says (Icarus Verilog 11.0 here): -g2012 compiles the package, -g2005
    stops at it."""
    files, _ = _built(tmp_path, LOWER[0])
    folder, pkg = tmp_path / "u", f"{LOWER[0]['name']}_pkg.vhd"
    assert pkg in files
    unit = f"{LOWER[0]['name']}.v"
    new = _run(folder, "iverilog", "-g2012", "-o", "p.vvp", pkg, unit)
    assert new.returncode == 0, new.stderr
    old = _run(folder, "iverilog", "-g2005", "-o", "p.vvp", pkg, unit)
    assert old.returncode != 0 and "syntax error" in old.stderr, old
