"""The `opspace` command.  Parses arguments and calls the library; a bad
file or argument prints one line and exits with status 2."""

from __future__ import annotations

import argparse
import math
import os
import sys
from pathlib import Path

from .errors import ConfigError, ModelError

__all__ = ["main"]


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line error (exit status 2), like a bad file key."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _input_file(path, what):
    """A file named on the command line: it exists and is a regular file."""
    from .description import check_file

    if path is None:
        return None
    check_file(path, where=f"opspace: {what} argument", what="file")
    return Path(path)


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
    from .stability import check_standing

    robot = load_robot(_input_file(args.robot, "ROBOT") or demo_robot_path())
    check_standing(robot)
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
    from .description import check_output_dir, load_duty_cycle
    from .model import load_robot
    from .report import write_sizing_report
    import numpy as np

    from .sizing import size
    from .sizing import margin_text as pct

    path = _input_file(args.cycle, "CYCLE") or demo_cycle_path()
    out = check_output_dir(args.output)
    duty = load_duty_cycle(path)
    robot = load_robot(args.robot or duty.robot_path)   # --robot: e.g. an identified one
    duty = load_duty_cycle(path, robot=robot)          # cross-checks before computing
    catalogue = args.catalogue
    if catalogue is not None:
        from .description import load_catalogue
        catalogue = load_catalogue(_input_file(catalogue, "--catalogue"))
    progress = _Progress(not args.quiet and sys.stderr.isatty())
    try:
        result = size(duty, robot=robot, catalogue=catalogue, search=not args.no_search,
                      basis=args.verdict_basis, progress=progress)
        paths = write_sizing_report(result, out, progress=lambda d, t: progress("figures", d, t))
    finally:
        progress.close()
    print(f"{result.status.upper()}: {result.message}")
    for c in result.robot_criteria:
        unit = "" if c.unit in ("", "1") else f" {c.unit}"
        value = f"{c.value:.3g}{unit}" if np.isfinite(c.value) else "unbounded"
        print(f"  {c.name:<10} {value} (limit {c.limit:g}{unit}), margin "
              f"{pct(c.margin, 'unbounded')}: {'pass' if c.passed else 'FAIL'} — {c.note}")
    if result.stop is not None:
        s = result.stop
        if s.deceleration > 0:
            print(f"  shortest stop from {s.speed:g} m/s (worst arm pose, payload): "
                  f"{s.deceleration:.2f} m/s², {s.distance:.2f} m, limited by {s.limited_by}")
        else:
            print(f"  shortest stop from {s.speed:g} m/s (worst arm pose, payload): none "
                  f"without losing grip or tipping ({s.limited_by})")
    if result.contact is not None:
        print(f"  contact pre-check (two-body model, not part of the drive verdict): "
              f"{result.contact.status.upper()}: {result.contact.message}")
    print(f"report: {paths['report']}")
    print(f"figures with units: {paths['summary']}; time series: {paths['timeseries']}")
    print("Model estimates: apply service factors, verify on hardware, follow the applicable "
          "safety standards.")
    return 0 if result.status != "fail" else 1


def _cmd_simulate(args):
    from .description import check_output_dir, load_scenario, option_number
    from .report import simulation_text, write_simulation_outputs
    from .simulation import ScenarioRun, SimulationError

    path = _input_file(args.scenario, "SCENARIO") or demo_robot_path().with_name("pick.toml")
    out = check_output_dir(args.output)
    option_number("--payload-error", args.payload_error, lo=-0.9, hi=10.0)
    scenario = load_scenario(path)
    if args.robot:                                      # e.g. an identified robot
        from dataclasses import replace
        scenario = replace(scenario, robot_path=_input_file(args.robot, "--robot").resolve())
    run = ScenarioRun(scenario, payload_mass_error=args.payload_error,   # validates it all
                      compiled=False if args.reference_loop else None)
    progress = _Progress(not args.quiet and sys.stderr.isatty())
    try:
        try:
            result = run.run(integrator=args.integrator,
                             progress=lambda d, t: progress("simulate", d, t))
        except SimulationError as exc:
            progress.close()
            print(f"opspace: simulation stopped: {exc}", file=sys.stderr)
            if exc.result is not None:
                out.mkdir(parents=True, exist_ok=True)
                exc.result.to_csv(out / "partial_run.csv")
                print(f"partial run kept in {out / 'partial_run.csv'}", file=sys.stderr)
            return 1
        check = None
        if args.step_check:
            from .simulation import compare_runs
            half = run.run(integrator=args.integrator, step=scenario.step / 2,
                           progress=lambda d, t: progress("half step", d, t))
            check = compare_runs(result, half)
            result.extra["step_check"] = check.to_dict()
        paths = write_simulation_outputs(run, result, out, animate=not args.no_animation,
                                         progress=lambda d, t: progress("figures", d, t))
    finally:
        progress.close()
    print(simulation_text(run, result))
    if check is not None:
        print(_step_check_line(check, scenario.step))
    print(f"outputs in {out}: " + ", ".join(sorted(p.name for p in paths.values())))
    return 0 if result.status == "completed" and (check is None or check.passed) else 1


