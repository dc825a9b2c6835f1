"""Where candidates run: one interface, local worker processes or a Dask cluster.

`submit_all(fn, items)` yields `(item, result)` as each finishes.  `Local(1)` runs in this
process (no start-up cost, easy to debug); `Local(n)` uses n worker processes; `Cluster`
sends the work to a running Dask distributed scheduler (`tcp://HOST:PORT`), whose workers
need carrypipe and the tools installed.
"""

from __future__ import annotations

import multiprocessing
import re
from concurrent.futures import ProcessPoolExecutor, as_completed

CLUSTER_ADDRESS = re.compile(r"tcp://[A-Za-z0-9.\-\[\]:]+:\d{1,5}\Z")


class Local:
    def __init__(self, jobs: int = 1):
        self.jobs = jobs

    def submit_all(self, fn, items):
        if self.jobs <= 1:
            for item in items:
                yield item, fn(item)
            return
        ctx = multiprocessing.get_context("spawn")
        with ProcessPoolExecutor(max_workers=self.jobs, mp_context=ctx) as pool:
            futures = {pool.submit(fn, item): item for item in items}
            for fut in as_completed(futures):
                yield futures[fut], fut.result()

    def close(self):
        pass


class ClusterUnavailable(RuntimeError):
    """The Dask scheduler could not be reached, or Dask is not installed."""


class Cluster:
    """Dask distributed: the scheduler at `address` spreads the work over its workers."""

    def __init__(self, address: str, timeout: float = 10):
        try:
            from distributed import Client
        except ImportError:
            raise ClusterUnavailable("--cluster needs Dask distributed; install it with "
                                     "pip install 'carrypipe[cluster]'") from None
        try:
            self.client = Client(address, timeout=timeout)
        except (OSError, TimeoutError) as exc:
            raise ClusterUnavailable(f"cannot reach the Dask scheduler at {address}: "
                                     f"{exc}") from None
        self.jobs = max(1, sum(self.client.nthreads().values()))

    def submit_all(self, fn, items):
        from distributed import as_completed as dask_completed

        futures = {self.client.submit(fn, item, pure=False): item for item in items}
        for fut in dask_completed(futures):
            yield futures[fut], fut.result()

    def close(self):
        self.client.close()
