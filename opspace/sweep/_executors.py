"""The executors of a sweep and the one submission/collection loop (`drive`)
that runs on any of them.

- `Processes`: local processes, `concurrent.futures.ProcessPoolExecutor`
  (forked from a fork server that imported opspace, or spawned).  A worker
  that dies breaks the pool: every in-flight point is collected or
  resubmitted and the pool rebuilt.
- `Dask`: a `distributed.Client` (given, at an address, or on a LocalCluster
  started for the run); the scheduler reruns a lost worker's tasks elsewhere.

An executor offers `window` (points kept in flight), `submit`, `wait`,
`wait_all`, `result` (a record, or WorkerLost), `broken`, `restart`, `close`.
"""

from __future__ import annotations

import concurrent.futures as cf
import contextlib
import os
import time
import uuid
from collections import Counter, deque

from ..errors import ConfigError
from ._worker import _init_process, evaluate_point, one_line

__all__ = ["Dask", "Processes", "WORKER_ENV", "WorkerLost", "drive", "worker_env"]

#: The environment of every worker process this module starts (a value the
#: user has set wins).  One BLAS and OpenMP thread per worker, so that n
#: workers use n cores.  glibc malloc keeps freed memory instead of returning
#: every large array to the system: a point allocates and frees arrays of a
#: few MB many times over, and the page faults of fresh mappings cost about a
#: third of a point on a virtual machine (measured: 197 -> 133 ms per point of
#: the demo cycle at 50 Hz; mallopt(3), M_MMAP_THRESHOLD and M_TRIM_THRESHOLD).
WORKER_ENV = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
              "MALLOC_MMAP_THRESHOLD_": str(64 * 2**20), "MALLOC_TRIM_THRESHOLD_": str(256 * 2**20)}


class WorkerLost(Exception):
    """The worker computing a task went away; the task is to be resubmitted."""


@contextlib.contextmanager
def worker_env():
    """WORKER_ENV in this process's environment, which the worker processes
    started meanwhile inherit (keys the user set are left alone); restored
    afterwards."""
    saved = {k: os.environ.get(k) for k in WORKER_ENV}
    for k, v in WORKER_ENV.items():
        os.environ.setdefault(k, v)
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def _context(multiprocessing):
    """A fork server that has imported opspace (and run nothing), where it
    exists: workers fork from it in milliseconds, also when a pool is rebuilt,
    and inherit no OpenMP or BLAS threads of this process (which forking this
    process could deadlock).  Spawn elsewhere."""
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["opspace.sweep._worker"])
        return ctx
    return multiprocessing.get_context("spawn")


