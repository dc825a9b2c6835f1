"""Executors: local worker processes and a Dask distributed cluster on loopback."""

import math

import pytest

from carrypipe import config, devices, executor, fit, toolflow
from carrypipe.toolflow import Measurement


def test_local_processes_return_every_item():
    got = dict(executor.Local(2).submit_all(math.factorial, [3, 5, 7]))
    assert got == {3: 6, 5: 120, 7: 5040}


def test_cluster_address_must_be_reachable():
    with pytest.raises(executor.ClusterUnavailable, match=r"^cannot reach the Dask scheduler"):
        executor.Cluster("tcp://127.0.0.1:9", timeout=1)


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
