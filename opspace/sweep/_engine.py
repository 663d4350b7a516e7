"""Running a sweep: one evaluation function, one submission/collection loop,
two executors (local processes, Dask distributed).

    load_sweep ─► base design sized in this process (figures checked, units)
               └► points not in the CSV yet ─► executor ─► evaluate_point (workers)
                                                  │
                 CSV row per point, flushed ◄─────┘  (lost workers: resubmitted)

- `evaluate_point(context, task)` sizes one design point with
  `opspace.size` and reads the figures from `opspace.report.sizing_summary`;
  a ConfigError, ModelError or ValueError (an invalid combination) gives a
  record with status "failed" and the message, any other exception status
  "error" (recomputed by --resume); neither stops the sweep.
- Local processes: `concurrent.futures.ProcessPoolExecutor` (fork server or
  spawn), at most 2 × workers points in flight.  A worker that dies breaks the pool: the pool
  is rebuilt and the in-flight points resubmitted (up to `max_retries` times
  each).
- Dask: `distributed.Client.submit`; the scheduler reruns the tasks of a lost
  worker elsewhere (`distributed.scheduler.allowed-failures` times, then
  KilledWorker: recorded as "error").
- Each worker process holds BLAS and OpenMP to one thread (threadpoolctl, and
  the environment of the processes it starts, `executors.WORKER_ENV`), so
  that `workers` processes use `workers` cores.
"""

from __future__ import annotations

import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import ConfigError
from . import _docs as _docs
from ._executors import Dask, Processes, drive, worker_env
from ._pareto import pareto_ids
from ._paths import PathError
from ._spec import Sweep, check_figures, load_sweep
from ._table import PointRecord, Table, read_manifest, write_json
from ._worker import Context, Task, _plain, evaluate_point, one_line

#: most worker processes a sweep starts on this machine
MAX_WORKERS = 1024

__all__ = ["PointRecord", "SweepResult", "check_options", "evaluate_point", "progress_bar",
           "run_sweep"]


# ------------------------------------------------------------------ result
@dataclass(frozen=True, eq=False)
class SweepResult:
    """A finished sweep.

    sweep: the Sweep; records: a PointRecord per design point in design order
    (reused rows included); base: the PointRecord of the base design (no value
    varied); units: figure text -> unit; computed: ids evaluated by this run;
    reused: rows taken from the CSV (--resume); retried: resubmissions after a
    lost worker; feasible, pareto: ids; executor: description; wall_time s
    (the whole run); compute_time s (executor start to the last point);
    paths: "csv", "html", "manifest" -> Path.
    """

    sweep: Sweep
    records: tuple
    base: PointRecord
    units: dict
    computed: tuple
    reused: int
    retried: int
    feasible: tuple
    pareto: tuple
    executor: str
    wall_time: float
    compute_time: float = 0.0
    paths: dict = field(default_factory=dict)

    def count(self, status):
        return sum(r.status == status for r in self.records)

    @property
    def message(self):
        n = len(self.records)
        parts = [f"{self.count('ok')} of {n} design points sized"]
        if self.count("failed"):
            parts.append(f"{self.count('failed')} failed")
        if self.count("error"):
            parts.append(f"{self.count('error')} errors")
        return (f"{', '.join(parts)}; {len(self.feasible)} feasible, {len(self.pareto)} on the "
                f"Pareto front")

    def to_dict(self):
        return {"sweep": self.sweep.name, "file": self.sweep.path.name,
                "points": len(self.records), "ok": self.count("ok"),
                "failed": self.count("failed"), "errors": self.count("error"),
                "computed": len(self.computed), "reused": self.reused,
                "retried": self.retried, "feasible": list(self.feasible),
                "pareto": list(self.pareto), "executor": self.executor,
                "wall_time": {"value": self.wall_time, "unit": "s"},
                "compute_time": {"value": self.compute_time, "unit": "s"}}


def feasible(sweep, rec):
    """A sized point whose verdict passes (when required) and that meets every
    [[constraint]]."""
    if not rec.ok or (sweep.require_pass and rec.verdict != "pass"):
        return False
    return all(c.holds(rec.figures.get(c.figure)) for c in sweep.constraints)


# ------------------------------------------------------------------ progress
class progress_bar:
    """A tqdm bar of points done / failed / remaining (a `progress` callback
    for run_sweep); silent when `enabled` is false."""

    def __init__(self, enabled=True, file=None):
        self.enabled = enabled
        self.file = file or sys.stderr
        self.bar = None

    def __call__(self, record, done, failed, remaining):
        if not self.enabled:
            return
        if self.bar is None:
            from tqdm import tqdm

            self.bar = tqdm(total=done + remaining, initial=done - (record is not None),
                            desc="sweep", unit="point", file=self.file, leave=True)
        self.bar.n = done
        self.bar.set_postfix_str(f"failed {failed}, remaining {remaining}", refresh=False)
        self.bar.refresh()

    def close(self):
        if self.bar is not None:
            self.bar.close()
            self.bar = None


