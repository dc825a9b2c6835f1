"""The emitted testbench never passes on what it did not check: a missing, empty or short
vectors file, a VECTORS parameter larger than the file, a damaged entry, or an X on an output
each end in a FAIL line and a non-zero exit, in Icarus and in Verilator (where missing
entries read as 0, not X: every entry carries its own number, so they are caught too)."""

from __future__ import annotations

import subprocess

import pytest

from carrypipe import emit
from carrypipe.tools import which
from conftest import make

icarus = pytest.mark.skipif(not (which("iverilog") and which("vvp")),
                            reason="Icarus Verilog is not installed")
verilator = pytest.mark.skipif(not which("verilator"),
                               reason="Verilator is not installed")
COUNT = 60


@pytest.fixture
def built(tmp_path):
    plan = make(name="u", width=8, slice_width=3, carry_in=True, valid=True, enable=True)
    emit.write(emit.render(plan, vectors=COUNT, seed=3), tmp_path / "b")
    return tmp_path / "b"


def run_icarus(folder, *defines: str):
    compiled = subprocess.run(["iverilog", "-g2005", *defines, "-o", "tb.vvp", "u.v", "u_tb.v"],
                              cwd=folder, capture_output=True, text=True, timeout=120)
    assert compiled.returncode == 0, compiled.stderr
    return subprocess.run(["vvp", "-n", "tb.vvp"], cwd=folder, capture_output=True, text=True,
                          timeout=120)


def run_verilator(folder, *params: str):
    compiled = subprocess.run(["verilator", "--binary", "--timing", "-Wno-fatal", *params,
                               "--top-module", "u_tb", "u.v", "u_tb.v"], cwd=folder,
                              capture_output=True, text=True, timeout=600)
    assert compiled.returncode == 0, compiled.stderr
    return subprocess.run(["obj_dir/Vu_tb"], cwd=folder, capture_output=True, text=True,
                          timeout=120)


def verdict(out) -> str:
    found = [line for line in out.stdout.splitlines() if line.startswith(("PASS", "FAIL"))]
    return found[-1] if found else ""


def truncate(folder, keep: int) -> None:
    path = folder / "u_vectors.hex"
    path.write_text("".join(path.read_text().splitlines(keepends=True)[:keep]))


@icarus
def test_icarus_passes_a_whole_file(built):
    out = run_icarus(built)
    assert out.returncode == 0 and verdict(out) == f"PASS {COUNT} vectors, latency 3"


@icarus
@pytest.mark.parametrize("damage, message", [
    (lambda f: (f / "u_vectors.hex").unlink(), "FAIL cannot open the vectors file"),
    (lambda f: truncate(f, 0), "FAIL the vectors file u_vectors.hex holds 0 of the 60"),
    (lambda f: truncate(f, 25), "FAIL the vectors file u_vectors.hex holds 25 of the 60"),
], ids=["missing", "empty", "short"])
def test_icarus_fails_on_a_damaged_file(built, damage, message):
    damage(built)
    out = run_icarus(built)
    assert out.returncode != 0 and verdict(out).startswith(message), out.stdout


@icarus
def test_icarus_fails_on_an_entry_with_x(built):
    path = built / "u_vectors.hex"
    lines = path.read_text().splitlines()
    lines[7] = "x" + lines[7][1:]  # the top hex digit holds the entry's number (its tag)
    path.write_text("\n".join(lines) + "\n")
    out = run_icarus(built)
    assert out.returncode != 0
    assert verdict(out).startswith("FAIL the vectors file u_vectors.hex holds 7 of the 60")


@icarus
def test_icarus_fails_when_vectors_exceeds_the_file(built):
    out = run_icarus(built, "-Pu_tb.VECTORS=80")
    assert out.returncode != 0
    assert verdict(out).startswith("FAIL the vectors file u_vectors.hex holds 60 of the 80")


@icarus
def test_icarus_fails_on_an_x_output(built):
    unit = built / "u.v"
    text = unit.read_text()
    assert "  assign sum = " in text
    unit.write_text(text.replace("  assign sum = ", "  assign sum = 8'bxxxxxxx0 ^ ", 1))
    out = run_icarus(built)
    assert out.returncode != 0 and verdict(out).startswith("FAIL vector 0 ")


@verilator
def test_verilator_fails_on_short_files_and_a_large_vectors(built):
    out = run_verilator(built, "-GVECTORS=80")
    assert out.returncode != 0
    assert verdict(out).startswith("FAIL the vectors file u_vectors.hex holds 60 of the 80")
    assert verdict(run_verilator(built)) == f"PASS {COUNT} vectors, latency 3"
    for damage, message in ((lambda: truncate(built, 12),
                             "FAIL the vectors file u_vectors.hex holds 12 of the 60"),
                            (lambda: (built / "u_vectors.hex").unlink(),
                             "FAIL cannot open the vectors file")):
        damage()
        out = subprocess.run(["obj_dir/Vu_tb"], cwd=built, capture_output=True, text=True,
                             timeout=120)
        assert out.returncode != 0 and verdict(out).startswith(message), out.stdout
