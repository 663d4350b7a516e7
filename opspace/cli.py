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


def build_parser():
    parser = argparse.ArgumentParser(
        prog="opspace",
        description="Dynamics of mobile manipulators: model checks, drive sizing, simulation.")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p = sub.add_parser("check", help="load and validate a robot description, print a summary")
    p.add_argument("robot", nargs="?", help="robot description TOML (default: the bundled demo)")
    p.set_defaults(func=_cmd_check)
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
