"""Output folders are replaced whole: concurrent builds, killed runs, a full disk, folders
carrypipe did not write.  The builds are compared byte for byte with what `emit.render`
made for each config (the only reference a folder's content can have)."""

from __future__ import annotations

import errno
import multiprocessing
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from carrypipe import emit, output
from carrypipe.cli import main
from carrypipe.config import from_mapping
from carrypipe.plan import make_plan

A = {"name": "blue", "width": 12, "slice_width": 4}
B = {"name": "green", "width": 16, "cell": "sklansky", "slice_width": 8, "valid": True}


@pytest.fixture(scope="module")
def builds():
    return [emit.render(make_plan(from_mapping(keys)), vectors=30) for keys in (A, B)]


def contents(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir()}


def whole(folder: Path, builds) -> int:
    """Which build the folder holds, exactly (every file, every byte), or -1."""
    got = contents(folder)
    marker = {output.MARKER: output.MARKER_TEXT.encode()}
    for k, files in enumerate(builds):
        if got == {**{n: t.encode() for n, t in files.items()}, **marker}:
            return k
    return -1


def _writer(files, out, barrier, errors):
    try:
        barrier.wait(10)
        emit.write(files, out)
    except BaseException as exc:  # reported to the parent, which fails the test
        errors.put(repr(exc))


def test_concurrent_builds_into_one_folder_always_leave_one_whole_build(tmp_path, builds):
    # 60 pairs of builds of two different configs started at once into one folder; every
    # third pair starts with the folder absent (both race to create it).
    ctx = multiprocessing.get_context("fork")
    errors = ctx.Queue()
    out = tmp_path / "deep" / "o"
    seen = set()
    for pair in range(60):
        if pair % 3 == 0 and out.exists():
            output.replace_folder({}, out)  # ours: may be replaced, then removed below
            for p in out.iterdir():
                p.unlink()
            out.rmdir()
        barrier = ctx.Barrier(2)
        procs = [ctx.Process(target=_writer, args=(files, out, barrier, errors))
                 for files in builds]
        for p in procs:
            p.start()
        for p in procs:
            p.join(30)
        assert all(p.exitcode == 0 for p in procs)
        assert errors.empty(), errors.get()
        k = whole(out, builds)
        assert k >= 0, f"pair {pair}: a mixed folder: {sorted(contents(out))}"
        seen.add(k)
        assert [p.name for p in out.parent.iterdir()] == ["o"]  # no temporary folder left
    assert seen == {0, 1}  # both orders happened: the test raced


def test_files_of_an_earlier_build_of_another_name_do_not_survive(tmp_path, builds):
    out = tmp_path / "o"
    emit.write(builds[0], out)
    (out / "fit.csv").write_text("from an earlier fit\n")
    emit.write(builds[1], out)
    assert whole(out, builds) == 1


def test_a_full_disk_leaves_no_trace(tmp_path, builds, monkeypatch):
    real = os.fdopen
    calls = []

    def full(*args, **kwargs):
        calls.append(args)
        if len(calls) == 3:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(*args, **kwargs)

    monkeypatch.setattr(os, "fdopen", full)
    with pytest.raises(OSError, match="No space left"):
        emit.write(builds[0], tmp_path / "new" / "deeper" / "o")
    assert list(tmp_path.iterdir()) == []  # no temporary folder, no parent made by the run
    monkeypatch.setattr(os, "fdopen", real)
    emit.write(builds[0], tmp_path / "o")
    monkeypatch.setattr(os, "fdopen", full)
    calls.clear()
    with pytest.raises(OSError, match="No space left"):
        emit.write(builds[1], tmp_path / "o")
    assert whole(tmp_path / "o", builds) == 0
    assert [p.name for p in tmp_path.iterdir()] == ["o"]


KILLED = """
import os, sys, time
from carrypipe import output
real = output._write
def slow(path, data, exclusive=True):
    real(path, data, exclusive)
    print("writing", flush=True)
    time.sleep(60)
output._write = slow
output.replace_folder({"a.v": "x"}, sys.argv[1])
"""


def test_leftovers_of_a_killed_run_are_removed_by_the_next_run(tmp_path, builds):
    out = tmp_path / "o"
    env = {**os.environ, "PYTHONPATH": str(Path(output.__file__).parent.parent)}
    killed = subprocess.Popen([sys.executable, "-c", KILLED, str(out)], env=env,
                              stdout=subprocess.PIPE, text=True)
    assert killed.stdout.readline() == "writing\n"
    killed.send_signal(signal.SIGKILL)
    killed.wait()
    killed.stdout.close()
    leftovers = [p.name for p in tmp_path.iterdir()]
    assert len(leftovers) == 1 and leftovers[0].startswith(".o.carrypipe-")
    # Not ours to remove: another user's hidden folder, a temporary folder of a process
    # that still runs (this one's parent), one made on another host.
    keep = [tmp_path / ".o.keep", tmp_path / f".o.carrypipe-{output.HOST}-{os.getppid()}-0a1b2c3d",
            tmp_path / f".o.carrypipe-{'f' * 8 if output.HOST != 'f' * 8 else '0' * 8}-"
                       f"{killed.pid}-0a1b2c3d"]
    for k in keep:
        k.mkdir()
    emit.write(builds[0], out)
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["o", *(k.name for k in keep)])
    assert whole(out, builds) == 0


