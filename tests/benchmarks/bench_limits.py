"""Speed of the motion limits (issue: motion limits for the robot's motion planner).

Prints, in one run, on one core (OpenMP and BLAS held to one thread):

* configurations per second of `motion_limits_batch` on the demo (all four
  limits, both senses of yaw and turn), against the issue's target of 20,000
  configurations per second: the ratio batch rate / target (>= 1 meets it);
* the batch against a loop of single `motion_limits` calls (ratio);
* the batch against its floor: the probe evaluations alone (inverse dynamics,
  tyre forces and ground wrench at the six probe states of every
  configuration), i.e. how much the search along the rays adds.

    python tests/benchmarks/bench_limits.py [N]
"""

from __future__ import annotations

import os
import sys
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

import opspace  # noqa: E402
from opspace.limits import motion_limits, motion_limits_batch  # noqa: E402
from opspace.dynamics import inverse_dynamics_batch  # noqa: E402
from opspace.stability import ground_wrench, tyre_forces  # noqa: E402

TARGET = 20_000.0      # configurations per second (issue)


def _probes(robot, qs):
    """The six probe evaluations per configuration that the batch makes."""
    n = len(qs)
    q6 = np.tile(qs, (6, 1))
    nu = np.zeros((6 * n, robot.nv))
    nd = np.zeros((6 * n, robot.nv))
    nd[n:2 * n, 0] = nd[2 * n:3 * n, 1] = 1.0
    nu[3 * n:, :2] = 5.0
    Q = inverse_dynamics_batch(robot, q6, nu, nd, threads=1)
    tyre_forces(robot, q6, nu, nd, Q)
    ground_wrench(robot, q6, nu, nd)


def main(n=2000):
    robot = opspace.load_robot(os.path.join(os.path.dirname(__file__), "..", "..", "models",
                                            "marmot", "robot.toml"))
    rng = np.random.default_rng(0)
    arm = rng.uniform(np.maximum(robot.lower, -2), np.minimum(robot.upper, 2), (n, robot.n_arm))
    qs = robot.configurations(arm)
    motion_limits_batch(robot, qs[:20])                       # warm-up
    t0 = time.perf_counter()
    motion_limits_batch(robot, qs, payload=True)
    t_batch = time.perf_counter() - t0
    m = min(n, 100)
    t0 = time.perf_counter()
    for q in qs[:m]:
        motion_limits(robot, q, payload=True)
    t_loop = (time.perf_counter() - t0) / m * n
    t0 = time.perf_counter()
    _probes(robot, qs)
    t_probe = time.perf_counter() - t0
    rate = n / t_batch
    print(f"motion_limits_batch, {n} configurations: {rate:9.0f} configurations/s "
          f"({t_batch / n * 1e6:.0f} µs each)")
    print(f"  ratio to the target of {TARGET:.0f}/s:          {rate / TARGET:6.3f}   (>= 1 meets it)")
    print(f"  batch vs a loop of single calls:          {t_loop / t_batch:6.2f}x faster")
    print(f"  batch vs its probes alone (the floor):    {t_batch / t_probe:6.2f}x slower")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 2000)
