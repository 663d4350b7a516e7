"""The sizing pipeline behind `opspace size`: one function, one result.

    duty cycle ─► evaluate_cycle ─► WheelDuty ─► drive figures (as described)
                      │                      └─► catalogue: every motor × gearbox × ratio
                      ├─► robot-level criteria: traction use, tip-over margin
                      └─► critical instants ─► worst arm poses ─► shortest stop

Robot-level criteria, the same for every candidate (rows appended to each):

- traction: max over the cycle and both drive wheels of |F_t| / (μ N) must
  stay ≤ 1 (Coulomb friction; `stability_track`); margin 1 − use.
- tip-over: the smallest distance d of the ZMP inside the support polygon over
  the cycle; margin d / d_static, with d_static the distance of the COM's
  ground projection at that instant (the static margin of the same pose), so
  the margin is the share of the static stability margin left (> 0 upright).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..description import load_catalogue
from ..description import DutyCycle, check_against_robot, load_duty_cycle
from ..dynamics import drive_inertia
from ..errors import ConfigError
from ..model import MobileManipulator, load_robot
from ._cycle import CycleEvaluation, evaluate_cycle, start_pose
from ._candidates import Criterion, evaluate_catalogue
from ._drives import WheelDuty, drive_figures
from ._worst_case import critical_instants, shortest_stop, worst_poses

__all__ = ["SizingResult", "size"]

WHEELS = ("right wheel", "left wheel")
ROBOT_CRITERIA = ("traction", "tip-over")


@dataclass(frozen=True, eq=False)
class SizingResult:
    """Everything `opspace size` reports.

    duty: DutyCycle; robot: MobileManipulator; evaluation: CycleEvaluation;
    wheel_duty: WheelDuty; described: DriveFigures of the [drive] of the robot
    description (its rotor, ratio and efficiency); robot_criteria: traction and
    tip-over `Criterion` rows; sweeps: a `RatioSweep` per motor × gearbox family
    (empty without a catalogue); load_inertia kg·m² per wheel (straight-line
    equivalent, rotor excluded); instants, worst_torque, worst_tip, stop: the
    worst-case search; status "pass" / "fail" / "no catalogue" and message;
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
    contact: object = None

    @property
    def passing(self):
        """(sweep, check) pairs of every candidate that passes every criterion."""
        return [(s, c) for s in self.sweeps for c in s.checks if c.passed]

    @property
    def recommended(self):
        """(sweep, check) of the smallest passing motor, at the ratio of its
        family with the largest drive margin; None when nothing passes.

        "Smallest": least mass (motor + gearbox) when the catalogue gives
        masses, else least rated torque.  Only the drive's own criteria rank
        the ratios: the robot-level rows are the same for every candidate.
        """
        ok = self.passing
        if not ok:
            return None
        return min(ok, key=lambda p: (_size_key(self.catalogue, p[1]), -drive_margin(p[1])))


def _size_key(catalogue, check):
    motor, gearbox = catalogue.motor(check.motor), catalogue.gearbox(check.gearbox)
    if motor.mass is not None:
        return motor.mass + (gearbox.mass or 0.0)
    return motor.rated_torque


def drive_margin(check):
    """Smallest margin of a candidate's drive criteria (robot-level rows excluded)."""
    return min(c.margin for c in check.criteria if c.name not in ROBOT_CRITERIA)


def _robot_criteria(robot, ev):
    st = ev.stability
    use = np.where(np.isfinite(st.traction), st.traction, np.inf)
    i, w = np.unravel_index(int(np.argmax(use)), use.shape)
    note = f"{WHEELS[w]} at t = {ev.t[i]:.2f} s (segment {ev.segment[i] + 1})"
    lifted = st.loads.lifted[:, :2]
    if lifted.any():
        from ..stability import describe_lift_off, lift_off_spans
        spans = lift_off_spans(ev.t, lifted, [f"the {n}" for n in WHEELS])
        note = f"lift-off: {describe_lift_off(spans)} (no grip there: traction use unbounded)"
    elif not st.loads.supported.all():
        k = int(np.argmin(st.loads.supported))
        note = f"the robot tips at t = {ev.t[k]:.2f} s (segment {ev.segment[k] + 1}): no grip"
    traction = Criterion.at_most("traction", float(use[i, w]), 1.0, "1", note=note)
    j = int(np.argmin(st.margin))
    d = float(st.margin[j])
    d_static = float(st.polygon.margin(st.wrench.com[j, :2])[0])
    margin = d / d_static if d_static > 0 else -np.inf
    tip = Criterion(name="tip-over", value=d, limit=0.0, unit="m", margin=margin,
                    passed=bool(d >= 0.0 and st.loads.supported.all()),
                    note=f"ZMP {d * 1000:.0f} mm inside edge {int(st.edge[j])} at t = "
                         f"{ev.t[j]:.2f} s (segment {ev.segment[j] + 1}); static "
                         f"{d_static * 1000:.0f} mm")
    return traction, tip


