"""The sizing pipeline behind `opspace size`: one function, one result.

    duty cycle ─► evaluate_cycle ─► WheelDuty ─► drive figures (as described)
                      │                      └─► catalogue: every motor × gearbox × ratio
                      ├─► robot-level criteria: traction, tip-over, arm speed and effort
                      └─► critical instants ─► worst arm poses ─► shortest stop
                                                    └─► envelope cases (`envelope`)

Robot-level criteria, the same for every candidate (rows appended to each; no
wheel drive changes them):

- traction: max over the cycle and both drive wheels of |F_t| / (μ N) must
  stay ≤ 1 (Coulomb friction; `stability_track`); margin 1 − use.
- tip-over: the smallest distance d (m) of the ZMP inside the support polygon
  over the cycle (the tip-over margin, > 0 upright); the row's margin is
  d / d_static, with d_static the distance of the COM's ground projection at
  that instant (the static margin of the same pose): the share of the static
  margin left.
- arm speed <joint>: max |q̇| over the cycle against the URDF's `velocity`
  limit; arm effort <joint>: max |Q| (inverse dynamics, friction included)
  against the URDF's `effort` limit; margin 1 − value / limit (rows only for
  joints with a limit).

Verdict basis (`basis`, the cycle's `verdict_basis`):

- "envelope" (default): a candidate passes when it passes the planned cycle
  AND every envelope case (the cycle's base motions with the arm held at each
  worst-case pose, with the rated payload); needs the worst-case search.
- "cycle": the planned cycle only; the message says what the envelope would
  decide when it differs.

The recommended drive is the smallest candidate passing every drive-level
criterion of the chosen basis (least motor + gearbox mass, else least rated
torque; then the largest drive margin).  It is given even when a robot-level
row fails, with the status "fail": no drive fixes a robot-level failure.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..description import load_catalogue
from ..description import DutyCycle, check_against_robot, load_duty_cycle
from ..dynamics import drive_inertia
from ..errors import ConfigError
from ..model import MobileManipulator, load_robot
from ._floor import worst_floor
from ._cycle import CycleEvaluation, evaluate_cycle, start_pose
from ._candidates import Criterion, evaluate_catalogue
from ._drives import WheelDuty, drive_figures
from ._envelope import evaluate_case, merge_criteria, merge_sweeps, pose_text
from ._worst_case import critical_instants, shortest_stop, worst_poses

__all__ = ["ROBOT_CRITERIA", "SizingResult", "drive_margin", "edge_name", "margin_text", "robot_level",
           "size"]

WHEELS = ("right wheel", "left wheel")
ROBOT_CRITERIA = ("traction", "tip-over", "traction (worst floor)", "tip-over (worst floor)")
ARM_ROWS = ("arm speed ", "arm effort ")
BASES = ("envelope", "cycle")


def robot_level(name):
    """True for a robot-level row (traction, tip-over, arm limits): no drive changes it."""
    return name in ROBOT_CRITERIA or name.startswith(ARM_ROWS)


@dataclass(frozen=True, eq=False)
class SizingResult:
    """Everything `opspace size` reports.

    duty: DutyCycle; robot: MobileManipulator; evaluation: CycleEvaluation (the
    planned cycle); wheel_duty: WheelDuty; described: DriveFigures of the
    [drive] of the robot description (its rotor, ratio and efficiency);
    robot_criteria and sweeps: the robot-level `Criterion` rows and a
    `RatioSweep` per motor × gearbox family (empty without a catalogue) of the
    basis in effect; basis: "envelope" or "cycle" (the basis in effect: "cycle"
    when the envelope was asked for without the search); cycle_criteria,
    cycle_sweeps: those of the planned cycle alone; envelope_criteria,
    envelope_sweeps: over the planned cycle and every case (None without the
    search); cases: the `EnvelopeCase`s; load_inertia kg·m² per wheel
    (straight-line equivalent, rotor excluded); instants, worst_torque,
    worst_tip, worst_traction, stop: the worst-case search; status "pass" /
    "fail" / "no catalogue" and message.
    contact: the contact pre-check along the cycle (`opspace.contact.ContactCheck`)
    when the description lists contact points, else None (it has its own status
    and does not enter the drive verdict).
    """

    duty: DutyCycle
    robot: MobileManipulator
    evaluation: CycleEvaluation
    wheel_duty: WheelDuty
    described: object
    robot_criteria: tuple
    sweeps: tuple
    load_inertia: float
    instants: tuple
    worst_torque: object
    worst_tip: object
    stop: object
    status: str
    message: str
    catalogue: object = None
    worst_traction: object = None
    basis: str = "cycle"
    cycle_criteria: tuple = ()
    cycle_sweeps: tuple = ()
    envelope_criteria: tuple | None = None
    envelope_sweeps: tuple | None = None
    cases: tuple = ()
    contact: object = None
    floor: object = None        # FloorRange: the critical instants on the worst floor

    @property
    def worst(self):
        """The WorstPose of each search (empty without the search)."""
        return tuple(w for w in (self.worst_torque, self.worst_tip, self.worst_traction)
                     if w is not None)

    @property
    def passing(self):
        """(sweep, check) pairs of every candidate that passes every criterion."""
        return [(s, c) for s in self.sweeps for c in s.checks if c.passed]

    @property
    def shortlist(self):
        """(sweep, check) pairs of every candidate passing its drive-level criteria."""
        return _shortlist(self.sweeps)

    @property
    def recommended(self):
        """(sweep, check) of the smallest candidate passing every drive-level
        criterion of the basis, at the ratio of its family with the largest drive
        margin; None when none does.

        "Smallest": least mass (motor + gearbox) when the catalogue gives
        masses, else least rated torque.  The robot-level rows (the same for
        every candidate) do not rank: when one fails, the robot fails whatever
        the drive, and this is the drive to pair with the fixed robot.
        """
        return _smallest(self.catalogue, self.sweeps)


def _shortlist(sweeps):
    return [(s, c) for s in sweeps for c in s.checks
            if all(k.passed for k in c.criteria if not robot_level(k.name))]


def _smallest(catalogue, sweeps):
    ok = _shortlist(sweeps)
    if not ok:
        return None
    return min(ok, key=lambda p: (_size_key(catalogue, p[1]), -drive_margin(p[1])))


def _size_key(catalogue, check):
    motor, gearbox = catalogue.motor(check.motor), catalogue.gearbox(check.gearbox)
    if motor.mass is not None:
        return motor.mass + (gearbox.mass or 0.0)
    return motor.rated_torque


def drive_margin(check):
    """Smallest margin of a candidate's drive criteria (robot-level rows excluded)."""
    return min(c.margin for c in check.criteria if not robot_level(c.name))


