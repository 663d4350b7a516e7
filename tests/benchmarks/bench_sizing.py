"""Speed of the sizing job on the demo (issue: drive sizing).

Prints, in one run: the wall time of the whole demo `opspace size` (as a
subprocess, report written), of the worst-case arm search alone, and the
states evaluated per second by the batch inverse dynamics against a plain
loop of single calls.  Targets: the demo report in under 15 s on this 2-core
machine; batch evaluation at least 5x the loop.

    python tests/benchmarks/bench_sizing.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path


import opspace
from opspace.sizing import evaluate_cycle
from opspace.sizing._worst_case import critical_instants, worst_poses

REPO = Path(__file__).resolve().parents[2]
CYCLE = REPO / "models" / "marmot" / "shift.toml"


def main():
    with tempfile.TemporaryDirectory() as out:
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "opspace", "size", str(CYCLE), "-o", out, "-q"],
                       check=True, capture_output=True)
        t_cli = time.perf_counter() - t0
    robot = opspace.load_robot(CYCLE.with_name("robot.toml"))
    duty = opspace.load_duty_cycle(CYCLE, robot=robot)
    t0 = time.perf_counter()
    ev = evaluate_cycle(robot, duty)
    t_eval = time.perf_counter() - t0
    instants = critical_instants(ev)
    t0 = time.perf_counter()
    worst_poses(robot, instants)
    t_search = time.perf_counter() - t0
    print(f"demo `opspace size` (subprocess, report written) {t_cli:6.2f} s   (target < 15 s)")
    print(f"cycle evaluation ({len(ev.t)} samples)              {t_eval:6.2f} s")
    print(f"worst-case arm search ({len(instants)} instants)          {t_search:6.2f} s")

    qs, nus, nds = ev.qs, ev.nu, ev.nu_dot
    for label, kw in (("rigid", {"with_friction": False}), ("with friction", {})):
        opspace.inverse_dynamics_batch(robot, qs[:10], nus[:10], nds[:10], **kw)
        t0 = time.perf_counter()
        opspace.inverse_dynamics_batch(robot, qs, nus, nds, **kw)
        t_b = time.perf_counter() - t0
        t0 = time.perf_counter()
        for x in zip(qs, nus, nds):
            opspace.inverse_dynamics(robot, *x, **kw)
        t_l = time.perf_counter() - t0
        n = len(qs)
        print(f"inverse dynamics {label:13s}: batch {n / t_b:10.0f} states/s, loop "
              f"{n / t_l:9.0f} states/s, ratio {t_l / t_b:5.1f}x  (target >= 5)")


if __name__ == "__main__":
    main()