def _step_check_line(check, step):
    worst = check.worst
    where = (f"; largest difference {worst[4]:.2%} in {worst[0]}" if worst is not None else "")
    if check.passed:
        return (f"step check PASSED: RK4 at {step * 1e3:g} ms and at {step * 500:g} ms agree "
                f"within {check.rtol:.0%} on every headline figure{where}")
    bad = [r[0] for r in check.rows if not r[5]]
    return (f"step check FAILED: RK4 at {step * 1e3:g} ms and at {step * 500:g} ms differ by "
            f"more than {check.rtol:.0%} in {', '.join(bad[:4])}"
            f"{' ...' if len(bad) > 4 else ''}{where}: the headline figures depend on the step")


# -------------------------------------------------------------- opspace contact
def _cmd_contact(args):
    from .contact import check_contacts, load_contact_points, load_regions
    from .model import load_robot
    from .report import write_contact_report

    robot = load_robot(args.robot or demo_robot_path())
    points = load_contact_points(args.points) if args.points else None
    regions = load_regions(args.regions) if args.regions else None
    if args.region is not None:
        from dataclasses import replace
        table = regions or load_regions()
        table.get(args.region, "--region")
        base = points if points is not None else robot.description.contact_points
        points = tuple(replace(p, region=args.region) for p in base)
    out = _output_dir(args.output)
    if args.payload:
        robot.attach_payload()
    check = check_contacts(robot, points, regions, pose=args.pose, speed=args.speed,
                           maps=args.map, map_samples=args.samples)
    paths = write_contact_report(check, out, footprint=robot.description.base.footprint)
    print(f"{check.status.upper()}: {check.message}")
    for m in check.at_pose:
        v = "no body region at this height" if m.v_whole_body is None else \
            f"permissible {m.v_whole_body:.2f} m/s ({m.region})"
        lk = "immobile" if m.base_locked == float("inf") else f"{m.base_locked:.3g} kg"
        print(f"  {m.name:<18} effective mass {m.whole_body:.3g} kg whole body, "
              f"{lk} base locked, {m.simple:.3g} kg hand estimate; {v}")
    print(f"page: {paths['contact.html']}; figures: {paths['contact.json']}, "
          f"{paths['contact.csv']}")
    print("Pre-check for design, not a validation: a risk assessment and measurement are "
          "needed; follow the applicable standards.")
    return 1 if check.status == "exceeded" else 0


def _output_dir(path):
    from .description import check_output_dir

    return check_output_dir(path)
# ---------------------------------------------------------- end opspace contact


