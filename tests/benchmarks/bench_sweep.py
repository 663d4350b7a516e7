"""Speed of design-space sweeps (issue: sweeps that scale from a laptop to a cluster).

Prints, in one run, for the same 200-point sweep of the demo rover (mount x
× payload × gear ratio, search off, the demo cycle sampled at 50 Hz instead
of its 200 Hz to keep the run short): points per second on 1 local process,
on every local core, and on a 2-worker Dask LocalCluster; the speed-up and
the parallel efficiency against 1 process; and the executor's overhead per
point as a share of the point's own cost.

The machine is noisy: the 1-minute load average around each run is printed
so that a run that shared its cores with other processes can be told apart.
Throughput is the steady state: from the arrival of the first point of every
worker to the last point (worker start-up and the first point's imports and
caches excluded; the whole wall time is printed too).  Overhead per point:
W / throughput − c, with W workers and c the mean time a worker spends
sizing one point (measured inside the worker), over c.

Every worker holds BLAS and OpenMP to one thread (opspace.sweep does it:
threadpoolctl in the worker, OMP/OPENBLAS/MKL_NUM_THREADS=1 in the
environment of the processes it starts, one thread for Pinocchio's batch
inverse dynamics; Dask's nanny sets the same variables), so W workers use W
cores.  Targets: >= 1.7x on 2 cores over 1 process; Dask overhead per point
< 10 % of the point's cost.

    python tests/benchmarks/bench_sweep.py [--points N]
"""

from __future__ import annotations

import argparse
import os
import statistics
import tempfile
import time
from pathlib import Path

from opspace.sweep import load_sweep, run_sweep

REPO = Path(__file__).resolve().parents[2]
CYCLE = REPO / "models" / "marmot" / "shift.toml"

SWEEP = """\
[sweep]
name = "benchmark"
duty_cycle = "{cycle}"
figures = ["stability.min_tip_over_margin", "max(wheels.peak_torque.*)"]

[fixed]
"cycle.sample_rate" = 50

[[parameter]]
key = "robot.mount.xyz[0]"
range = {{ start = 0.0, stop = 0.27, num = {n_mount} }}

[[parameter]]
key = "robot.payload.mass"
values = [2.0, 3.0, 4.0, 5.0]

[[parameter]]
key = "robot.drive.gear_ratio"
values = [16.0, 20.0, 24.0, 28.0, 32.0]
"""


class Clock:
    """Arrival time of every record (a run_sweep progress callback)."""

    def __init__(self):
        self.arrivals = []

    def __call__(self, record, done, failed, remaining):
        if record is not None:
            self.arrivals.append((time.perf_counter(), record))


def _load():
    return os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")


def measure(path, out, **where):
    clock = Clock()
    load0 = _load()
    result = run_sweep(path, out, progress=clock, write_page=False, **where)
    load = max(load0, _load())
    workers = {r.worker for _, r in clock.arrivals}
    k = len(workers)
    # steady state: after every worker has delivered one point
    seen, start = set(), None
    for i, (t, r) in enumerate(clock.arrivals):
        seen.add(r.worker)
        if len(seen) == k:
            start = i
            break
    t0 = clock.arrivals[start][0]
    t1 = clock.arrivals[-1][0]
    steady = clock.arrivals[start + 1:]
    throughput = len(steady) / (t1 - t0)
    cost = statistics.fmean(r.elapsed for _, r in steady)
    overhead = (k / throughput - cost) / cost
    failed = sum(not r.ok for _, r in clock.arrivals)
    return {"label": result.executor, "workers": k, "throughput": throughput, "cost": cost,
            "overhead": overhead, "wall": result.wall_time, "n": len(clock.arrivals),
            "failed": failed, "load": load}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=200, help="a multiple of 20")
    args = parser.parse_args(argv)
    cores = os.cpu_count() or 1
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        path = tmp / "bench.toml"
        path.write_text(SWEEP.format(cycle=Path(os.path.relpath(CYCLE, tmp)).as_posix(),
                                     n_mount=max(2, args.points // 20)))
        n = len(load_sweep(path).points)
        runs = [measure(path, tmp / "one", workers=1),
                measure(path, tmp / "all", workers=cores),
                measure(path, tmp / "dask", local_cluster=2)]
    one = runs[0]
    print(f"{n}-point sweep (search off, 50 Hz cycle sampling), {cores} cores")
    print(f"{'executor':44s} {'points/s':>9s} {'speed-up':>9s} {'efficiency':>10s} "
          f"{'point cost':>10s} {'overhead':>9s} {'wall':>7s} {'load':>5s}")
    for r in runs:
        speedup = r["throughput"] / one["throughput"]
        print(f"{r['label']:44s} {r['throughput']:9.2f} {speedup:8.2f}x "
              f"{speedup / r['workers']:10.0%} {r['cost'] * 1000:8.0f}ms {r['overhead']:9.1%} "
              f"{r['wall']:6.1f}s {r['load']:5.1f}"
              + (f"  ({r['failed']} failed)" if r["failed"] else ""))
    two = runs[1]
    print(f"speed-up on {two['workers']} cores over 1 process: "
          f"{two['throughput'] / one['throughput']:.2f}x (target >= 1.7x on 2 cores)")
    dask = runs[2]
    print(f"Dask overhead per point: {dask['overhead']:.1%} of the point's cost "
          f"(target < 10 %); local processes: {two['overhead']:.1%}")
    per_point = {k: r["workers"] / r["throughput"] for k, r in (("dask", dask), ("two", two))}
    print(f"Dask against local processes with as many workers: "
          f"{per_point['dask'] / per_point['two'] - 1:+.1%} time per point (the scheduler, "
          f"nannies and client share these cores; each Dask worker runs its event loop "
          f"beside the point)")
    print("load: the 1-minute load average around each run; above the core count, other "
          "processes shared the cores and the ratios understate the speed-up")


if __name__ == "__main__":
    main()