def _robot_criteria(robot, ev):
    """Traction, tip-over and arm-limit rows of one evaluated cycle."""
    st = ev.stability
    use = np.where(np.isfinite(st.traction), st.traction, np.inf)
    i, w = np.unravel_index(int(np.argmax(use)), use.shape)
    where = lambda k: f"t = {ev.t[k]:.2f} s (segment {ev.segment[k] + 1})"  # noqa: E731
    note = f"{WHEELS[w]} at {where(i)}"
    lifted = st.loads.lifted[:, :2]
    if lifted.any():
        from ..stability import describe_lift_off, lift_off_spans
        spans = lift_off_spans(ev.t, lifted, [f"the {n}" for n in WHEELS])
        note = f"lift-off: {describe_lift_off(spans)} (no grip there: traction use unbounded)"
    elif not st.loads.supported.all():
        k = int(np.argmin(st.loads.supported))
        note = f"the robot tips at {where(k)}: no grip"
    traction = Criterion.at_most("traction", float(use[i, w]), 1.0, "", note=note)
    j = int(np.argmin(st.margin))
    d = float(st.margin[j])
    d_static = float(st.polygon.margin(st.wrench.com[j, :2])[0])
    margin = d / d_static if d_static > 0 else -1.0
    tip = Criterion(name="tip-over", value=d, limit=0.0, unit="m", margin=margin,
                    passed=bool(d >= 0.0 and st.loads.supported.all()),
                    note=f"ZMP {d * 1000:.0f} mm inside edge {edge_name(robot, st.polygon, st.edge[j])} "
                         f"at {where(j)}; "
                         f"static {d_static * 1000:.0f} mm")
    return (traction, tip) + _arm_rows(robot, ev, where)