class Processes:
    """Local worker processes (a new pool after a worker is lost)."""

    def __init__(self, workers, function=None):
        import multiprocessing

        self.function = function or evaluate_point     # function(context, task) -> record
        self.workers = workers
        self.description = f"{workers} local process{'es' if workers != 1 else ''}"
        self._mp = _context(multiprocessing)
        self._pool = None
        self.broken = False
        self.restart()

    def restart(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
        self._pool = cf.ProcessPoolExecutor(max_workers=self.workers, mp_context=self._mp,
                                            initializer=_init_process,
                                            initargs=(os.getpid(),))
        self.broken = False

    @property
    def window(self):
        return 2 * self.workers

    def submit(self, context, task, attempt):
        return self._pool.submit(self.function, context, task)

    def wait(self, futures, timeout):
        done, _ = cf.wait(futures, timeout=timeout, return_when=cf.FIRST_COMPLETED)
        return done

    def wait_all(self, futures, timeout):
        cf.wait(futures, timeout=timeout)

    def result(self, future):
        try:
            return future.result()
        except cf.process.BrokenProcessPool as exc:
            self.broken = True
            raise WorkerLost(one_line(exc)) from None
        except cf.CancelledError:
            raise WorkerLost("cancelled") from None

    def close(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def run(self, context, tasks, on_record, *, max_retries=2):
        """`drive` on this executor: every task through `function`, records to `on_record`."""
        return drive(self, context, tasks, on_record, max_retries=max_retries)


class Dask:
    """A Dask distributed client (given, at an address, or a LocalCluster)."""

    def __init__(self, cluster=None, local_cluster=None, function=None):
        try:
            import distributed
        except ImportError:
            raise ConfigError("the Dask executor needs dask.distributed, which is not "
                              "installed: pip install 'opspace[cluster]'") from None
        self._distributed = distributed
        self.function = function or evaluate_point     # function(context, task) -> record
        self._own_client = self._own_cluster = None
        if local_cluster is not None:
            import logging

            import dask

            key = "distributed.nanny.pre-spawn-environ"     # set before each worker starts
            env = {**dask.config.get(key, {}), **WORKER_ENV,
                   **{k: os.environ[k] for k in WORKER_ENV if k in os.environ}}
            # no dashboard, so no use for the statistical profiler (3 % of a point)
            with dask.config.set({key: env, "distributed.worker.profile.enabled": False}):
                self._own_cluster = distributed.LocalCluster(
                    n_workers=int(local_cluster), threads_per_worker=1, processes=True,
                    host="127.0.0.1", dashboard_address=None, silence_logs=logging.ERROR)
            self.client = self._own_client = distributed.Client(self._own_cluster)
            self.description = f"Dask LocalCluster of {local_cluster} worker processes"
        elif isinstance(cluster, str):
            try:
                self.client = self._own_client = distributed.Client(cluster, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise ConfigError(f"--cluster {cluster}: no Dask scheduler answers there "
                                  f"({one_line(exc)})") from None
            self.description = f"Dask cluster at {cluster}"
        else:
            self.client = cluster
            self.description = f"Dask cluster at {cluster.scheduler.address}"
        self.broken = False
        self._window, self._window_at = None, 0.0
        self._token = uuid.uuid4().hex[:8]     # task keys unique to this run

    @property
    def window(self):
        now = time.monotonic()
        if self._window is None or now - self._window_at > 10.0:   # the cluster may scale
            threads = sum(self.client.nthreads().values())
            self._window, self._window_at = max(2, 2 * threads), now
        return self._window

    def restart(self):
        self.broken = False

    def submit(self, context, task, attempt):
        return self.client.submit(self.function, context, task, pure=False,
                                  key=f"opspace-sweep-{self._token}-{task.id}-{attempt}")

    def wait(self, futures, timeout):
        try:
            done, _ = self._distributed.wait(futures, timeout=timeout,
                                             return_when="FIRST_COMPLETED")
        except TimeoutError:
            return set()
        return done

    def wait_all(self, futures, timeout):
        with contextlib.suppress(TimeoutError):
            self._distributed.wait(futures, timeout=timeout)

    def result(self, future):
        try:
            return future.result()
        except self._distributed.KilledWorker as exc:
            # the scheduler already reran it on other workers: give up on this point
            return {"id": None, "status": "error", "worker": "", "verdict": None,
                    "figures": {}, "elapsed": 0.0,
                    "message": f"KilledWorker: {one_line(exc)} (the point kills its worker)"}
        except Exception as exc:   # evaluate_point records its own failures: this is the cluster
            from .._version import __version__

            raise ConfigError(f"{self.description}: a worker could not run a design point "
                              f"({type(exc).__name__}: {one_line(exc)}); every worker needs "
                              f"opspace {__version__} and its dependencies installed "
                              f"(the finished points are kept: rerun with --resume)") from None

    def close(self):
        if self._own_client is not None:
            self._own_client.close()
        if self._own_cluster is not None:
            self._own_cluster.close()

    def run(self, context, tasks, on_record, *, max_retries=2):
        """`drive` on this executor: every task through `function`, records to `on_record`."""
        return drive(self, context, tasks, on_record, max_retries=max_retries)


def drive(executor, context, tasks, on_record, *, max_retries):
    """The submission/collection loop, the same for every executor.

    Keeps up to `executor.window` tasks in flight and hands each finished
    record to `on_record` as it arrives.  A lost worker (WorkerLost) sends its
    task back to the queue; when the executor is broken by it (a process pool),
    every other in-flight task is collected or resubmitted and the executor
    restarted.  Returns the number of resubmissions.
    """
    queue = deque(tasks)
    inflight = {}
    attempts = Counter()
    retried = 0

    def lost(task, why):
        nonlocal retried
        attempts[task.id] += 1
        if attempts[task.id] > max_retries:
            on_record({"id": task.id, "status": "error", "worker": "", "verdict": None,
                       "figures": {}, "elapsed": 0.0,
                       "message": f"worker lost {attempts[task.id]} times while computing "
                                  f"this point ({why})"})
        else:
            queue.appendleft(task)
            retried += 1

    def collect(future, task):
        try:
            rec = executor.result(future)
        except WorkerLost as exc:
            lost(task, str(exc))
            return
        rec["id"] = task.id
        on_record(rec)

    while queue or inflight:
        while queue and len(inflight) < executor.window:
            task = queue.popleft()
            inflight[executor.submit(context, task, attempts[task.id])] = task
        for future in executor.wait(list(inflight), timeout=0.5):
            collect(future, inflight.pop(future))
        if executor.broken:
            executor.wait_all(list(inflight), timeout=60.0)
            for future, task in list(inflight.items()):
                collect(future, task)
            inflight.clear()
            executor.restart()
    return retried