# ------------------------------------------------------------------ run
def _executor_options(workers, cluster, local_cluster):
    """ConfigError for options that do not make an executor."""
    if cluster is not None and local_cluster is not None:
        raise ConfigError("give either a Dask cluster address (--cluster) or a local cluster "
                          "size (--local-cluster), not both")
    if (cluster is not None or local_cluster is not None) and workers is not None:
        raise ConfigError("--workers counts local processes; with Dask the cluster's "
                          "workers do the work (--local-cluster N starts N)")
    for option, n, cap in (("--workers", workers, MAX_WORKERS),
                           ("--local-cluster", local_cluster, MAX_WORKERS)):
        if n is not None and (isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= cap):
            raise ConfigError(f"{option} must be a number of processes from 1 to {cap}, "
                              f"got {n!r}")
    if isinstance(cluster, str) and not cluster.strip():
        raise ConfigError("--cluster must be a Dask scheduler address, e.g. tcp://host:8786")


def make_executor(workers=None, cluster=None, local_cluster=None, *, function=None):
    """The executor of a run: local processes (`workers`, default every core) or
    Dask (`cluster` address, or a `local_cluster` of N workers), running
    `function(context, task) -> record` (default: a sweep's design point)."""
    return _executor(workers, cluster, local_cluster, function)


def _executor(workers, cluster, local_cluster, function=None):
    _executor_options(workers, cluster, local_cluster)
    if cluster is not None or local_cluster is not None:
        return Dask(cluster=cluster, local_cluster=local_cluster, function=function)
    return Processes((os.cpu_count() or 1) if workers is None else workers, function=function)


def _base(sweep):
    """The base design's record and the figures' units, sized here (which
    also checks the figures)."""
    from ..report import sizing_summary
    from ..sizing import size

    base_task = Task(id="base", assignments=tuple(_base_assignments(sweep)))
    d = sweep.documents
    docs = _docs.apply(d.docs, base_task.assignments)
    try:
        robot = _docs.load_robot_doc(d, docs["robot"])
        cat = None if docs["catalogue"] is None else _docs.load_catalogue_doc(d, docs["catalogue"])
        duty = _docs.load_cycle_doc(d, docs["cycle"])
        t0 = time.perf_counter()
        result = size(duty, robot=robot, catalogue=cat, search=sweep.search)
        elapsed = time.perf_counter() - t0
    except ValueError as exc:     # ConfigError, ModelError or another invalid value
        raise ConfigError(f"{sweep.path.name}: the base design (no parameter varied) does not "
                          f"size: {one_line(exc)}") from None
    summary = sizing_summary(result)
    units = check_figures(sweep, summary)
    figures = {}
    for f in sweep.figures:
        try:
            figures[f.text] = _plain(f.evaluate(summary)[0])
        except PathError:
            figures[f.text] = None
    base = PointRecord(id="base", status="ok", message=one_line(result.message),
                       elapsed=elapsed, worker=_docs.worker_tag(), values={},
                       verdict=result.status, figures=figures)
    return base, units


def _base_assignments(sweep):
    return [(root, steps, action, value) for _, root, steps, action, value in sweep.fixed]