def edge_name(robot, polygon, i):
    """A support-polygon edge named by the contacts at its ends, as the figures
    name them: "caster_1–wheel_left"."""
    V = polygon.vertices
    ends = (V[int(i)], V[(int(i) + 1) % len(V)])
    names = []
    for p in ends:
        k = int(np.argmin([np.hypot(*(np.asarray(c.position) - p)) for c in robot.contacts]))
        names.append(robot.contacts[k].name)
    return "–".join(names)


def _arm_rows(robot, ev, where):
    """Arm joint speed and effort against the URDF limits (joints with a limit)."""
    rows = []
    for k, name in enumerate(robot.arm_joint_names):
        unit = robot.arm_units[k]
        for kind, series, limit, u in (
                ("speed", ev.nu[:, 2 + k], robot.velocity_limit[2 + k], f"{unit}/s"),
                ("effort", ev.Q[:, 2 + k], robot.effort_limit[2 + k],
                 "N" if unit == "m" else "N·m")):
            if not np.isfinite(limit):
                continue
            i = int(np.argmax(np.abs(series)))
            rows.append(Criterion.at_most(f"arm {kind} {name}", abs(float(series[i])),
                                          float(limit), u, note=where(i)))
    return tuple(rows)


def _floor_criteria(robot, fr):
    """Traction and tip-over rows on the worst floor the description allows (none
    when its friction range and unevenness leave only the nominal floor)."""
    if fr.mu_worst == fr.mu_nominal and fr.unevenness == 0.0:
        return ()
    where = f"μ = {fr.mu_worst:g}"
    if fr.lift_off:
        note = (f"lift-off: {fr.traction_wheel} lifts off at t = {fr.traction_t:.2f} s on a "
                f"{fr.traction_case} ({where}): no grip, traction use unbounded")
    else:
        note = f"{fr.traction_wheel} at t = {fr.traction_t:.2f} s, {fr.traction_case}, {where}"
    traction = Criterion.at_most("traction (worst floor)", fr.traction_worst, 1.0, "1", note=note)
    d, d0 = fr.margin_worst, fr.margin_nominal
    tip = Criterion(name="tip-over (worst floor)", value=d, limit=0.0, unit="m",
                    margin=d / d0 if d0 > 0 else -np.inf, passed=bool(d >= 0.0),
                    note=f"ZMP {d * 1000:.0f} mm inside at t = {fr.margin_t:.2f} s, "
                         f"{fr.margin_case} (chassis tilt included); flat {d0 * 1000:.0f} mm")
    return traction, tip


def _load_inertia(robot, duty):
    """J_load per wheel for straight motion: M_w[0,0] + M_w[0,1] minus the rotor."""
    q = robot.configurations(start_pose(duty, robot)[None])[0]
    Mw = drive_inertia(robot, q).M_w
    return float(Mw[0, 0] + Mw[0, 1] - robot.description.drive.reflected_inertia)


def _wheel_duty(duty):
    def make(ev):
        try:
            return WheelDuty(t=ev.t, torque=ev.tau_out, speed=ev.wheel_speed,
                             acceleration=ev.wheel_acc, cycles_per_hour=duty.cycles_per_hour,
                             wheels=("right", "left"))   # candidates.py appends " wheel"
        except ValueError as exc:
            raise ConfigError(f"{duty.path.name}: [cycle] cycles_per_hour: {exc}") from None
    return make


