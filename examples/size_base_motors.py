"""Size the wheel drives of the demo rover from Python (what `opspace size` does).

    python examples/size_base_motors.py [-o DIR] [--quick]

Loads the bundled duty cycle (models/marmot/shift.toml, invented), evaluates
it, checks every motor and gearbox of the invented demo catalogue, searches
the arm's worst poses, and writes report.html, summary.json, timeseries.csv.
`--quick` skips the worst-case search (used by the test suite).

The figures are model estimates: apply service factors, verify on hardware,
and follow the applicable safety standards for mobile robots.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import opspace
from opspace.report import write_sizing_report

HERE = Path(__file__).resolve().parent
CYCLE = HERE.parent / "models" / "marmot" / "shift.toml"


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-o", "--output", default="size-base-motors-out")
    parser.add_argument("--quick", action="store_true", help="skip the worst-case arm search")
    args = parser.parse_args(argv)

    result = opspace.size(CYCLE, search=not args.quick)
    print(f"{result.status}: {result.message}")
    ev = result.evaluation
    print(f"cycle {ev.duration:.1f} s, peak wheel torque {abs(ev.tau_out).max():.2f} N·m, "
          f"peak wheel speed {abs(ev.wheel_speed).max():.2f} rad/s")
    for crit in result.robot_criteria:
        print(f"  {crit.name}: margin {crit.margin:+.0%} ({crit.note})")
    rec = result.recommended
    if rec is not None:
        sweep, check = rec
        print(f"smallest passing motor: {check.motor} + {check.gearbox} at {check.ratio:g}:1; "
              f"ratios that pass: {sweep.passing_ratios}; RMS-optimal ratio "
              f"{sweep.rms_optimal_ratio:.1f}; inertia-matching ratio {sweep.inertia_matching_ratio:.1f}")
    paths = write_sizing_report(result, args.output)
    print(f"report written to {paths['report']}")
    return result


if __name__ == "__main__":
    main()
