"""Run the external tools (simulators, Yosys, nextpnr): find them, bound them, end them whole.

Finding: the running Python environment first (the folder of `sys.executable` and the
`scripts` folder of `sysconfig`), so that `.venv/bin/carrypipe` finds the `yowasp-*` wheels of
its own venv without the venv being activated; then PATH.

Running: every tool runs in a process group of its own (inside carrypipe's session), so
that everything it starts (Verilator's make and compilers, say) can be ended with it.  The
whole group is ended (SIGTERM, then SIGKILL after `GRACE` seconds) when the time limit
passes, when carrypipe is interrupted (Ctrl-C, SIGTERM, SIGHUP: `signals`) and in worker processes
(`worker_init`); on Linux each tool and each worker process also gets PR_SET_PDEATHSIG, so
the tool itself (not what it started) and the workers die with carrypipe even when
carrypipe is killed outright.

Errors: `ToolError` and its subclasses are problems of the environment (exit status 3 on
the command line), each one line naming the tool.
"""

from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import os
import shutil
import signal
import subprocess
import sys
import sysconfig
import threading
import time
from pathlib import Path

GRACE = 2.0  # seconds between SIGTERM and SIGKILL of a tool's process group
_STEP = 0.25  # seconds between looks at a running tool


class ToolError(RuntimeError):
    """A problem of the environment with an external tool; the message is one line."""


class ToolMissing(ToolError):
    """The tool is not installed (the message says how to get it)."""


class ToolTimeout(ToolError):
    """The tool did not finish within its time limit (it has been ended)."""


class ToolBroken(ToolError):
    """The tool could not be started, crashed, or did not do its job."""


class Stopped(KeyboardInterrupt):
    """SIGTERM arrived: unwinds like Ctrl-C, so that every `finally` ends its tool groups."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


# ---- finding ----

def _environment_folders() -> list[str]:
    """The running Python's own folders for scripts, beside the interpreter first."""
    folders = [os.path.dirname(sys.executable), sysconfig.get_path("scripts")]
    return [f for f in dict.fromkeys(folders) if f]


def which(name: str) -> str | None:
    """The path of executable `name`: in the running Python environment, else on PATH."""
    for folder in _environment_folders():
        found = shutil.which(name, path=folder)
        if found:
            return found
    return shutil.which(name)


def find(name: str, install: str) -> str:
    """`which(name)`, or `ToolMissing` saying where it was looked for and how to `install` it."""
    found = which(name)
    if not found:
        raise ToolMissing(f"{name} is not installed (looked beside Python and on PATH); "
                          f"{install}")
    return found


WARMUP_NOTE = ("note: the first call of a WebAssembly tool (yowasp-*) on a machine can take "
               "about a minute while it compiles; later calls start in a second")


def compiled(tool: str) -> bool:
    """Whether the wheel of `tool` ("yosys", "nextpnr-ecp5", ...) has its WebAssembly module
    compiled on this machine.  yowasp-runtime (1.x, as the pinned wheels require; read from
    its source) keeps each compiled module in its cache folder under the SHA-1 of the module,
    and compiles one it does not find there, for about a minute.  False when that cannot be told (the
    wheel not importable here, say), so a caller says too much rather than too little."""
    import hashlib
    from importlib import resources

    package, wasm = "yowasp_" + tool.replace("-", "_"), f"{tool}.wasm"
    try:
        import platformdirs

        digest = hashlib.sha1(resources.files(package).joinpath(wasm).read_bytes()).hexdigest()
    except (ImportError, OSError):
        return False
    folder = os.environ.get("YOWASP_CACHE_DIR") or platformdirs.user_cache_dir(
        "YoWASP", appauthor=False)
    return os.path.isfile(os.path.join(folder, package, wasm, digest))


# ---- time limits ----

class Deadline:
    """One time limit shared by several tool runs (`prove --timeout` bounds the whole proof)."""

    def __init__(self, seconds: float | None, option: str = "--timeout"):
        self.seconds, self.option = seconds, option
        self.end = None if seconds is None else time.monotonic() + seconds

    def left(self, what: str) -> float | None:
        """Seconds left (None: no limit), or `ToolTimeout` naming `what` when none are left."""
        if self.end is None:
            return None
        rest = self.end - time.monotonic()
        if rest <= 0:
            raise self.expired(what)
        return rest

    def expired(self, what: str) -> ToolTimeout:
        return ToolTimeout(f"{what} did not finish within {self.seconds:g} s ({self.option})")


def exit_status(out: subprocess.CompletedProcess) -> str:
    """How a tool ended, in words: its exit status, or the signal that killed it."""
    code = out.returncode
    if code < 0:
        try:
            return f"killed by {signal.Signals(-code).name}"
        except ValueError:
            return f"killed by signal {-code}"
    return f"exit status {code}"


def tail(out: subprocess.CompletedProcess, lines: int = 2) -> str:
    """The last non-empty lines of a tool's output, joined into one (at most 300 characters),
    or "no output"."""
    found = [ln.strip() for ln in (out.stdout + out.stderr).splitlines() if ln.strip()]
    return " | ".join(found[-lines:])[:300] or "no output"


def deadline(limit: float | Deadline | None) -> Deadline:
    """A number of seconds (or None) as a fresh `Deadline`; a `Deadline` as it is."""
    return limit if isinstance(limit, Deadline) else Deadline(limit)


# ---- running ----

_live: dict[int, subprocess.Popen] = {}  # process group id -> its leader, while it runs
_lock = threading.Lock()


def _death_signal():
    """libc's prctl (Linux), to make a tool die with the thread that started it; else None."""
    if not sys.platform.startswith("linux"):
        return None
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        return libc.prctl
    except (OSError, AttributeError):
        return None