# ------------------------------------------------------------- opspace identify
def _cmd_identify(args):
    from .description import read_toml
    from .description import load_motion_log
    from .identify import identify
    from .model import load_robot
    from .report import write_identify_outputs

    robot = load_robot(args.robot)
    doc = read_toml(args.robot)
    if "arm_urdf" not in doc.get("robot", {}):
        raise ConfigError(f"{Path(args.robot).name}: identification writes back the "
                          f"arm-URDF form of a description ([robot] arm_urdf)")
    constants = dict(_torque_constant(text) for text in args.torque_constant or ())
    logs = []
    for path in args.logs:
        logs.append(load_motion_log(path, robot, torque_constants=dict(constants)))
    out = _output_dir(args.output)
    result = identify(robot, logs, cutoff=args.cutoff)
    urdf_text = robot.description.arm_urdf.read_text(encoding="utf-8")
    paths = write_identify_outputs(result, logs, doc, urdf_text, out)
    fit = result.fit
    kept = f"; kept at the description's values: {len(result.consistency)}" \
        if result.consistency else ""
    print(f"IDENTIFIED: {len(fit.base.index)} identifiable combinations of "
          f"{result.params.size} parameters, condition number {fit.condition:.3g}{kept}")
    if result.params.payload is not None:
        print(f"  payload mass {result.value('payload.m'):.4g} kg (description "
              f"{result.prior('payload.m'):.4g} kg)")
    for c in robot.coordinate_names[:2]:
        print(f"  {c}: Coulomb {result.value(c + '.coulomb'):.4g} N·m, viscous "
              f"{result.value(c + '.viscous'):.4g} N·m·s/rad")
    print(f"page: {paths['identify.html']}; identified robot: {paths['identified/robot.toml']} "
          f"(use it with check, size --robot, simulate --robot, contact)")
    print("Estimates from logged motion: verify on hardware before relying on them.")
    return 0


def _cmd_excite(args):
    import json
    import os

    import numpy as np

    from .identify import design_excitation
    from .model import load_robot

    robot = load_robot(args.robot)
    out = _output_dir(args.output)
    ex = design_excitation(robot, harmonics=args.harmonics, period=args.period,
                           budget=args.budget, seed=args.seed)
    t = np.arange(0.0, args.cycles * ex.period, 1.0 / args.rate)
    pos, vel, acc = ex.motion(t)
    names = robot.coordinate_names
    header = ["time", *names, *(f"velocity:{n}" for n in names),
              *(f"acceleration:{n}" for n in names)]
    rows = np.column_stack([t, pos, vel, acc])
    out.mkdir(parents=True, exist_ok=True)
    status = "designed" if ex.feasible else "infeasible"
    doc = {"status": status, "period": {"value": ex.period, "unit": "s"},
           "harmonics": args.harmonics, "coordinates": list(names),
           "q0": ex.q0.tolist(), "a": ex.a.tolist(), "b": ex.b.tolist(),
           "condition_number": ex.condition, "condition_number_random_start": ex.condition_start,
           "limit_use": ex.use}
    for name, write in (("excitation.csv", lambda p: np.savetxt(
            p, rows, delimiter=",", header=",".join(header), comments="", fmt="%.9g")),
                        ("excitation.json", lambda p: p.write_text(json.dumps(doc, indent=2)))):
        tmp = out / (name + ".part")
        write(tmp)
        os.replace(tmp, out / name)
    worst = max(ex.use, key=ex.use.get)
    print(f"{status.upper()}: {args.harmonics} harmonics over {ex.period:g} s, regressor "
          f"condition number {ex.condition:.3g} (best random start {ex.condition_start:.3g}); "
          f"closest limit: {worst} at {ex.use[worst]:.0%}")
    print(f"trajectory: {out / 'excitation.csv'} ({args.cycles} periods at {args.rate:g} Hz); "
          f"coefficients: {out / 'excitation.json'}")
    print("Run it on the robot under supervision, with its own limits and stops active.")
    return 0 if ex.feasible else 1


def _torque_constant(text):
    name, sep, value = text.partition("=")
    try:
        k = float(value)
    except ValueError:
        k = math.nan
    if not sep or not name or not (0.0 < k < 100.0):
        raise ConfigError(f"--torque-constant {text!r}: expected COORDINATE=K with K in "
                          f"(0, 100) N·m/A")
    return name, k
# --------------------------------------------------------- end opspace identify


# ---------------------------------------------------------------- opspace sweep
def _with_unit(value, unit):
    """A figure for the console: 4 significant digits and its unit (none when
    dimensionless)."""
    text = f"{value:.4g}" if isinstance(value, (int, float)) else str(value)
    return text + (f" {unit}" if unit and unit != "1" else "")