def size(duty, *, robot=None, catalogue=None, search=True, basis=None, progress=None):
    """Size the drive wheels of a robot for a duty cycle (the `opspace size` job).

    Parameters
    ----------
    duty : path of a duty-cycle TOML, or a DutyCycle
    robot : MobileManipulator, default the one the duty cycle names
    catalogue : Catalogue or path; default the one the duty cycle names (if any)
    search : run the worst-case arm search, the envelope cases and the
        shortest-stop figure
    basis : "envelope" or "cycle" (module docstring); default the cycle's
        `verdict_basis`
    progress : callable(stage: str, done: int, total: int) or None

    Returns
    -------
    SizingResult
    """
    note = progress or (lambda stage, done, total: None)
    if not isinstance(duty, DutyCycle):
        duty = load_duty_cycle(duty)
    basis = duty.verdict_basis if basis is None else basis
    if basis not in BASES:
        raise ConfigError(f"verdict basis {basis!r}: expected one of {', '.join(BASES)}")
    robot = robot or load_robot(duty.robot_path)
    check_against_robot(duty, robot)
    if catalogue is None and duty.catalogue_path is not None:
        catalogue = load_catalogue(duty.catalogue_path)
    elif isinstance(catalogue, (str, Path)):
        catalogue = load_catalogue(catalogue)
    ev = evaluate_cycle(robot, duty, progress=lambda d, t: note("cycle", d, t))
    make_duty = _wheel_duty(duty)
    wd = make_duty(ev)
    drv = robot.description.drive
    described = drive_figures(wd, gear_ratio=drv.gear_ratio, efficiency=drv.efficiency,
                              inertia=drv.rotor_inertia)
    floor = worst_floor(robot, ev)
    extra = _robot_criteria(robot, ev) + _floor_criteria(robot, floor)
    J_load = _load_inertia(robot, duty)
    sweeps = ()
    if catalogue is not None:
        sweeps = evaluate_catalogue(wd, catalogue, load_inertia=J_load,
                                    service_factor=duty.service_factor, extra=extra)
    note("catalogue", 1, 1)
    instants, worst, stop, cases = (), (None, None, None), None, ()
    env_criteria = env_sweeps = None
    if search:
        instants, worst, stop, cases = _search(robot, duty, ev, catalogue, J_load, make_duty, note)
        env_criteria = merge_criteria([(None, extra)] + [(c.label, c.robot_criteria)
                                                         for c in cases])
        env_sweeps = merge_sweeps(sweeps, cases)
    contact = _contact_check(robot, ev, search)
    note("contact pre-check", 1, 1)
    in_effect = "envelope" if basis == "envelope" and search else "cycle"
    result = SizingResult(
        duty=duty, robot=robot, evaluation=ev, wheel_duty=wd, described=described,
        robot_criteria=env_criteria if in_effect == "envelope" else extra,
        sweeps=env_sweeps if in_effect == "envelope" else sweeps, load_inertia=J_load,
        instants=instants, worst_torque=worst[0], worst_tip=worst[1], worst_traction=worst[2],
        stop=stop, status="", message="", catalogue=catalogue, basis=in_effect,
        cycle_criteria=extra, cycle_sweeps=sweeps, envelope_criteria=env_criteria,
        envelope_sweeps=env_sweeps, cases=cases, contact=contact, floor=floor)
    status, message = _verdict(result, asked=basis)
    object.__setattr__(result, "status", status)
    object.__setattr__(result, "message", message)
    return result


def _search(robot, duty, ev, catalogue, J_load, make_duty, note):
    """The worst-case search, the shortest stop and the envelope cases:
    (instants, worst poses, StopFigures, EnvelopeCases)."""
    instants = tuple(critical_instants(ev))
    worst = worst_poses(robot, list(instants),
                        progress=lambda d, t: note("worst-case search", d, t))
    stop = shortest_stop(robot, float(np.max(np.abs(ev.v))), worst[1].q)
    cases = tuple(evaluate_case(robot, duty, w.objective, w.q, catalogue,
                                robot_rows=_robot_criteria, load_inertia=J_load,
                                wheel_duty=make_duty) for w in worst)
    note("envelope", 1, 1)
    return instants, worst, stop, cases


def _contact_check(robot, ev, search):
    """The contact pre-check along the cycle (rated payload where it is held), or None."""
    if not robot.description.contact_points:
        return None
    from ..contact import check_contacts

    return check_contacts(robot, heaviest=search,
                          motion={"qs": ev.qs, "nu": ev.nu, "t": ev.t, "payload_flags": ev.payload,
                                  "payload": robot.description.payload})