def run_sweep(sweep, out_dir, *, workers=None, cluster=None, local_cluster=None, resume=False,
              progress=None, max_retries=3, write_page=True):
    """Evaluate every design point of a sweep and write the CSV and the page.

    Parameters
    ----------
    sweep : path of a sweep TOML, or a Sweep (`load_sweep`)
    out_dir : directory for sweep.csv, sweep.json and sweep.html
    workers : local processes (default: every core); not with Dask
    cluster : a Dask scheduler address ("tcp://host:8786") or a
              distributed.Client: run on Dask instead of local processes
    local_cluster : start a Dask LocalCluster of this many worker processes on
              127.0.0.1 for the run (shut down after)
    resume : continue the sweep in `out_dir`: points already in its CSV (status
             ok or failed) are not recomputed
    progress : callable(record, done, failed, remaining) after each point, or
               None (`progress_bar()` draws a tqdm bar)
    max_retries : resubmissions of a point whose worker was lost

    Returns
    -------
    SweepResult

    Raises
    ------
    ConfigError   bad sweep file or options, a base design that does not size,
                  an output directory holding another sweep (or a CSV without
                  `resume`)
    """
    t_start = time.perf_counter()
    out, paths = check_options(out_dir, workers=workers, cluster=cluster,
                               local_cluster=local_cluster, resume=resume)
    if not isinstance(sweep, Sweep):
        sweep = load_sweep(sweep)
    context = Context(documents=sweep.documents, figures=sweep.figures, search=sweep.search)
    table = Table(paths["csv"], sweep)
    ids = {p.id for p in sweep.points}
    resumed = None                   # both files checked before anything is written
    if resume and paths["manifest"].exists():
        resumed = read_manifest(paths["manifest"], sweep.digest)
    finished = {i: r for i, r in (table.read() if resume else {}).items()
                if i in ids and r.status in ("ok", "failed")}
    base, units = resumed or _base(sweep)
    todo = [p for p in sweep.points if p.id not in finished]
    t_compute = time.perf_counter()
    with worker_env():
        executor = _executor(workers, cluster, local_cluster) if todo else None
    described = executor.description if executor else "nothing left to compute"
    out.mkdir(parents=True, exist_ok=True)
    write_json(paths["manifest"], _manifest(sweep, base, units, described))
    collect = _Collector(sweep, table, finished, progress)
    tasks = [Task(id=p.id, assignments=tuple(sweep.assignments(p))) for p in todo]
    table.open()
    retried = 0
    try:
        collect.start(len(todo))
        if executor is not None:
            with worker_env():
                retried = drive(executor, context, tasks, collect, max_retries=max_retries)
        compute_time = time.perf_counter() - t_compute
    finally:
        table.close()
        if executor is not None:
            executor.close()
    ordered = tuple(collect.records[p.id] for p in sweep.points)
    ok_feasible = tuple(r.id for r in ordered if feasible(sweep, r))
    front = pareto_ids(sweep, [r for r in ordered if r.id in set(ok_feasible)])
    result = SweepResult(sweep=sweep, records=ordered, base=base, units=units,
                         computed=tuple(collect.computed), reused=len(finished), retried=retried,
                         feasible=ok_feasible, pareto=front, executor=described,
                         wall_time=time.perf_counter() - t_start,
                         compute_time=compute_time, paths=paths)
    manifest = _manifest(sweep, base, units, described)
    manifest["result"] = result.to_dict()
    write_json(paths["manifest"], manifest)
    if write_page:
        from ._page import write_page as _write_page

        _write_page(result, paths["html"])
    return result


def check_options(out_dir, *, workers=None, cluster=None, local_cluster=None, resume=False):
    """The options of a sweep checked before anything is loaded or computed:
    the executor's (`_executor` rules) and the output directory (writable; an
    existing CSV needs `resume`; `resume` needs a directory that is empty or
    holds a sweep's manifest).  Returns (out, paths of csv, manifest, html)."""
    from ..description import check_output_dir

    _executor_options(workers, cluster, local_cluster)
    out = check_output_dir(out_dir)
    paths = {"csv": out / "sweep.csv", "manifest": out / "sweep.json", "html": out / "sweep.html"}
    if paths["csv"].exists() and not resume:
        raise ConfigError(f"{paths['csv']} exists: pass --resume to continue that sweep, or "
                          f"choose another output directory")
    if resume and out.is_dir() and any(out.iterdir()) and not paths["manifest"].is_file():
        raise ConfigError(f"--resume {out}: the directory is not a sweep's output (no "
                          f"sweep.json): choose the directory of the interrupted sweep")
    return out, paths


class _Collector:
    """Receives each record as it arrives (the `on_record` of `drive`): one CSV
    row, flushed; the progress callback with points done / failed / remaining."""

    def __init__(self, sweep, table, finished, progress):
        self.sweep, self.table, self.progress = sweep, table, progress
        self.by_id = {p.id: p for p in sweep.points}
        self.records = dict(finished)
        self.computed = []
        self.failed = sum(r.status != "ok" for r in finished.values())

    def start(self, todo):
        if self.progress is not None:
            self.progress(None, len(self.records), self.failed, todo)

    def __call__(self, rec):
        point = self.by_id[rec["id"]]
        r = PointRecord(id=point.id, status=rec["status"], message=rec["message"],
                        elapsed=rec["elapsed"], worker=rec["worker"], values=point.values,
                        verdict=rec["verdict"],
                        figures={f.text: rec["figures"].get(f.text) for f in self.sweep.figures})
        self.table.append(r)
        self.records[r.id] = r
        self.computed.append(r.id)
        self.failed += r.status != "ok"
        if self.progress is not None:
            self.progress(r, len(self.records), self.failed,
                          len(self.sweep.points) - len(self.records))


def _manifest(sweep, base, units, executor):
    from .._version import __version__

    return {"opspace_version": __version__, "sweep": sweep.name, "file": sweep.path.name,
            "digest": sweep.digest, "points": len(sweep.points), "executor": executor,
            "columns": Table(Path("-"), sweep).columns, "units": units,
            "parameters": [{"key": p.key, "label": p.label, "unit": p.unit,
                            "sampling": p.spec} for p in sweep.parameters],
            "base": {"id": base.id, "status": base.status, "message": base.message,
                     "elapsed": base.elapsed, "worker": base.worker, "verdict": base.verdict,
                     "figures": base.figures}}
