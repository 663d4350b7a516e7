"""Speed of the joint-space terms and inverse dynamics on the demo robot.

Prints medians (µs per call) and the ratio to the raw Pinocchio calls each
function wraps, measured side by side in one run.  Targets (issue: foundation):
joint_space and inverse_dynamics at most 3x their raw calls; batch inverse
dynamics over 10,000 states at least 5x faster than a Python loop.

    python tests/benchmarks/bench_dynamics.py
"""

from __future__ import annotations

import statistics
import time
from pathlib import Path

import numpy as np
import pinocchio as pin

import opspace

DEMO = Path(__file__).resolve().parents[2] / "models" / "marmot" / "robot.toml"


def median_us(fn, repeat=7, number=2000):
    samples = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        samples.append((time.perf_counter() - t0) / number * 1e6)
    return statistics.median(samples)


def main():
    robot = opspace.load_robot(DEMO)
    model, data = robot.model, robot.model.createData()
    rng = np.random.default_rng(1)
    q = robot.configuration(arm=rng.uniform(robot.lower, robot.upper))
    nu, nu_dot = rng.normal(size=robot.nv), rng.normal(size=robot.nv)
    v, a = robot.S @ nu, robot.S @ nu_dot

    def raw_js():
        pin.crba(model, data, q)
        pin.nonLinearEffects(model, data, q, v)
        pin.computeGeneralizedGravity(model, data, q)

    def raw_id():
        pin.rnea(model, data, q, v, a)

    t_raw_js = median_us(raw_js)
    t_js = median_us(lambda: opspace.joint_space(robot, q, nu))
    t_raw_id = median_us(raw_id)
    t_id = median_us(lambda: opspace.inverse_dynamics(robot, q, nu, nu_dot, with_friction=False))
    t_idf = median_us(lambda: opspace.inverse_dynamics(robot, q, nu, nu_dot))
    print(f"joint_space            {t_js:7.2f} µs   raw crba+nle+gravity {t_raw_js:6.2f} µs   "
          f"ratio {t_js / t_raw_js:5.2f}  (target <= 3)")
    print(f"inverse_dynamics       {t_id:7.2f} µs   raw rnea             {t_raw_id:6.2f} µs   "
          f"ratio {t_id / t_raw_id:5.2f}  (target <= 3)")
    print(f"  with friction + rolling resistance {t_idf:7.2f} µs   ratio {t_idf / t_raw_id:5.2f}")

    n = 10_000
    qs = np.array([robot.configuration(arm=rng.uniform(robot.lower, robot.upper)) for _ in range(n)])
    nus, nu_dots = rng.normal(size=(n, robot.nv)), rng.normal(size=(n, robot.nv))
    for label, kw in (("rigid", {"with_friction": False}), ("with friction", {})):
        t0 = time.perf_counter()
        loop = np.array([opspace.inverse_dynamics(robot, *x, **kw) for x in zip(qs, nus, nu_dots)])
        t_loop = time.perf_counter() - t0
        opspace.inverse_dynamics_batch(robot, qs[:10], nus[:10], nu_dots[:10], **kw)  # pool warm-up
        t0 = time.perf_counter()
        batch = opspace.inverse_dynamics_batch(robot, qs, nus, nu_dots, **kw)
        t_batch = time.perf_counter() - t0
        assert np.allclose(batch, loop, rtol=1e-9, atol=1e-9)
        print(f"batch ID 10k ({label:13s}) {t_batch * 1e3:7.1f} ms   loop {t_loop * 1e3:7.1f} ms   "
              f"speed-up {t_loop / t_batch:5.1f}x  (target >= 5)")


if __name__ == "__main__":
    main()
