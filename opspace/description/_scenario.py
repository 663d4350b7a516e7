"""Reading and validating a simulation scenario (the input of `opspace simulate`).

::

    [simulation]
    name = "..."                 # free text
    robot = "robot.toml"         # relative to this file
    duration = 12.0              # s
    step = 0.001                 # s, integration step (default 0.001)
    control_rate = 1000.0        # Hz, controller sampling (default 1/step); step × rate
                                 # must divide into whole steps
    integrator = "rk4"           # rk4 | euler
    friction = true              # stick-slip, viscous, rolling resistance in the plant
    joint_stops = true           # arm joints stop at their URDF position limits
    arm_start = "carry"          # a [poses] name or joint values (default zeros)
    tracking_rms = 0.005         # m, target for the tool position error's RMS (optional)
    tracking_peak = 0.015        # m, target for its peak (optional)

    [controller]
    mode = "arm_only"            # arm_only (wheels follow the base plan) | whole_body
    axes = "full"                # full | linear
    stiffness = 400.0            # 1/s², one value or one per task row
    damping_ratio = 1.0          # one value or one per task row
    posture = "carry"            # null-space posture: a [poses] name or joint values
    posture_stiffness = 25.0     # 1/s²
    wheel_gain = 10.0            # 1/s, wheel-rate servo
    friction_feedforward = true  # default: the same as [simulation] friction
    friction_velocity = 0.02     # rad/s or m/s: the Coulomb feed-forward is f_C tanh(ν / this)
                                 # (a sampled sign(ν) near rest pushes the wrong way); 0 = sign
    payload_mass_error = 0.0     # the controller's payload mass is (1 + this) × the true one

    [[base]]                     # base plan, in order: straight | arc | turn | dwell
    kind = "straight"            # keys as in the duty cycle (no payload, no grade)
    ...

    [[waypoint]]                 # tool targets in the world, reached (at rest) at t
    t = 2.0                      # s, increasing
    position = [x, y, z]         # m, world
    rpy = [r, p, y]              # rad, optional (default: the previous orientation)
    stop = false                 # come to rest here (the first and last always do,
                                 # and so do both ends of a hold: two waypoints at one place)
    label = "approach"           # free text

    [payload]                    # optional
    rated = true                 # use the robot's [payload] ... or give mass/com/inertia
    position = [x, y, z]         # m, world: where it waits to be picked
    pick = 5.0                   # s
    release = 9.0                # s, optional
    pick_tolerance = 0.02        # m: the tool target must be this close at the pick
    load_transfer = 0.0          # s: the payload's weight is taken up over this time (0: at once)
    pick_speed_limit = 0.05      # m/s: a faster tool at the pick is flagged ("fast_pick")

The robot is checked first; then every waypoint against the arm's reach from
the mount at the base pose of its time, and the pick against the tool target.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ConfigError
from ._toml import Section, check_file, read_document, referenced_path
from ._duty import _READERS
from ._robot import Payload, read_payload

__all__ = ["Scenario", "Waypoint", "load_scenario"]

BASE_KINDS = ("straight", "arc", "turn", "dwell")
#: longest simulated time, s, and most integration steps of one run
MAX_DURATION = 3600.0
MAX_STEPS = 1e7


@dataclass(frozen=True)
class Waypoint:
    """Tool target: index, label, t s, position (3,) m, rpy (3,) rad or None,
    stop: come to rest here."""

    index: int
    label: str
    t: float
    position: tuple
    rpy: tuple | None
    stop: bool = False

    @property
    def title(self):
        return f"[[waypoint]] {self.index + 1}{' (' + self.label + ')' if self.label else ''}"


@dataclass(frozen=True)
class Scenario:
    """A validated simulation scenario (see the module docstring for the keys)."""

    path: Path
    name: str
    robot_path: Path
    duration: float
    step: float
    control_period: float
    integrator: str
    friction: bool
    arm_start: object
    controller: dict
    base: tuple
    waypoints: tuple
    payload: Payload | None
    payload_position: tuple | None
    pick: float | None
    release: float | None
    pick_tolerance: float
    joint_stops: bool = True
    load_transfer: float = 0.0
    pick_speed_limit: float = 0.05
    extra: dict = field(default_factory=dict)
    tracking_rms: float | None = None
    tracking_peak: float | None = None


def _bool(s, key, default):
    value = s.raw(key, default, required=False)
    if not isinstance(value, bool):
        s.fail(key, f"must be true or false, got {value!r}")
    return value


def _per_row(s, key, default, unit):
    value = s.raw(key, default, required=False)
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        value = [value]
    if (not isinstance(value, list) or not value or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
            and v >= 0 for v in value)):
        s.fail(key, f"must be a number >= 0{' ' + unit if unit else ''} or a list of them, "
                    f"got {value!r}")
    for v in value:
        s.plausible(key, v, unit)
    return [float(v) for v in value]


def load_scenario(path):
    """Read and validate a scenario TOML (structure only; `check_scenario`
    cross-checks it against the robot).

    Raises
    ------
    ConfigError   naming the file, the table or entry, the key, the value and the
                  expectation; unknown keys are listed with the valid ones
    """
    path, doc = read_document(path, None, ("simulation", "controller", "base", "waypoint",
                                           "payload"), ("simulation",))
    s = Section(path, "simulation", doc["simulation"])
    name = s.string("name", "simulation")
    robot_rel = s.string("robot")
    duration = s.number("duration", unit="s", lo=0.0, lo_open=True, hi=MAX_DURATION)
    step = s.number("step", 0.001, unit="s", lo=1e-6, hi=0.1)
    if duration / step > MAX_STEPS:
        s.fail("step", f"makes {duration / step:.3g} steps over duration = {duration:g} s "
                       f"(at most {MAX_STEPS:g}): use a larger step or a shorter run")
    rate = s.number("control_rate", 1.0 / step, unit="Hz", lo=0.0, lo_open=True)
    ratio = 1.0 / (rate * step)
    if abs(ratio - round(ratio)) > 1e-9 * ratio or round(ratio) < 1:
        s.fail("control_rate", f"must make the control period a whole number of steps "
                               f"({step:g} s), got {rate:g} Hz")
    integrator = s.string("integrator", "rk4")
    if integrator not in ("rk4", "euler"):
        s.fail("integrator", f"must be rk4 or euler, got {integrator!r}")
    friction = _bool(s, "friction", True)
    joint_stops = _bool(s, "joint_stops", True)
    arm_start = s.pose("arm_start")
    tracking = {k: s.number(f"tracking_{k}", unit="m", lo=0.0, lo_open=True, required=False)
                for k in ("rms", "peak")}
    s.finish()
    robot_path = referenced_path(path, robot_rel)
    check_file(robot_path, where=f"{path.name}: [simulation] robot", what="robot description")

    s = Section(path, "controller", doc.get("controller", {}))
    mode = s.string("mode", "arm_only")
    if mode not in ("arm_only", "whole_body"):
        s.fail("mode", f"must be arm_only or whole_body, got {mode!r}")
    axes = s.string("axes", "full")
    if axes not in ("full", "linear"):
        s.fail("axes", f"must be full or linear, got {axes!r}")
    rows = 6 if axes == "full" else 3
    stiffness = _per_row(s, "stiffness", 400.0, "1/s²")
    zeta = _per_row(s, "damping_ratio", 1.0, "")
    for key, value in (("stiffness", stiffness), ("damping_ratio", zeta)):
        if len(value) not in (1, rows):
            s.fail(key, f"must give 1 or {rows} values (one per task row of axes = "
                        f"{axes!r}), got {len(value)}")
    controller = {
        "mode": mode, "axes": axes,
        "stiffness": stiffness * rows if len(stiffness) == 1 else stiffness,
        "damping_ratio": zeta * rows if len(zeta) == 1 else zeta,
        "posture": s.pose("posture"),
        "posture_stiffness": s.number("posture_stiffness", 25.0, unit="1/s²", lo=0.0),
        "wheel_gain": s.number("wheel_gain", 10.0, unit="1/s", lo=0.0),
        # the feed-forward follows the plant's friction unless the file says otherwise
        "friction_feedforward": _bool(s, "friction_feedforward", friction),
        "friction_velocity": s.number("friction_velocity", 0.02, unit="rad/s or m/s", lo=0.0),
        "payload_mass_error": s.number("payload_mass_error", 0.0, lo=-0.9, hi=10.0),
    }
    s.finish()

    entries = doc.get("base", [])
    if not isinstance(entries, list):
        raise ConfigError(f"{path.name}: [[base]] must be an array of tables")
    base = tuple(_read_base_piece(path, i, e) for i, e in enumerate(entries))

    entries = doc.get("waypoint", [])
    if not isinstance(entries, list) or not entries:
        raise ConfigError(f"{path.name}: the scenario has no [[waypoint]]: give at least one "
                          f"tool target")
    waypoints = tuple(_read_waypoint(path, i, e) for i, e in enumerate(entries))
    for a, b in zip(waypoints, waypoints[1:]):
        if b.t <= a.t:
            raise ConfigError(f"{path.name}: {b.title} t = {b.t:g} s must come after "
                              f"{a.title} t = {a.t:g} s")
    if waypoints[-1].t > duration:
        w = waypoints[-1]
        raise ConfigError(f"{path.name}: {w.title} t = {w.t:g} s is after the end of the "
                          f"simulation ([simulation] duration = {duration:g} s)")

    payload = position = pick = release = None
    tol, transfer, pick_speed = 0.02, 0.0, 0.05
    if "payload" in doc:
        s = Section(path, "payload", doc["payload"])
        rated = _bool(s, "rated", False)
        if rated:
            payload = "rated"
        else:
            table = {k: v for k, v in doc["payload"].items() if k in ("mass", "com", "inertia")}
            payload = read_payload(Section(path, "payload", table))
            s.seen.update(("mass", "com", "inertia"))
        position = s.vector("position", 3, unit="m")
        pick = s.number("pick", unit="s", lo=0.0)
        release = s.number("release", unit="s", lo=0.0, required=False)
        tol = s.number("pick_tolerance", 0.02, unit="m", lo=0.0, lo_open=True, hi=1.0)
        transfer = s.number("load_transfer", 0.0, unit="s", lo=0.0, hi=60.0)
        pick_speed = s.number("pick_speed_limit", 0.05, unit="m/s", lo=0.0, lo_open=True,
                              hi=10.0)
        s.finish()
        if release is not None and release <= pick:
            s.fail("release", f"must come after pick = {pick:g} s, got {release:g} s")
        if pick > duration:
            s.fail("pick", f"must be within the simulation (duration {duration:g} s), "
                           f"got {pick:g} s")
    return Scenario(path=path, name=name, robot_path=robot_path,
                    duration=duration, step=step, control_period=1.0 / rate,
                    integrator=integrator, friction=friction, arm_start=arm_start,
                    controller=controller, base=base, waypoints=waypoints, payload=payload,
                    payload_position=position, pick=pick, release=release, pick_tolerance=tol,
                    joint_stops=joint_stops, load_transfer=transfer,
                    pick_speed_limit=pick_speed,
                    tracking_rms=tracking["rms"], tracking_peak=tracking["peak"])


def _read_base_piece(path, i, entry):
    from ._duty import Segment

    if not isinstance(entry, dict):
        raise ConfigError(f"{path.name}: [[base]] {i + 1} must be a table, got {entry!r}")
    kind = entry.get("kind")
    if kind not in BASE_KINDS:
        raise ConfigError(f"{path.name}: [[base]] {i + 1} kind must be one of "
                          f"{', '.join(BASE_KINDS)}, got {kind!r}")
    s = Section(path, f"base {i + 1} ({kind})", entry)
    s.raw("kind")
    label = s.string("label", "") if s.has("label") else ""
    s.seen.add("label")
    values = _READERS[kind](s)
    s.finish()
    return Segment(index=i, kind=kind, label=label, payload=False, grade=0.0, values=values)


def _read_waypoint(path, i, entry):
    if not isinstance(entry, dict):
        raise ConfigError(f"{path.name}: [[waypoint]] {i + 1} must be a table, got {entry!r}")
    s = Section(path, f"waypoint {i + 1}", entry)
    label = s.string("label", "") if s.has("label") else ""
    s.seen.add("label")
    w = Waypoint(index=i, label=label, t=s.number("t", unit="s", lo=0.0),
                 position=s.vector("position", 3, unit="m"),
                 rpy=s.vector("rpy", 3, unit="rad", required=False),
                 stop=_bool(s, "stop", False))
    s.finish()
    if w.position[2] < 0.0:
        s.fail("position", f"is below the ground (z = {w.position[2]:g} m < 0)")
    return w


def arm_reach(robot, samples=4000, seed=0):
    """Largest distance from the mount point to the tool over the arm's joint
    limits (random configurations, a slight underestimate of the true reach)."""
    rng = np.random.default_rng(seed)
    lo = np.where(np.isfinite(robot.lower), robot.lower, -math.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, math.pi)
    arms = rng.uniform(lo, hi, size=(samples, robot.n_arm))
    arms = np.vstack([arms, np.clip(np.zeros(robot.n_arm), lo, hi), hi, lo])
    mount = np.array(robot.description.mount_xyz)
    best = 0.0
    for q in robot.configurations(arms):
        best = max(best, float(np.linalg.norm(robot.frame_placement(q, robot.tool_frame_id)
                                              .translation - mount)))
    return best


def check_scenario(scenario, robot, base_pose_at, tool_target_at):
    """Cross-checks needing the robot and the plans: waypoints within reach of
    the mount at the base pose of their time; the pick where the payload is.

    base_pose_at(t) -> (x, y, θ); tool_target_at(t) -> position (3,).
    """
    name = scenario.path.name
    reach = arm_reach(robot)
    mount = np.array(robot.description.mount_xyz)
    for w in scenario.waypoints:
        x, y, th = base_pose_at(w.t)
        c, s_ = math.cos(th), math.sin(th)
        m_w = np.array([x + c * mount[0] - s_ * mount[1], y + s_ * mount[0] + c * mount[1],
                        mount[2]])
        d = float(np.linalg.norm(np.array(w.position) - m_w))
        if d > reach:
            raise ConfigError(f"{name}: {w.title} position {list(w.position)} is out of reach at "
                              f"t = {w.t:g} s: {d:.3f} m from the arm's mount (base at "
                              f"({x:.2f}, {y:.2f}) m, heading {th:.2f} rad), the arm reaches "
                              f"{reach:.3f} m")
    if scenario.pick is not None:
        p = np.asarray(tool_target_at(scenario.pick))
        gap = float(np.linalg.norm(p - np.array(scenario.payload_position)))
        if gap > scenario.pick_tolerance:
            raise ConfigError(f"{name}: [payload] pick = {scenario.pick:g} s comes before the "
                              f"tool reaches the payload: the tool target is {gap:.3f} m from "
                              f"its position {list(scenario.payload_position)} then (tolerance "
                              f"{scenario.pick_tolerance:g} m); add a waypoint at the payload "
                              f"before the pick")
