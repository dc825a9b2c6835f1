"""Executors: local worker processes and a Dask distributed cluster on loopback."""

import math
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from carrypipe import config, devices, executor, fit, toolflow, tools
from carrypipe.toolflow import Measurement


def test_local_processes_return_every_item():
    got = dict(executor.Local(2).submit_all(math.factorial, [3, 5, 7]))
    assert got == {3: 6, 5: 120, 7: 5040}


def _dies(item):
    os.kill(os.getpid(), signal.SIGKILL)  # as the kernel's out-of-memory killer would


def test_a_worker_that_dies_is_the_environment():
    with pytest.raises(tools.ToolBroken, match=r"^a fit worker process ended unexpectedly"):
        list(executor.Local(2).submit_all(_dies, [1, 2]))


def test_cluster_address_must_be_reachable():
    pytest.importorskip("distributed")
    with pytest.raises(executor.ClusterUnavailable, match=r"^cannot reach the Dask scheduler"):
        executor.Cluster("tcp://127.0.0.1:9", timeout=1)


class Listener:
    """A TCP listener on loopback that accepts and then says nothing, or sends `reply`."""

    def __init__(self, reply: bytes | None):
        self.sock = socket.create_server(("127.0.0.1", 0))
        self.address = f"tcp://127.0.0.1:{self.sock.getsockname()[1]}"
        self.reply, self.conns = reply, []
        threading.Thread(target=self._serve, daemon=True).start()

    def _serve(self):
        while True:
            try:
                conn, _ = self.sock.accept()
            except OSError:
                return
            self.conns.append(conn)
            if self.reply:
                try:
                    conn.sendall(self.reply)
                except OSError:
                    pass

    def close(self):
        self.sock.close()
        for conn in self.conns:
            conn.close()


@pytest.mark.parametrize("reply, message", [
    (None, "cannot reach the Dask scheduler at {}: no answer within 1 s"),
    (b"\xff" * 64 + b"HTTP/1.1 200 OK\r\n\r\nnot a scheduler\n" * 4,
     "the Dask scheduler at {} answered with something other than the Dask protocol"),
], ids=["never answers", "sends garbage"])
def test_a_scheduler_that_misbehaves_is_one_line_exit_3_within_the_bound(tmp_path, reply,
                                                                          message):
    pytest.importorskip("distributed")
    listener = Listener(reply)
    (tmp_path / "u.yaml").write_text("name: u\nwidth: 8\n")
    env = {**os.environ, "PYTHONPATH": str(Path(executor.__file__).parent.parent),
           "CARRYPIPE_CLUSTER_TIMEOUT": "1", "CARRYPIPE_CACHE": str(tmp_path / "cache")}
    start = time.monotonic()
    try:
        out = subprocess.run([sys.executable, "-m", "carrypipe", "fit", "u.yaml", "--target-mhz",
                              "100", "--device", "ecp5-85k", "--cluster", listener.address],
                             cwd=tmp_path, env=env, capture_output=True, text=True, timeout=60)
    finally:
        listener.close()
    took = time.monotonic() - start
    assert out.returncode == 3, out.stderr
    lines = out.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("carrypipe: error: " +
                                                   message.format(listener.address)), lines
    assert took < 20  # the bound (1 s per wait), plus starting Python and importing Dask
    assert not (tmp_path / "out").exists()


def fake_measure(job):
    cfg = config.from_mapping(job.config)
    return [Measurement(s, "ok", mhz=round(1000 / (2 + 0.05 * max(cfg.slices)), 2), luts=1,
                        inside=True) for s in job.seeds]


def test_fit_runs_on_a_local_dask_cluster(monkeypatch, tmp_path):
    distributed = pytest.importorskip("distributed")
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path))
    monkeypatch.setattr(toolflow, "measure", fake_measure)
    base = config.from_mapping({"name": "acc", "width": 32})
    settings = fit.Settings(300, devices.get("ecp5-85k"), ("native",))  # native: slices only
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  protocol="tcp", host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        runner = executor.Cluster(cluster.scheduler_address)
        try:
            assert runner.jobs == 2
            out = fit.run(base, settings, runner)
        finally:
            runner.close()
    local = fit.run(base, fit.Settings(300, devices.get("ecp5-85k"), ("native",),
                                       use_cache=False), executor.Local(1))
    assert out.chosen.label == local.chosen.label
    # 1000 / (2 + 0.05 k) >= 300 needs k <= 26.7: two 16-bit slices, latency 2.
    assert out.chosen.config.slices == (16, 16)
