"""Where candidates run: one interface, local worker processes or a Dask cluster.

`submit_all(fn, items)` yields `(item, result)` as each finishes.  `Local(1)` runs in this
process (no start-up cost, easy to debug); `Local(n)` uses n worker processes, which are
ended at once (tool groups and all, see `tools.worker_init`) when the run is interrupted;
`Cluster` sends the work to a running Dask distributed scheduler (`tcp://HOST:PORT`), whose
workers need carrypipe and the tools installed.  Every wait on the scheduler is bounded:
`CLUSTER_TIMEOUT` seconds (`$CARRYPIPE_CLUSTER_TIMEOUT`) for the connection and for each
answer, while results are awaited as long as the scheduler keeps answering.
"""

from __future__ import annotations

import asyncio
import multiprocessing
import os
import re
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool

from . import tools

CLUSTER_ADDRESS = re.compile(r"tcp://[A-Za-z0-9.\-\[\]:]+:\d{1,5}\Z")
CLUSTER_TIMEOUT = 10.0  # seconds


class Local:
    """Worker processes on this machine (or none, for one job at a time)."""
    here = True  # the tools run on this machine, with its caches

    def __init__(self, jobs: int = 1):
        self.jobs = jobs

    def submit_all(self, fn, items):
        if self.jobs <= 1:
            for item in items:
                yield item, fn(item)
            return
        ctx = multiprocessing.get_context("spawn")
        pool = ProcessPoolExecutor(max_workers=self.jobs, mp_context=ctx,
                                   initializer=tools.worker_init,
                                   initargs=(os.getpid(),))
        try:
            futures = {pool.submit(tools.in_worker, fn, item): item for item in items}
            for fut in as_completed(futures):
                yield futures[fut], fut.result()
        except BrokenProcessPool:
            end_pool(pool)
            raise tools.ToolBroken("a fit worker process ended unexpectedly (out of memory?); "
                                   "try fewer --jobs") from None
        except BaseException:  # interrupted, or the consumer stopped early: end them now
            end_pool(pool)
            raise
        pool.shutdown()

    def close(self):
        pass


def end_pool(pool: ProcessPoolExecutor) -> None:
    """End a pool's worker processes without waiting for their jobs: SIGTERM makes each end
    its tool groups and exit; a worker still there after the tools' grace gets SIGKILL."""
    workers = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in workers:
        if proc.is_alive():
            proc.terminate()
    end = time.monotonic() + tools.GRACE + 3
    for proc in workers:
        proc.join(max(0.0, end - time.monotonic()))
        if proc.is_alive():
            proc.kill()
            proc.join(1)


class ClusterUnavailable(tools.ToolError):
    """The Dask scheduler cannot be reached, does not answer, or Dask is not installed."""


def cluster_timeout() -> float:
    """The bound on each wait for the scheduler: `$CARRYPIPE_CLUSTER_TIMEOUT` seconds, else
    CLUSTER_TIMEOUT."""
    text = os.environ.get("CARRYPIPE_CLUSTER_TIMEOUT", "")
    try:
        value = float(text)
    except ValueError:
        return CLUSTER_TIMEOUT
    return value if 0 < value < float("inf") else CLUSTER_TIMEOUT


async def _handshake(address: str, timeout: float) -> None:
    """Open one connection and read the scheduler's greeting, all within `timeout` (Dask's own
    connect bounds the TCP connection but waits for the greeting without a limit)."""
    from distributed.comm import connect

    comm = await asyncio.wait_for(connect(address, timeout=timeout), timeout)
    await comm.close()


class Cluster:
    """Dask distributed: the scheduler at `address` spreads the work over its workers."""
    here = False

    def __init__(self, address: str, timeout: float | None = None):
        try:
            from distributed import Client
        except ImportError:
            raise ClusterUnavailable("--cluster needs Dask distributed; install it with "
                                     "pip install 'carrypipe[cluster]'") from None
        self.address = address
        self.timeout = timeout = timeout or cluster_timeout()
        self.client = None
        try:
            asyncio.run(_handshake(address, timeout))
            self.client = Client(address, timeout=timeout)
            nthreads = self.client.nthreads(callback_timeout=timeout)
        except (OSError, asyncio.TimeoutError, TimeoutError) as exc:
            self.close()
            reason = str(exc) or f"no answer within {timeout:g} s"
            raise ClusterUnavailable(f"cannot reach the Dask scheduler at {address}: "
                                     f"{reason}") from None
        except Exception as exc:  # anything else it sent: not a Dask scheduler
            self.close()
            raise ClusterUnavailable(f"the Dask scheduler at {address} answered with something "
                                     f"other than the Dask protocol ({type(exc).__name__}: "
                                     f"{exc})") from None
        self.jobs = max(1, sum(nthreads.values()))

    def submit_all(self, fn, items):
        from distributed import wait

        pending = {self.client.submit(fn, item, pure=False): item for item in items}
        while pending:
            try:
                done, _ = wait(list(pending), timeout=self.timeout, return_when="FIRST_COMPLETED")
            except TimeoutError:
                self._still_there()
                continue
            for fut in done:
                item = pending.pop(fut)
                if fut.status == "error":
                    fut.result()  # raises the job's own exception (say, a tool missing there)
                if fut.status != "finished":
                    raise ClusterUnavailable(f"the Dask scheduler at {self.address} lost a run "
                                             f"({fut.status})")
                yield item, self._fetch(fut)

    def _still_there(self) -> None:
        """Ask the scheduler for its identity, within the bound; else it is gone."""
        try:
            self.client.sync(self.client.scheduler.identity, callback_timeout=self.timeout)
        except Exception:
            raise ClusterUnavailable(f"the Dask scheduler at {self.address} stopped answering "
                                     f"(no answer within {self.timeout:g} s)") from None

    def _fetch(self, fut):
        try:
            return fut.result(timeout=self.timeout)
        except (OSError, TimeoutError) as exc:
            raise ClusterUnavailable(f"cannot fetch a result from the Dask cluster at "
                                     f"{self.address}: {exc or 'no answer'}") from None

    def close(self):
        if self.client is not None:
            try:
                self.client.close(timeout=self.timeout)
            except Exception:
                pass  # closing a connection that is already broken
            self.client = None