def _load_inertia(robot, duty):
    """J_load per wheel for straight motion: M_w[0,0] + M_w[0,1] minus the rotor."""
    q = robot.configurations(start_pose(duty, robot)[None])[0]
    Mw = drive_inertia(robot, q).M_w
    return float(Mw[0, 0] + Mw[0, 1] - robot.description.drive.reflected_inertia)


def size(duty, *, robot=None, catalogue=None, search=True, progress=None):
    """Size the drive wheels of a robot for a duty cycle (the `opspace size` job).

    Parameters
    ----------
    duty : path of a duty-cycle TOML, or a DutyCycle
    robot : MobileManipulator, default the one the duty cycle names
    catalogue : Catalogue or path; default the one the duty cycle names (if any)
    search : run the worst-case arm search and the shortest-stop figure
    progress : callable(stage: str, done: int, total: int) or None

    Returns
    -------
    SizingResult
    """
    note = progress or (lambda stage, done, total: None)
    if not isinstance(duty, DutyCycle):
        duty = load_duty_cycle(duty)
    robot = robot or load_robot(duty.robot_path)
    check_against_robot(duty, robot)
    if catalogue is None and duty.catalogue_path is not None:
        catalogue = load_catalogue(duty.catalogue_path)
    elif isinstance(catalogue, (str, Path)):
        catalogue = load_catalogue(catalogue)
    ev = evaluate_cycle(robot, duty, progress=lambda d, t: note("cycle", d, t))
    try:
        wd = WheelDuty(t=ev.t, torque=ev.tau_out, speed=ev.wheel_speed,
                       acceleration=ev.wheel_acc, cycles_per_hour=duty.cycles_per_hour,
                       wheels=("right", "left"))   # candidates.py appends " wheel"
    except ValueError as exc:
        raise ConfigError(f"{duty.path.name}: [cycle] cycles_per_hour: {exc}") from None
    drv = robot.description.drive
    described = drive_figures(wd, gear_ratio=drv.gear_ratio, efficiency=drv.efficiency,
                              inertia=drv.rotor_inertia)
    extra = _robot_criteria(robot, ev)
    J_load = _load_inertia(robot, duty)
    sweeps = ()
    if catalogue is not None:
        sweeps = evaluate_catalogue(wd, catalogue, load_inertia=J_load,
                                    service_factor=duty.service_factor, extra=extra)
    note("catalogue", 1, 1)
    instants, worst_t, worst_m, stop = (), None, None, None
    if search:
        instants = tuple(critical_instants(ev))
        worst_t, worst_m = worst_poses(robot, list(instants),
                                       progress=lambda d, t: note("worst-case search", d, t))
        stop = shortest_stop(robot, float(np.max(np.abs(ev.v))), worst_m.q)
    contact = _contact_check(robot, ev, search)
    note("contact pre-check", 1, 1)
    result = SizingResult(duty=duty, robot=robot, evaluation=ev, wheel_duty=wd, described=described,
                        robot_criteria=extra, sweeps=sweeps, load_inertia=J_load,
                        instants=instants, worst_torque=worst_t, worst_tip=worst_m, stop=stop,
                        status="", message="", catalogue=catalogue, contact=contact)
    status, message = _verdict(result)
    object.__setattr__(result, "status", status)
    object.__setattr__(result, "message", message)
    return result


def _contact_check(robot, ev, search):
    """The contact pre-check along the cycle (rated payload where it is held), or None."""
    if not robot.description.contact_points:
        return None
    from ..contact import check_contacts

    return check_contacts(robot, heaviest=search,
                          motion={"qs": ev.qs, "nu": ev.nu, "t": ev.t, "payload_flags": ev.payload,
                                  "payload": robot.description.payload})


def _verdict(result):
    failing = [c.name for c in result.robot_criteria if not c.passed]
    if failing:
        return "fail", (f"the robot fails {' and '.join(failing)} over this cycle whatever the "
                        f"drive: change the cycle, the layout or the mass distribution")
    if result.catalogue is None:
        return "no catalogue", "traction and tip-over pass; no catalogue was given to check drives"
    rec = result.recommended
    total = sum(len(s.checks) for s in result.sweeps)
    if rec is None:
        return "fail", f"none of the {total} motor, gearbox and ratio candidates passes every criterion"
    _, c = rec
    worst = min((k for k in c.criteria if k.name not in ROBOT_CRITERIA), key=lambda k: k.margin)
    return "pass", (f"{len(result.passing)} of {total} candidates pass; smallest passing motor: "
                    f"{c.motor} with {c.gearbox} at {c.ratio:g}:1 (its tightest criterion: "
                    f"{worst.name}, margin {worst.margin:.0%})")
