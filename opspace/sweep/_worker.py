"""The evaluation of one design point, as run by every worker (a local
process or a Dask worker): `evaluate_point(context, task)`.

The robot, catalogue and duty cycle come from this process's cache, keyed on
the digest of each effective document (`docs.Cache`): loaded once per worker
and content, not once per point.  Each worker holds BLAS and OpenMP to one
thread, so that n workers use n cores.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass

from ..errors import ConfigError, ModelError
from . import _docs as _docs
from ._paths import PathError

__all__ = ["Context", "Task", "evaluate_point", "one_line"]


@dataclass(frozen=True)
class Task:
    """What a worker needs for one point: its id and its assignments."""

    id: str
    assignments: tuple


@dataclass(frozen=True)
class Context:
    """What every task shares: the base documents, the figures, search."""

    documents: object
    figures: tuple
    search: bool


# ------------------------------------------------------------------ workers
_CACHE = _docs.Cache()
_LIMITS = []          # the threadpoolctl limiter of this worker process (kept alive)


def _setup_worker():
    """Hold BLAS and OpenMP to one thread in this worker process (once)."""
    if _LIMITS:
        return
    import threadpoolctl

    from ..dynamics import set_batch_threads

    _LIMITS.append(threadpoolctl.threadpool_limits(limits=1))
    # the batch inverse dynamics asks Pinocchio for its OpenMP threads
    # explicitly, which neither OMP_NUM_THREADS nor threadpoolctl override
    set_batch_threads(1)


def _alive(pid):
    """Whether process `pid` runs (a zombie, dead but not yet reaped, does not)."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] not in (b"Z", b"X")
    except FileNotFoundError:
        return False
    except OSError:            # no /proc: ask the kernel
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return False
        except PermissionError:
            pass
        return True


def _watch(main_pid, period):
    """End this worker when the main process has died (a daemon thread).

    A local pool's workers are children of a fork server, not of the main
    process: when the main process is killed (kill -9 included) nothing else
    tells them, and they would finish their points for nobody."""
    while True:
        time.sleep(period)
        if not _alive(main_pid):
            os._exit(1)


def _init_process(main_pid=None, period=0.5):
    import signal
    import threading

    signal.signal(signal.SIGINT, signal.SIG_IGN)   # Ctrl-C is the parent's to handle
    _setup_worker()
    if main_pid is not None:
        threading.Thread(target=_watch, args=(main_pid, period), daemon=True,
                         name="opspace-main-watch").start()


def _plain(value):
    """A figure value as a plain Python scalar (numpy scalars unwrapped)."""
    if hasattr(value, "item") and not isinstance(value, (list, dict, str)):
        return value.item()
    return value


def one_line(exc):
    return " ".join(str(exc).split()) or type(exc).__name__


def evaluate_point(context, task, *, worker=True):
    """Size one design point; the record as a dict (see `PointRecord`).

    The robot, catalogue and duty cycle come from this process's cache, keyed
    on the digest of each effective document.  `worker=False` (the caller's
    own process) leaves the thread settings alone.
    """
    from ..report import sizing_summary
    from ..sizing import size

    if worker:
        _setup_worker()
    t0 = time.perf_counter()
    rec = {"id": task.id, "worker": _docs.worker_tag(), "verdict": None, "figures": {}}
    d = context.documents
    docs = None
    try:
        docs = _docs.apply(d.docs, task.assignments)
        robot = _CACHE.get(d, "robot", docs["robot"])
        catalogue = None if docs["catalogue"] is None else _CACHE.get(d, "catalogue",
                                                                      docs["catalogue"])
        duty = _CACHE.get(d, "cycle", docs["cycle"])
        result = size(duty, robot=robot, catalogue=catalogue, search=context.search)
        summary = sizing_summary(result)
        figures = {}
        for f in context.figures:
            try:
                figures[f.text] = _plain(f.evaluate(summary)[0])
            except PathError:
                figures[f.text] = None
        rec.update(status="ok", message=one_line(result.message), verdict=result.status,
                   figures=figures)
    except (ConfigError, ModelError, ValueError) as exc:
        rec.update(status="failed", message=one_line(exc))
    except Exception as exc:  # a bug or a library failure: recorded, the sweep goes on
        rec.update(status="error", message=f"{type(exc).__name__}: {one_line(exc)}")
    if rec["status"] != "ok" and docs is not None:
        for root in ("robot", "catalogue", "cycle"):
            if docs[root] is not None:
                _CACHE.forget(d, root, docs[root])
    rec["elapsed"] = time.perf_counter() - t0
    return rec