_PRCTL = _death_signal()
_PR_SET_PDEATHSIG = 1


def _child_setup() -> None:
    """In the child, before exec: a process group of its own, and death with carrypipe."""
    os.setpgid(0, 0)
    if _PRCTL is not None:
        _PRCTL(_PR_SET_PDEATHSIG, int(signal.SIGKILL))


def run(cmd: list[str], cwd: str | Path | None = None,
        timeout: float | Deadline | None = None,
        name: str | None = None) -> subprocess.CompletedProcess:
    """Run `cmd` in `cwd` in a process group of its own and return its exit status and text
    output.  `ToolTimeout` when `timeout` (seconds or a shared `Deadline`) passes,
    `ToolBroken` when it cannot be started; the group is ended in every case.  A non-zero
    exit status is returned, not raised: what it means is the caller's to say.  `cwd` is a
    work folder the caller removes: the tool's own temporary files go there too (TMPDIR), so
    that a tool ended on a timeout or signal leaves none behind (the WebAssembly wheels make
    one on every run)."""
    tool = name or Path(cmd[0]).name
    env = None if cwd is None else {**os.environ, "TMPDIR": str(Path(cwd).resolve())}
    limit = deadline(timeout)
    left = limit.left(tool)
    try:
        proc = subprocess.Popen(cmd, cwd=cwd, env=env, stdin=subprocess.DEVNULL,
                                stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True, errors="replace",
                                preexec_fn=_child_setup)
    except OSError as exc:
        raise ToolBroken(f"cannot run {tool} ({cmd[0]}): {exc.strerror or exc}") from None
    try:
        with _lock:
            _live[proc.pid] = proc
        while True:
            try:
                out, err = proc.communicate(timeout=_STEP if left is None else min(_STEP, left))
                break
            except subprocess.TimeoutExpired:
                if proc.poll() is not None:  # it exited, but what it left holds the output
                    end_group(proc)
                    out, err = proc.communicate()
                    break
                if left is not None:
                    left = limit.end - time.monotonic()
                    if left <= 0:
                        raise limit.expired(tool) from None  # `finally` ends the group
        return subprocess.CompletedProcess(cmd, proc.returncode, out, err)
    finally:
        end_group(proc)  # also whatever the tool left running after it exited
        for pipe in (proc.stdout, proc.stderr):
            pipe.close()
        with _lock:
            _live.pop(proc.pid, None)


def _signal_group(pgid: int, sig: int) -> bool:
    """Send `sig` to a process group; False when the group is gone."""
    try:
        os.killpg(pgid, sig)
    except ProcessLookupError:
        return False
    except PermissionError:  # only a process that is not ours can hold the id now
        return False
    return True


def end_group(proc: subprocess.Popen) -> None:
    """End the process group led by `proc`: SIGTERM, then SIGKILL after `GRACE` seconds."""
    pgid = proc.pid
    proc.poll()  # reap an exited leader, so that an empty group reads as gone
    if not _signal_group(pgid, signal.SIGTERM):
        return
    end = time.monotonic() + GRACE
    while time.monotonic() < end:
        proc.poll()
        if not _signal_group(pgid, 0):
            return
        time.sleep(0.02)
    _signal_group(pgid, signal.SIGKILL)
    proc.wait()


def end_all() -> None:
    """End every tool group still running in this process."""
    with _lock:
        procs = list(_live.values())
    for proc in procs:
        end_group(proc)


# ---- signals ----

@contextlib.contextmanager
def signals():
    """For the command line: SIGTERM and SIGHUP (a closed terminal or ssh session) raise
    `Stopped` and SIGINT `KeyboardInterrupt`, once
    (a second signal during the clean-up is ignored), so that `finally` blocks end the tool
    groups, worker processes and temporary folders.  Only in the main thread."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    raised = []

    def handler(signum, frame):
        if raised:
            return
        raised.append(signum)
        if signum == signal.SIGINT:
            raise KeyboardInterrupt
        raise Stopped(signum)

    saved = {sig: signal.signal(sig, handler)
             for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)}
    try:
        yield
    finally:
        for sig, previous in saved.items():
            signal.signal(sig, previous)


# ---- worker processes (fit --jobs N) ----

_busy = False  # a worker is inside `in_worker`


def worker_init(parent: int) -> None:
    """Initializer of worker processes started by process `parent`.  Ctrl-C (and SIGHUP
    when the terminal closes) reaches the whole terminal process group; the parent decides
    what to do, so workers let it pass (a Python handler, not SIG_IGN, so the tools they
    start get the default again).  SIGTERM,
    sent by the parent or (Linux) by the kernel when the parent dies, even of SIGKILL,
    unwinds a running job (its tool groups ended, its temporary folders removed) and ends
    the worker."""
    for sig in (signal.SIGINT, signal.SIGHUP):
        signal.signal(sig, lambda signum, frame: None)
    signal.signal(signal.SIGTERM, _worker_stop)
    if _PRCTL is not None:
        _PRCTL(_PR_SET_PDEATHSIG, int(signal.SIGTERM))
    if os.getppid() != parent:  # the parent died before the line above
        os._exit(128 + signal.SIGTERM)


def _worker_stop(signum, frame):
    if _busy:
        raise Stopped(signum)
    os._exit(128 + signum)


def in_worker(fn, item):
    """Run `fn(item)` in a worker process set up by `worker_init`."""
    global _busy
    _busy = True
    try:
        return fn(item)
    except KeyboardInterrupt:
        end_all()
        os._exit(128 + signal.SIGTERM)
    finally:
        _busy = False