def _cmd_sweep(args):
    from .sweep import load_sweep, progress_bar, run_sweep

    from .sweep import check_options

    path = _input_file(args.sweep, "SWEEP") or demo_robot_path().with_name("sweep.toml")
    check_options(args.output, workers=args.workers, cluster=args.cluster,
                  local_cluster=args.local_cluster, resume=args.resume)
    sweep = load_sweep(path)
    bar = progress_bar(enabled=not args.quiet and sys.stderr.isatty())
    try:
        result = run_sweep(sweep, args.output, workers=args.workers, cluster=args.cluster,
                           local_cluster=args.local_cluster, resume=args.resume, progress=bar)
    finally:
        bar.close()
    head = f"{len(result.feasible)} FEASIBLE" if result.feasible else "NO FEASIBLE DESIGN"
    print(f"{head}: {result.message} ({result.executor}; {len(result.computed)} computed in "
          f"{result.wall_time:.1f} s, {result.reused} reused, {result.retried} resubmitted)")
    x, y = sweep.pareto[0], sweep.pareto[2]
    by_id = {r.id: r for r in result.records}
    units = {p.key: p.unit for p in sweep.parameters}
    for i in result.pareto[:5]:
        r = by_id[i]
        values = ", ".join(f"{k} = {_with_unit(v, units.get(k))}" if isinstance(v, float)
                           else f"{k} = {v}" for k, v in r.values.items())
        print(f"  on the front: {values}: {x} = {_with_unit(r.figures.get(x), result.units.get(x))}"
              f", {y} = {_with_unit(r.figures.get(y), result.units.get(y))}")
    print(f"results: {result.paths['csv']}; page: {result.paths['html']}")
    print("Model estimates: apply service factors, verify on hardware, follow the applicable "
          "safety standards.")
    return 0 if result.feasible else 1
# ------------------------------------------------------------ end opspace sweep


# --------------------------------------------------------------- opspace limits
def _limits_candidate(args):
    """(motor, gearbox, ratio) from --catalogue/--motor/--gearbox/--ratio, or None."""
    given = [args.motor, args.gearbox, args.ratio]
    if args.catalogue is None:
        if any(x is not None for x in given):
            raise ConfigError("--motor, --gearbox and --ratio need --catalogue FILE")
        return None
    from .description import load_catalogue

    cat = load_catalogue(args.catalogue)
    if any(x is None for x in given):
        raise ConfigError(f"--catalogue {Path(args.catalogue).name}: give --motor NAME, "
                          f"--gearbox NAME and --ratio G to choose the drive candidate")
    try:
        return cat.motor(args.motor), cat.gearbox(args.gearbox), args.ratio
    except KeyError as exc:
        raise ConfigError(str(exc.args[0])) from None


def _cmd_limits(args):
    from .limits import limits_study
    from .model import load_robot
    from .report import write_limits_report

    robot = load_robot(args.robot or demo_robot_path())
    candidate = _limits_candidate(args)
    if args.points < 2:
        raise ConfigError(f"--points must be >= 2, got {args.points}")
    out = Path(args.output)
    if out.exists() and not out.is_dir():
        raise ConfigError(f"-o {out}: exists and is not a directory")
    payload = args.payload
    if payload is None:
        payload = robot.description.payload is not None
    options = dict(payload=payload, friction=args.friction, grade=args.grade, speed=args.speed,
                   turn_speed=args.turn_speed, zmp_margin=args.zmp_margin,
                   traction_ceiling=args.traction_ceiling, candidate=candidate)
    views = [v for v in args.views.split(",") if v]
    bad = [v for v in views if v not in ("side", "top")]
    if bad:
        raise ConfigError(f"--views: {bad[0]!r} is not a view (side, top)")
    executor = None
    if any(x is not None for x in (args.workers, args.cluster, args.local_cluster)):
        from .limits import evaluate_map_chunk
        from .sweep import make_executor
        executor = make_executor(args.workers, args.cluster, args.local_cluster,
                                 function=evaluate_map_chunk)
    progress = _Progress(not args.quiet and sys.stderr.isatty())
    try:
        study = limits_study(robot, views=views, points=args.points, posture=args.posture,
                             stopping_length=args.stopping_length,
                             reaction_time=args.reaction_time, progress=progress,
                             executor=executor, **options)
        paths = write_limits_report(study, robot, out)
    finally:
        progress.close()
        if executor is not None:
            executor.close()
    print(f"{study.status.upper()}: motion limits of {study.robot} ({study.drive})")
    for k, name in enumerate(study.poses.names):
        vals = ", ".join(f"{n.replace('_acceleration', '')} {study.poses.values[n][k]:.3g} "
                         f"({study.poses.limited_by[n][k]})"
                         for n in ("acceleration", "deceleration", "yaw_acceleration",
                                   "lateral_acceleration"))
        print(f"  {name:<16} {study.poses.status[k] if study.poses.status[k] != 'ok' else vals}")
    print(f"page: {paths['html']}; lookup table: {paths['csv']}, {paths['json']}")
    print("Model estimates: validate the planner's limiter on the robot, follow the applicable "
          "safety standards.")
    return 0 if study.status == "ok" else 1


