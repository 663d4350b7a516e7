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

import csv
import json
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
from ._worker import Context, Task, _plain, evaluate_point, one_line

__all__ = ["PointRecord", "SweepResult", "evaluate_point", "progress_bar", "run_sweep"]

FIXED_COLUMNS = ("id", "status", "message", "elapsed", "worker")
STATUSES = ("ok", "failed", "error")


# ------------------------------------------------------------------ records
@dataclass(frozen=True)
class PointRecord:
    """One design point's row.

    id; status "ok" (sized), "failed" (invalid combination: message says
    why) or "error" (unexpected: recomputed on resume); message (the sizing
    verdict's message when ok); elapsed s (in the worker); worker pid@host;
    values: parameter key -> value; verdict: the sizing status ("pass",
    "fail", "no catalogue") or None; figures: figure text -> value (None when
    the point's summary lacks it).
    """

    id: str
    status: str
    message: str
    elapsed: float
    worker: str
    values: dict
    verdict: str | None
    figures: dict

    @property
    def ok(self):
        return self.status == "ok"


# ------------------------------------------------------------------ CSV
def _cell(value):
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (list, dict)):
        return json.dumps(value, allow_nan=True)
    return str(value)


def _parse(cell):
    if cell == "":
        return None
    if cell in ("true", "false"):
        return cell == "true"
    try:
        return float(cell)
    except ValueError:
        return cell


class _Table:
    """The CSV of a sweep: header, rows appended and flushed one by one."""

    def __init__(self, path, sweep):
        self.path = Path(path)
        self.sweep = sweep
        self.columns = (list(FIXED_COLUMNS) + [p.key for p in sweep.parameters]
                        + ["verdict"] + [f.text for f in sweep.figures])
        self.fh = None

    def read(self):
        """{id: PointRecord} of the rows already written (the last row of an id
        wins); a half-written last line is cut off."""
        if not self.path.exists():
            return {}
        raw = self.path.read_bytes()
        if raw and not raw.endswith(b"\n"):
            with self.path.open("r+b") as fh:
                fh.truncate(raw.rfind(b"\n") + 1)
        with self.path.open(newline="", encoding="utf-8") as fh:
            reader = csv.reader(fh)
            header = next(reader, None)
            if header is None:
                return {}
            if header != self.columns:
                raise ConfigError(f"{self.path}: its columns differ from the sweep's "
                                  f"({len(header)} against {len(self.columns)}): choose another "
                                  f"output directory")
            rows = {}
            for row in reader:
                if len(row) == len(self.columns) and row[1] in STATUSES:
                    rec = self.record(dict(zip(self.columns, row)))
                    rows[rec.id] = rec
        return rows

    def record(self, row):
        params = self.sweep.parameters
        values = {p.key: (float(row[p.key]) if p.numeric else row[p.key]) for p in params}
        return PointRecord(id=row["id"], status=row["status"], message=row["message"],
                           elapsed=float(row["elapsed"] or 0.0), worker=row["worker"],
                           values=values, verdict=row["verdict"] or None,
                           figures={f.text: _parse(row[f.text]) for f in self.sweep.figures})

    def open(self):
        new = not self.path.exists() or self.path.stat().st_size == 0
        self.fh = self.path.open("a", newline="", encoding="utf-8")
        self.writer = csv.writer(self.fh, lineterminator="\n")
        if new:
            self.writer.writerow(self.columns)
            self.fh.flush()

    def append(self, rec):
        row = [rec.id, rec.status, rec.message, f"{rec.elapsed:.4f}", rec.worker]
        row += [_cell(rec.values[p.key]) for p in self.sweep.parameters]
        row += [_cell(rec.verdict)] + [_cell(rec.figures.get(f.text)) for f in self.sweep.figures]
        self.writer.writerow(row)
        self.fh.flush()

    def close(self):
        if self.fh is not None:
            self.fh.close()
            self.fh = None


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
def _executor(workers, cluster, local_cluster):
    if cluster is not None and local_cluster is not None:
        raise ConfigError("give either a Dask cluster address (--cluster) or a local cluster "
                          "size (--local-cluster), not both")
    if cluster is not None or local_cluster is not None:
        if workers is not None:
            raise ConfigError("--workers counts local processes; with Dask the cluster's "
                              "workers do the work (--local-cluster N starts N)")
        if local_cluster is not None and (isinstance(local_cluster, bool)
                                          or int(local_cluster) != local_cluster
                                          or local_cluster < 1):
            raise ConfigError(f"--local-cluster must be a number of workers >= 1, "
                              f"got {local_cluster!r}")
        return Dask(cluster=cluster, local_cluster=local_cluster)
    workers = (os.cpu_count() or 1) if workers is None else workers
    if isinstance(workers, bool) or int(workers) != workers or workers < 1:
        raise ConfigError(f"--workers must be a number of processes >= 1, got {workers!r}")
    return Processes(int(workers))


def _write_json(path, data):
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(json.dumps(data, indent=2, ensure_ascii=False, default=str) + "\n",
                   encoding="utf-8")
    os.replace(tmp, path)


def _base(sweep, out, manifest, resume):
    """The base design's record and the figures' units: from the manifest of a
    resumed sweep, else sized here (which also checks the figures)."""
    if resume and manifest.exists():
        data = json.loads(manifest.read_text(encoding="utf-8"))
        if data.get("digest") != sweep.digest:
            raise ConfigError(f"{out}: holds the output of a different sweep (base files, "
                              f"[fixed], parameter keys, figures or search changed): choose "
                              f"another output directory")
        b = data["base"]
        return PointRecord(**{**b, "values": {}}), data["units"]
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
    if not isinstance(sweep, Sweep):
        sweep = load_sweep(sweep)
    out, paths = _output(out_dir, resume)
    context = Context(documents=sweep.documents, figures=sweep.figures, search=sweep.search)
    table = _Table(paths["csv"], sweep)
    base, units = _base(sweep, out, paths["manifest"], resume)
    ids = {p.id for p in sweep.points}
    finished = {i: r for i, r in (table.read() if resume else {}).items()
                if i in ids and r.status in ("ok", "failed")}
    todo = [p for p in sweep.points if p.id not in finished]
    t_compute = time.perf_counter()
    with worker_env():
        executor = _executor(workers, cluster, local_cluster) if todo else None
    described = executor.description if executor else "nothing left to compute"
    out.mkdir(parents=True, exist_ok=True)
    _write_json(paths["manifest"], _manifest(sweep, base, units, described))
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
    _write_json(paths["manifest"], manifest)
    if write_page:
        from ._page import write_page as _write_page

        _write_page(result, paths["html"])
    return result


def _output(out_dir, resume):
    """The output directory and its files; an existing CSV needs `resume`."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise ConfigError(f"-o {out}: exists and is not a directory")
    paths = {"csv": out / "sweep.csv", "manifest": out / "sweep.json", "html": out / "sweep.html"}
    if paths["csv"].exists() and not resume:
        raise ConfigError(f"{paths['csv']} exists: pass --resume to continue that sweep, or "
                          f"choose another output directory")
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
            "columns": _Table(Path("-"), sweep).columns, "units": units,
            "parameters": [{"key": p.key, "label": p.label, "unit": p.unit,
                            "sampling": p.spec} for p in sweep.parameters],
            "base": {"id": base.id, "status": base.status, "message": base.message,
                     "elapsed": base.elapsed, "worker": base.worker, "verdict": base.verdict,
                     "figures": base.figures}}