FIXES = {"traction": "lower the accelerations and decelerations, put more of the weight on "
                     "the drive wheels or raise the floor friction",
         "tip-over": "lower the accelerations, keep the arm and payload lower or closer to "
                     "the centre, or widen the support polygon",
         "arm": "slow the arm's moves or choose arm joints with higher limits"}


def _basis_verdict(criteria, sweeps, catalogue):
    """(status, text) of one basis: robot-level rows, then the drives."""
    failing = [c for c in criteria if not c.passed]
    rec = _smallest(catalogue, sweeps) if catalogue is not None else None
    total = sum(len(s.checks) for s in sweeps)
    drives = ""
    if catalogue is not None:
        drives = (f"{len(_shortlist(sweeps))} of {total} motor, gearbox and ratio candidates "
                  f"pass their drive criteria")
        if rec is not None:
            c = rec[1]
            worst = min((k for k in c.criteria if not robot_level(k.name)), key=lambda k: k.margin)
            drives += (f"; smallest: {c.motor} with {c.gearbox} at {c.ratio:g}:1 (its tightest "
                       f"criterion: {worst.name}, margin {margin_text(worst.margin)})")
    if failing:
        kinds = {("arm" if c.name.startswith(ARM_ROWS) else c.name) for c in failing}
        what = "; ".join(f"{c.name} ({c.note})" for c in failing)
        fixes = "; ".join(FIXES[k] for k in ("traction", "tip-over", "arm") if k in kinds)
        return "fail", (f"the robot fails {what}: no drive can fix it ({fixes})"
                        + (f". Drives: {drives}" if drives else ""))
    if catalogue is None:
        return "no catalogue", "robot-level criteria pass; no catalogue was given to check drives"
    if rec is None:
        return "fail", f"none of the {total} motor, gearbox and ratio candidates passes every criterion"
    return "pass", drives


def margin_text(x, unbounded="beyond range"):
    """A margin in percent whose sign rounding never hides ("-0%" reads "-0.4%");
    −inf reads `unbounded` (default "beyond range": a point beyond a motor's
    speed range)."""
    if not math.isfinite(x):
        return "n/a" if math.isnan(x) else (unbounded if x < 0 else "unlimited")
    text = f"{x:+.0%}"
    if text in ("+0%", "-0%"):
        text = f"{x:+.1%}" if abs(x) >= 5e-4 else ("-<0.1%" if x < 0 else "+<0.1%")
    return text


def _verdict(result, *, asked):
    cyc = _basis_verdict(result.cycle_criteria, result.cycle_sweeps, result.catalogue)
    if result.envelope_sweeps is None:
        if asked == "envelope":
            return cyc[0], (f"{cyc[1]} (planned cycle only: the arm's envelope was not checked "
                            f"without the worst-case search)")
        return cyc
    env = _basis_verdict(result.envelope_criteria, result.envelope_sweeps, result.catalogue)
    if result.basis == "envelope":
        return env[0], f"over the planned cycle and the arm's envelope: {env[1]}"
    if env[0] == cyc[0]:
        return cyc[0], f"for the planned arm motions only ({cyc[1]}); the envelope agrees"
    held = _failing_case(result)
    return cyc[0], (f"for the planned arm motions only ({cyc[1]}); {env[0].upper()} if the "
                    f"{held}: {env[1]}")


def _failing_case(result):
    """Words for the envelope case behind the first failing envelope row (robot
    rows, then those of the planned cycle's recommended drive)."""
    rec = _smallest(result.catalogue, result.cycle_sweeps) if result.catalogue else None
    rows = [c for c in result.envelope_criteria if not c.passed]
    if rec is not None:
        i, k = result.cycle_sweeps.index(rec[0]), rec[0].checks.index(rec[1])
        rows += [c for c in result.envelope_sweeps[i].checks[k].criteria if not c.passed]
    names = result.robot.arm_joint_names, result.robot.arm_units
    for row in rows:
        for case in result.cases:
            if row.note.startswith(case.label):
                return (f"{case.label.replace('held', 'is held', 1)} "
                        f"({pose_text(*names, case.pose)}) while driving")
    return "arm is held at a worst-case pose while driving"