def _count_arg(lo, hi):
    def parse(text):
        try:
            n = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"must be a whole number, got {text!r}") from None
        if not lo <= n <= hi:
            raise argparse.ArgumentTypeError(f"must be within {lo}..{hi}, got {n}")
        return n
    return parse


def _range_arg(lo, hi, unit):
    def parse(text):
        try:
            v = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"must be a number, got {text!r}") from None
        if not lo <= v <= hi:
            raise argparse.ArgumentTypeError(f"must be within {lo:g}..{hi:g} {unit}, got {text}")
        return v
    return parse


def build_parser():
    parser = _Parser(
        prog="opspace",
        description="Dynamics of mobile manipulators: model checks, drive sizing, simulation.")
    from . import __version__

    parser.add_argument("--version", action="version", version=f"opspace {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p = sub.add_parser("check", help="load and validate a robot description, print a summary")
    p.add_argument("robot", nargs="?", help="robot description TOML (default: the bundled demo)")
    p.set_defaults(func=_cmd_check)
    p = sub.add_parser("size", help="size the wheel drives for a duty cycle and write the report")
    p.add_argument("cycle", nargs="?", help="duty-cycle TOML (default: the bundled demo)")
    p.add_argument("-o", "--output", default="opspace-report",
                   help="output directory (default: ./opspace-report)")
    p.add_argument("--catalogue", help="motor and gearbox catalogue TOML (default: the cycle's)")
    p.add_argument("--robot", help="robot description TOML instead of the cycle's (e.g. the "
                                   "one opspace identify wrote)")
    p.add_argument("--no-search", action="store_true",
                   help="skip the worst-case arm search, the envelope cases and the "
                        "shortest-stop figure (the verdict then covers the planned cycle only)")
    p.add_argument("--verdict-basis", choices=("envelope", "cycle"),
                   help="envelope: a drive passes the planned cycle AND the cycle with the arm "
                        "held at each worst-case pose; cycle: the planned cycle only "
                        "(default: the cycle file's verdict_basis, else envelope)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")
    p.set_defaults(func=_cmd_size)
    p = sub.add_parser("simulate", help="simulate a scenario (e.g. a pick while driving) and "
                                        "write figures, an animation, a report page and the "
                                        "time series")
    p.add_argument("scenario", nargs="?", help="scenario TOML (default: the bundled demo pick)")
    p.add_argument("-o", "--output", default="opspace-simulation",
                   help="output directory (default: ./opspace-simulation)")
    p.add_argument("--integrator", choices=("rk4", "euler"), help="override the scenario's")
    p.add_argument("--robot", help="robot description TOML instead of the scenario's (e.g. "
                                   "the one opspace identify wrote)")
    p.add_argument("--payload-error", type=float, default=None,
                   help="relative payload-mass error of the controller's model (e.g. 0.1)")
    p.add_argument("--no-animation", action="store_true", help="skip the GIF")
    p.add_argument("--step-check", action="store_true",
                   help="run again at half the step and compare the headline figures "
                        "(exit 1 if any differs by more than 1 %%)")
    p.add_argument("--reference-loop", action="store_true",
                   help="run the NumPy reference loop instead of the compiled kernel "
                        "(same equations, ~5x slower; for cross-checks)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")
    p.set_defaults(func=_cmd_simulate)
    p = sub.add_parser("limits", help="motion limits of the base over the arm's workspace "
                       "(maps, named poses) for a motion planner")
    p.add_argument("robot", nargs="?", help="robot description TOML (default: the bundled demo)")
    p.add_argument("-o", "--output", default="opspace-limits",
                   help="output directory (default: opspace-limits)")
    pay = p.add_mutually_exclusive_group()
    pay.add_argument("--payload", dest="payload", action="store_true", default=None,
                     help="hold the described payload (default when one is described)")
    pay.add_argument("--no-payload", dest="payload", action="store_false")
    p.add_argument("--friction", type=float, help="tyre-floor friction (default: described)")
    p.add_argument("--grade", type=float, default=0.0, help="ground rise/run, facing uphill")
    p.add_argument("--speed", type=float, default=0.0, help="base speed, m/s (default 0)")
    p.add_argument("--turn-speed", type=float, help="speed of the turn for the lateral "
                   "limit, m/s (default: --speed, else half the top speed, else 1)")
    p.add_argument("--zmp-margin", type=float, default=0.0,
                   help="least ZMP distance to a support edge, m (default 0)")
    p.add_argument("--traction-ceiling", type=float, default=1.0,
                   help="largest traction use, in (0, 1] (default 1)")
    p.add_argument("--catalogue", help="catalogue TOML of a drive candidate")
    p.add_argument("--motor", help="the candidate's motor (name in --catalogue)")
    p.add_argument("--gearbox", help="the candidate's gearbox family (name in --catalogue)")
    p.add_argument("--ratio", type=float, help="the candidate's gear ratio")
    p.add_argument("--stopping-length", type=float,
                   help="protective field: stopping length, m (adds the top speed per pose)")
    p.add_argument("--reaction-time", type=float, default=0.0,
                   help="protective field: reaction time before braking, s (default 0)")
    p.add_argument("--points", type=int, default=21, help="grid points per map axis (21)")
    p.add_argument("--views", default="side,top", help="maps: side, top or both (side,top)")
    p.add_argument("--posture", help="named pose the maps' redundancy starts from "
                   "(default: the arm at zero)")
    run_on = p.add_mutually_exclusive_group()
    run_on.add_argument("--workers", metavar="N", type=int,
                        help="compute the maps on N local processes (the sweep's executor)")
    run_on.add_argument("--cluster", metavar="ADDRESS", help="... on a Dask scheduler")
    run_on.add_argument("--local-cluster", metavar="N", type=int,
                        help="... on a Dask LocalCluster of N workers")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")
    p.set_defaults(func=_cmd_limits)
    # ---------------------------------------------------------- opspace contact
    p = sub.add_parser("contact", help="effective mass and permissible contact speed of the "
                                       "robot's contact points (two-body model pre-check)")
    p.add_argument("robot", nargs="?", help="robot description TOML (default: the bundled demo)")
    p.add_argument("-o", "--output", default="opspace-contact",
                   help="output directory (default: ./opspace-contact)")
    p.add_argument("--points", help="contact points TOML ([[contact_point]] tables; default: "
                                    "the description's)")
    p.add_argument("--regions", help="body-region table TOML (default: the bundled one)")
    p.add_argument("--region", help="body region for every point (default: each point's, or "
                                    "the most restrictive at its height)")
    p.add_argument("--pose", help="a named pose of the description (default: neutral)")
    p.add_argument("--speed", type=_range_arg(0.0, 20.0, "m/s"), help="check this speed (m/s) of every point "
                                                   "along its direction; exit 1 if exceeded")
    p.add_argument("--payload", action="store_true", help="attach the rated payload")
    p.add_argument("--map", action="store_true",
                   help="maps of the permissible speed over the arm's workspace")
    p.add_argument("--samples", type=_count_arg(10, 200_000), default=1500,
                   help="arm configurations sampled for a map (default 1500)")
    p.set_defaults(func=_cmd_contact)
    # --------------------------------------------------------- opspace identify
    p = sub.add_parser("identify", help="identify the robot's parameters from logged motion "
                                        "(CSV) and write an identified description")
    p.add_argument("logs", nargs="+", help="motion logs (CSV, see the README)")
    p.add_argument("--robot", required=True, help="robot description TOML")
    p.add_argument("-o", "--output", default="opspace-identify",
                   help="output directory (default: ./opspace-identify)")
    p.add_argument("--cutoff", type=_range_arg(0.01, 1000.0, "Hz"), default=10.0,
                   help="zero-phase low-pass cut-off for the derivatives, Hz (default 10)")
    p.add_argument("--torque-constant", action="append", metavar="COORDINATE=K",
                   help="motor torque constant (N·m/A) for a current:COORDINATE column")
    p.set_defaults(func=_cmd_identify)
    p = sub.add_parser("excite", help="design an excitation trajectory for identification "
                                      "(finite Fourier series, limits kept, well conditioned)")
    p.add_argument("--robot", required=True, help="robot description TOML")
    p.add_argument("-o", "--output", default="opspace-excite",
                   help="output directory (default: ./opspace-excite)")
    p.add_argument("--harmonics", type=_count_arg(1, 10), default=3,
                   help="harmonics per coordinate (default 3)")
    p.add_argument("--period", type=_range_arg(1.0, 120.0, "s"), default=10.0,
                   help="period of the motion, s (default 10)")
    p.add_argument("--cycles", type=_count_arg(1, 100), default=2,
                   help="periods written to the CSV (default 2)")
    p.add_argument("--rate", type=_range_arg(10.0, 10000.0, "Hz"), default=500.0,
                   help="sample rate of the CSV, Hz (default 500)")
    p.add_argument("--budget", type=_count_arg(0, 100000), default=150,
                   help="objective evaluations of the search (default 150)")
    p.add_argument("--seed", type=_count_arg(0, 2**31), default=0, help="random seed")
    p.set_defaults(func=_cmd_excite)
    # ------------------------------------------------------------ opspace sweep
    p = sub.add_parser("sweep", help="size many design points (a sweep file) on local "
                                     "processes or a Dask cluster; CSV and HTML page")
    p.add_argument("sweep", nargs="?", help="sweep TOML (default: the bundled demo sweep)")
    p.add_argument("-o", "--output", default="opspace-sweep",
                   help="output directory (default: ./opspace-sweep)")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--cluster", metavar="ADDRESS",
                       help="Dask scheduler address, e.g. tcp://10.0.0.5:8786 (needs "
                            "opspace[cluster])")
    where.add_argument("--local-cluster", metavar="N", type=int,
                       help="start a Dask LocalCluster of N worker processes for the run")
    p.add_argument("--workers", metavar="N", type=int,
                   help="local worker processes (default: every core)")
    p.add_argument("--resume", action="store_true",
                   help="continue the sweep in the output directory: finished points are kept")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=_cmd_sweep)
    # -------------------------------------------------------- end opspace sweep
    return parser


def main(argv=None):
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse printed its one-line error (or the help)
        return exc.code if isinstance(exc.code, int) else 2
    except BrokenPipeError:    # --help or --version piped into a closed reader
        return _pipe_closed()
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return args.func(args)
    except (ConfigError, ModelError) as exc:
        print(f"opspace: error: {_one_line(exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("opspace: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return _pipe_closed()
    except Exception as exc:   # a defect of opspace, not of the input: still one line
        if os.environ.get("OPSPACE_TRACEBACK"):
            raise
        print(f"opspace: internal error: {type(exc).__name__}: {_one_line(exc)} (a defect of "
              f"opspace: please report it; OPSPACE_TRACEBACK=1 shows where)", file=sys.stderr)
        return 3


def _one_line(exc):
    return " ".join(str(exc).split()) or type(exc).__name__


def _pipe_closed():
    """The reader of our output went away (e.g. `| head`): stop quietly.

    Later writes (and Python's flush at exit) go to the null device, so no
    second error is printed; the status is 128 + SIGPIPE, as a shell reports.
    """
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, sys.stdout.fileno())
    os.close(devnull)
    return 141


if __name__ == "__main__":
    sys.exit(main())
