"""The `opspace` command.  Parses arguments and calls the library; a bad
file or argument prints one line and exits with status 2."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from .errors import ConfigError, ModelError

__all__ = ["main"]


def demo_robot_path():
    """The bundled demo robot description (installed copy, else the repo's)."""
    here = Path(__file__).resolve().parent
    for candidate in (here / "_models" / "marmot" / "robot.toml",
                      here.parent / "models" / "marmot" / "robot.toml"):
        if candidate.is_file():
            return candidate
    raise ConfigError("the bundled demo robot (models/marmot/robot.toml) was not found")


def _cmd_check(args):
    from .model import load_robot
    from .report import check_summary

    robot = load_robot(args.robot or demo_robot_path())
    print(check_summary(robot))
    return 0


def demo_cycle_path():
    """The bundled demo duty cycle."""
    return demo_robot_path().with_name("shift.toml")


class _Progress:
    """A tqdm bar per stage on stderr (silent when stderr is not a terminal
    unless forced), fed by the library's progress callbacks."""

    def __init__(self, enabled):
        self.enabled = enabled
        self.bars = {}

    def __call__(self, stage, done, total):
        if not self.enabled:
            return
        from tqdm import tqdm

        bar = self.bars.get(stage)
        if bar is None:
            bar = self.bars[stage] = tqdm(total=total, desc=f"{stage:<18}", unit="step",
                                          leave=True, file=sys.stderr)
        bar.n = done
        bar.refresh()
        if done >= total:
            bar.close()

    def close(self):
        for bar in self.bars.values():
            bar.close()


def _cmd_size(args):
    from .description.duty import load_duty_cycle
    from .model import load_robot
    from .report import write_sizing_report
    from .sizing import size

    path = Path(args.cycle) if args.cycle else demo_cycle_path()
    duty = load_duty_cycle(path)
    robot = load_robot(duty.robot_path)
    duty = load_duty_cycle(path, robot=robot)          # cross-checks before computing
    catalogue = args.catalogue
    if catalogue is not None:
        from .description.catalogue import load_catalogue
        catalogue = load_catalogue(catalogue)
    out = Path(args.output)
    if out.exists() and not out.is_dir():
        raise ConfigError(f"-o {out}: exists and is not a directory")
    progress = _Progress(not args.quiet and sys.stderr.isatty())
    try:
        result = size(duty, robot=robot, catalogue=catalogue, search=not args.no_search,
                      progress=progress)
        paths = write_sizing_report(result, out, progress=lambda d, t: progress("figures", d, t))
    finally:
        progress.close()
    print(f"{result.status.upper()}: {result.message}")
    for c in result.robot_criteria:
        unit = "" if c.unit == "1" else f" {c.unit}"
        print(f"  {c.name:<10} {c.value:.3g}{unit} (limit {c.limit:g}{unit}), margin {c.margin:+.0%}: "
              f"{'pass' if c.passed else 'FAIL'} — {c.note}")
    if result.stop is not None:
        s = result.stop
        print(f"  shortest stop from {s.speed:g} m/s (worst arm pose, payload): "
              f"{s.deceleration:.2f} m/s², {s.distance:.2f} m, limited by {s.limited_by}")
    print(f"report: {paths['report']}")
    print(f"figures with units: {paths['summary']}; time series: {paths['timeseries']}")
    print("Model estimates: apply service factors, verify on hardware, follow the applicable "
          "safety standards.")
    return 0 if result.status != "fail" else 1


def build_parser():
    parser = argparse.ArgumentParser(
        prog="opspace",
        description="Dynamics of mobile manipulators: model checks, drive sizing, simulation.")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p = sub.add_parser("check", help="load and validate a robot description, print a summary")
    p.add_argument("robot", nargs="?", help="robot description TOML (default: the bundled demo)")
    p.set_defaults(func=_cmd_check)
    p = sub.add_parser("size", help="size the wheel drives for a duty cycle and write the report")
    p.add_argument("cycle", nargs="?", help="duty-cycle TOML (default: the bundled demo)")
    p.add_argument("-o", "--output", default="opspace-report",
                   help="output directory (default: ./opspace-report)")
    p.add_argument("--catalogue", help="motor and gearbox catalogue TOML (default: the cycle's)")
    p.add_argument("--no-search", action="store_true",
                   help="skip the worst-case arm search and the shortest-stop figure")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")
    p.set_defaults(func=_cmd_size)
    return parser


def main(argv=None):
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed its one-line usage error
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return args.func(args)
    except (ConfigError, ModelError) as exc:
        print(f"opspace: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("opspace: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
