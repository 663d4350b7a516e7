"""Sweep the wheel-drive gear ratio and the arm's mount position of the demo
rover from Python (what `opspace sweep` does).

    python examples/sweep_gear_and_mount.py [-o DIR] [--workers N | --local-cluster N] [--quick]

Writes a sweep file into DIR that varies the described drive's gear ratio
(motor speed / wheel speed) and the arm mount's x position of the bundled
demo rover (models/marmot, invented) over its demo duty cycle, runs it on
local processes (or a Dask LocalCluster), and prints the Pareto front of the
motor's thermal RMS torque (a motor-size proxy) against its peak speed: a
higher ratio asks for less torque and more speed.  Designs whose tip-over
margin falls below 60 % of the static margin are not feasible.  `--quick`
sizes 4 points at a coarse sample rate (used by the test suite).

The figures are model estimates: apply service factors, verify on hardware,
and follow the applicable safety standards for mobile robots.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

import opspace.sweep as sweep

HERE = Path(__file__).resolve().parent
CYCLE = HERE.parent / "models" / "marmot" / "shift.toml"

SWEEP = """\
[sweep]
name = "Marmot: gear ratio x arm mount (example)"
duty_cycle = "{cycle}"
figures = [
    "max(described_drive.thermal_rms_motor_torque)",
    "max(described_drive.peak_motor_speed.*)",
    "stability.criteria[name=tip-over].margin",
    "max(wheels.peak_traction_use.*)",
]

[fixed]
"cycle.sample_rate" = {rate}

[[parameter]]
key = "robot.drive.gear_ratio"
label = "gear ratio"
{gears}

[[parameter]]
key = "robot.mount.xyz[0]"
label = "mount x"
unit = "m"
values = {mounts}

[pareto]
x = "max(described_drive.thermal_rms_motor_torque)"
x_goal = "min"
y = "max(described_drive.peak_motor_speed.*)"
y_goal = "min"

[[constraint]]
figure = "stability.criteria[name=tip-over].margin"
min = 0.6

[labels]
"max(described_drive.thermal_rms_motor_torque)" = "motor thermal RMS torque"
"max(described_drive.peak_motor_speed.*)" = "peak motor speed"
"stability.criteria[name=tip-over].margin" = "tip-over margin (share of static)"
"""


def write_sweep(out, quick):
    """The example's sweep file in `out` (the duty cycle named relative to it)."""
    out.mkdir(parents=True, exist_ok=True)
    cycle = Path(os.path.relpath(CYCLE, out)).as_posix()
    text = SWEEP.format(
        cycle=cycle, rate=40 if quick else 100,
        gears="values = [16.0, 32.0]" if quick else "range = { start = 12.0, stop = 40.0, step = 4.0 }",
        mounts="[0.0, 0.27]" if quick else "[0.0, 0.18, 0.27]")
    path = out / "gear_and_mount.toml"
    path.write_text(text, encoding="utf-8")
    return path


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-o", "--output", default="sweep-gear-and-mount-out")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, help="local processes (default: every core)")
    where.add_argument("--local-cluster", type=int, metavar="N",
                       help="run on a Dask LocalCluster of N workers (needs opspace[cluster])")
    parser.add_argument("--quick", action="store_true", help="4 points, coarse sampling")
    args = parser.parse_args(argv)

    out = Path(args.output)
    spec = sweep.load_sweep(write_sweep(out, args.quick))
    print(f"{spec.name}: {len(spec.points)} design points")
    result = sweep.run_sweep(spec, out / "results", workers=args.workers,
                             local_cluster=args.local_cluster, resume=True)
    print(result.message)
    x, _, y, _ = spec.pareto
    by_id = {r.id: r for r in result.records}
    for i in result.pareto:
        r = by_id[i]
        print(f"  gear ratio {r.values['robot.drive.gear_ratio']:g}, mount x "
              f"{r.values['robot.mount.xyz[0]']:g} m: motor RMS torque {r.figures[x]:.4f} N·m, "
              f"peak motor speed {r.figures[y]:.0f} rad/s")
    print(f"page: {result.paths['html']}")
    return result


if __name__ == "__main__":
    main()