def test_a_folder_carrypipe_did_not_write_is_never_replaced(tmp_path, builds, monkeypatch):
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me\n")
    with pytest.raises(output.FolderRefused, match=r"^-o: value '.*mine' is not allowed; it "
                                                   r"holds files carrypipe did not write"):
        emit.write(builds[0], mine)
    assert contents(mine) == {"notes.txt": b"keep me\n"}
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    monkeypatch.chdir(mine)
    for target in (".", str(mine), str(tmp_path)):
        res = CliRunner().invoke(main, ["build", str(cfg), "-o", target])
        assert res.exit_code == 2
        assert res.output.startswith("carrypipe: error: -o: value ") and res.output.count("\n") == 1
    assert contents(mine) == {"notes.txt": b"keep me\n"}
    empty = tmp_path / "empty"
    empty.mkdir()
    emit.write(builds[0], empty)  # an empty folder holds nothing to lose
    assert whole(empty, builds) == 0


def test_build_refuses_a_file_as_its_folder(tmp_path):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    for bad in (cfg, cfg / "below"):
        res = CliRunner().invoke(main, ["build", str(cfg), "-o", str(bad)])
        assert res.exit_code == 2 and res.output.count("\n") == 1, res.output
        assert res.output.startswith("carrypipe: error: ")


def test_the_default_folder_and_an_empty_one_are_named_as_such(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    res = CliRunner().invoke(main, ["build", str(cfg), "-o", ""])
    assert res.exit_code == 2
    assert res.output == "carrypipe: error: -o: value '' is not allowed; expected a folder path\n"
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "u").write_text("a file where the default folder goes")
    res = CliRunner().invoke(main, ["build", str(cfg)])  # no -o given: the message says so
    assert res.exit_code == 2
    assert res.output == ("carrypipe: error: -o (default): value 'out/u' is not allowed; "
                          "expected a folder (it is a file)\n")
    for verb in (["build", str(cfg)], ["fit", str(cfg), "--target-mhz", "100", "--device",
                                       "ice40-hx8k"]):  # -o a file: the same one line
        res = CliRunner().invoke(main, [*verb, "-o", str(tmp_path / "out" / "u")])
        assert res.exit_code == 2
        assert res.output == (f"carrypipe: error: -o: value '{tmp_path / 'out' / 'u'}' is not "
                              "allowed; expected a folder (it is a file)\n")


def test_an_unwritable_parent_is_the_environment(tmp_path, monkeypatch):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    locked = tmp_path / "locked"
    locked.mkdir()
    real = os.mkdir

    def refuse(path, *args, **kwargs):
        if Path(path).parent == locked:
            raise PermissionError(errno.EACCES, "Permission denied", str(path))
        return real(path, *args, **kwargs)

    monkeypatch.setattr(os, "mkdir", refuse)  # what a read-only folder does for root too
    res = CliRunner().invoke(main, ["build", str(cfg), "-o", str(locked / "o")])
    assert res.exit_code == 3
    assert res.output == (f"carrypipe: error: cannot write the folder {locked / 'o'}: "
                          "Permission denied\n")
    assert list(locked.iterdir()) == []
    res = CliRunner().invoke(main, ["plan", str(cfg), "--chart", str(locked / "c" / "c.svg")])
    assert res.exit_code == 3
    assert res.output == (f"carrypipe: error: cannot write the chart {locked / 'c' / 'c.svg'}: "
                          "Permission denied\n")


def test_the_swap_is_atomic_and_works_without_it(tmp_path, builds, monkeypatch):
    one, two = tmp_path / "one", tmp_path / "two"
    one.mkdir()
    two.mkdir()
    (one / "f").write_text("1")
    (two / "f").write_text("2")
    output.exchange(one, two)  # Linux renameat2(RENAME_EXCHANGE): both names stay
    assert (one / "f").read_text() == "2" and (two / "f").read_text() == "1"
    # Where the system cannot exchange, two renames do the job (not atomically).
    monkeypatch.setattr(output, "_RENAMEAT2", None)
    emit.write(builds[0], tmp_path / "o")
    emit.write(builds[1], tmp_path / "o")
    assert whole(tmp_path / "o", builds) == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o", "one", "two"]


def test_a_chart_is_replaced_atomically_in_the_users_folder(tmp_path, monkeypatch):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    (tmp_path / "mine.txt").write_text("keep me\n")
    chart = tmp_path / "c.svg"
    chart.write_text("old chart")
    res = CliRunner().invoke(main, ["plan", str(cfg), "--chart", str(chart)])
    assert res.exit_code == 0 and chart.read_text().startswith("<svg")
    chart.write_text("old chart")
    monkeypatch.setattr(os, "replace", lambda *a: (_ for _ in ()).throw(
        OSError(errno.ENOSPC, "No space left on device")))
    res = CliRunner().invoke(main, ["plan", str(cfg), "--chart", str(chart)])
    assert res.exit_code == 3 and res.output.endswith("No space left on device\n")
    assert chart.read_text() == "old chart"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.svg", "mine.txt", "u.yaml"]


def test_fit_refuses_a_folder_it_may_not_replace_before_measuring(tmp_path, monkeypatch):
    from carrypipe import toolflow

    def no_runs(*a, **k):
        raise AssertionError("measured although the folder is refused")

    monkeypatch.setattr(toolflow, "measure", no_runs)
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "notes.txt").write_text("keep me\n")
    start = time.monotonic()
    res = CliRunner().invoke(main, ["fit", str(cfg), "--target-mhz", "100", "--device",
                                    "ecp5-85k", "-o", str(tmp_path / "mine")])
    assert res.exit_code == 2 and res.output.count("\n") == 1, res.output
    assert "holds files carrypipe did not write" in res.output
    assert time.monotonic() - start < 5
