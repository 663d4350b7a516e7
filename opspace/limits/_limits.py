"""`motion_limits` (one configuration) and `motion_limits_batch` (many).

The robot is evaluated with its base at the world origin, heading 0 (the
dynamics do not depend on where the base stands; on a grade the ground rises
along the robot's forward axis, so a positive grade faces uphill), the arm
held at q, the payload and the grade set for the call and restored after it.
See `opspace.limits._engine` for the equations.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..description import Payload
from ..errors import ConfigError
from ._engine import CandidateDrive, Criteria, DescribedDrive, Policy, Probes, Rays, solve

__all__ = ["BatchLimits", "Limit", "MotionLimits", "motion_limits", "motion_limits_batch"]

NAMES = ("acceleration", "deceleration", "yaw_acceleration", "lateral_acceleration")
UNITS = {"acceleration": "m/s²", "deceleration": "m/s²", "yaw_acceleration": "rad/s²",
         "lateral_acceleration": "m/s²"}
# straight rays (a, α): forward, braking, yaw left, yaw right; turns: left, right
_DIRS = ((1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0))
_TURNS = (1.0, -1.0)


@dataclass(frozen=True)
class Limit:
    """One limit: `value` (m/s² or rad/s², >= 0; inf if nothing binds), what
    `limited_by` it, and the `sense` it binds in ("left"/"right" for yaw and
    turns, else None)."""

    value: float
    limited_by: str
    unit: str
    sense: str | None = None

    def to_dict(self):
        return {"value": self.value, "unit": self.unit, "limited_by": self.limited_by,
                "sense": self.sense}


@dataclass(frozen=True)
class MotionLimits:
    """Largest base motions at one arm configuration (see `motion_limits`).

    acceleration, deceleration : Limit   m/s², forward / braking, straight
    yaw_acceleration : Limit             rad/s², spinning up in place (or at
                                         `speed`), the smaller of the two senses
    lateral_acceleration : Limit         m/s², v_t ω in a steady turn at
                                         `turn_speed`, the smaller sense
    combined : Limit or None             along `direction`: the largest k with
                                         (a, α) = k d admissible (k dimensionless)
    status : "ok", or why the robot cannot hold this pose at rest
    """

    acceleration: Limit
    deceleration: Limit
    yaw_acceleration: Limit
    lateral_acceleration: Limit
    combined: Limit | None
    speed: float
    turn_speed: float
    grade: float
    friction: float
    payload: bool
    policy: Policy
    drive: str
    status: str = "ok"
    notes: tuple = field(default=())

    def to_dict(self):
        d = {name: getattr(self, name).to_dict() for name in NAMES}
        d["combined"] = None if self.combined is None else self.combined.to_dict()
        d.update(speed={"value": self.speed, "unit": "m/s"},
                 turn_speed={"value": self.turn_speed, "unit": "m/s"},
                 grade=self.grade, friction=self.friction, payload=self.payload,
                 policy=self.policy.to_dict(), drive=self.drive, status=self.status,
                 notes=list(self.notes))
        return d


@dataclass(frozen=True, eq=False)
class BatchLimits:
    """Limits at n configurations: for each name of `NAMES` a value array (n,)
    and a `limited_by` array of str (n,); `status` (n,) "ok" or why the pose
    cannot be held at rest (its limits are then 0)."""

    values: dict
    limited_by: dict
    status: np.ndarray
    speed: float
    turn_speed: float
    policy: Policy
    drive: str

    def __getattr__(self, name):
        if name in NAMES:
            return self.values[name]
        raise AttributeError(name)


# --------------------------------------------------------------------------- checks

def _number(name, x, *, lo=None, lo_open=False, hi=None, unit=""):
    try:
        v = float(x)
    except (TypeError, ValueError):
        raise ConfigError(f"motion_limits: `{name}` must be a number, got {x!r}") from None
    ok = math.isfinite(v) and (lo is None or (v > lo if lo_open else v >= lo)) and (
        hi is None or v <= hi)
    if not ok:
        rng = (f"{'>' if lo_open else '>='} {lo:g}" if lo is not None else "") + (
            f"{' and ' if lo is not None else ''}<= {hi:g}" if hi is not None else "")
        raise ConfigError(f"motion_limits: `{name}` must be a finite number {rng} {unit}, "
                          f"got {x!r}".replace("  ", " "))
    return v


def _arm_rows(robot, qs):
    """(n, nq) configurations with the base at the origin, heading 0, wheels 0;
    ConfigError for a wrong length or an arm outside its joint limits."""
    nq = robot.model.nq
    Q = np.asarray(qs, dtype=float)
    if Q.ndim != 2 or Q.shape[1] != nq:
        raise ConfigError(f"motion_limits: a configuration must have robot.model.nq = {nq} "
                          f"entries (build it with robot.configuration), got shape "
                          f"{Q.shape[1:] if Q.ndim == 2 else Q.shape}")
    if not np.all(np.isfinite(Q)):
        raise ConfigError("motion_limits: the configuration has non-finite entries")
    arm = np.array([robot.arm_positions(q) for q in Q]) if len(Q) < 64 else None
    if arm is None:   # vectorised for large batches
        arm = np.empty((len(Q), robot.n_arm))
        for k, (iq, nqk) in enumerate(zip(robot._arm_q_index, robot._arm_nq)):
            arm[:, k] = Q[:, iq] if nqk == 1 else np.arctan2(Q[:, iq + 1], Q[:, iq])
    tol = 1e-9
    out = (arm < robot.lower - tol) | (arm > robot.upper + tol)
    if np.any(out):
        i, k = np.argwhere(out)[0]
        raise ConfigError(
            f"motion_limits: arm joint '{robot.arm_joint_names[k]}' = {arm[i, k]:g} "
            f"{robot.arm_units[k]}{f' (configuration {i})' if len(Q) > 1 else ''} is outside "
            f"its limits [{robot.lower[k]:g}, {robot.upper[k]:g}]")
    return robot.configurations(arm)


def _drive(robot, candidate):
    if candidate is None:
        return DescribedDrive(robot)
    try:
        motor, gearbox, ratio = candidate
    except (TypeError, ValueError):
        raise ConfigError("motion_limits: `candidate` must be (motor, gearbox, ratio) from a "
                          f"catalogue, got {candidate!r}") from None
    ratio = _number("candidate ratio", ratio, lo=0.0, lo_open=True)
    return CandidateDrive(robot, motor, gearbox, ratio)


def _payload(robot, payload):
    if payload is None:
        return robot.payload
    if payload is True:
        if robot.description.payload is None:
            raise ConfigError(f"motion_limits: payload=True but "
                              f"{robot.description.path.name} describes no [payload]")
        return robot.description.payload
    if payload is False:
        return None
    if isinstance(payload, Payload):
        return payload
    raise ConfigError(f"motion_limits: `payload` must be None, True, False or a Payload, "
                      f"got {payload!r}")


class _Setup:
    """Validated options of one call (shared by the single and batch forms)."""

    def __init__(self, robot, *, payload, friction, grade, speed, turn_speed, zmp_margin,
                 traction_ceiling, candidate):
        self.payload = _payload(robot, payload)
        self.mu = robot.ground_friction if friction is None else _number(
            "friction", friction, lo=0.0, lo_open=True)
        self.grade = _number("grade", grade, lo=-10.0, hi=10.0)
        self.speed = _number("speed", speed, lo=0.0, unit="m/s")
        if turn_speed is None:   # a turn below the top speed leaves the outer wheel room
            turn_speed = self.speed if self.speed > 0 else (
                0.5 * robot.top_speed if math.isfinite(robot.top_speed) else 1.0)
        self.turn_speed = _number("turn_speed", turn_speed, lo=0.0, lo_open=True, unit="m/s")
        self.policy = Policy(_number("zmp_margin", zmp_margin, lo=0.0, unit="m"),
                             _number("traction_ceiling", traction_ceiling, lo=0.0,
                                     lo_open=True, hi=1.0))
        self.drive = _drive(robot, candidate)
        self.criteria = Criteria(robot, self.policy, self.mu, self.drive)


def _solve_all(robot, setup, qs, extra_dirs=()):
    """Scales along the straight rays (J rows of n) and turn rays (2 rows of n)."""
    n = len(qs)
    with robot.kept():
        robot.detach_payload()
        if setup.payload is not None:
            robot.attach_payload(setup.payload)
        robot.set_ground_slope(math.atan(setup.grade))
        probes = Probes(robot, qs, setup.speed, setup.turn_speed)
        dirs = list(_DIRS) + list(extra_dirs)
        rays = Rays(probes, setup.criteria, dirs, _TURNS)
        s, cause, u0 = solve(rays.straight, len(dirs) * n, 1.0)
        st, cause_t, _ = solve(rays.turn, 2 * n, 0.1 * probes.w1)
    return s.reshape(len(dirs), n), cause.reshape(len(dirs), n), u0[:n], \
        st.reshape(2, n) * setup.turn_speed, cause_t.reshape(2, n)


def _name(causes, k):
    return "nothing below 1e4" if k < 0 else causes[k]


def _held(criteria, u0):
    """Status per configuration: "ok" or the criterion that fails at rest."""
    bad = np.max(u0, axis=1) >= 1.0
    names = criteria.causes
    return np.array([f"cannot hold at rest: {names[k]}" if b else "ok"
                     for b, k in zip(bad, np.argmax(u0, axis=1))], dtype=object)


def motion_limits_batch(robot, qs, *, payload=None, friction=None, grade=0.0, speed=0.0,
                        turn_speed=None, zmp_margin=0.0, traction_ceiling=1.0, candidate=None):
    """`motion_limits` at many configurations at once (n rows of full q).

    Parameters as `motion_limits`; qs : array (n, robot.model.nq).

    Returns
    -------
    BatchLimits
    """
    setup = _Setup(robot, payload=payload, friction=friction, grade=grade, speed=speed,
                   turn_speed=turn_speed, zmp_margin=zmp_margin,
                   traction_ceiling=traction_ceiling, candidate=candidate)
    qs = _arm_rows(robot, qs)
    s, cause, u0, lat, cause_t = _solve_all(robot, setup, qs)
    causes = setup.criteria.causes
    status = _held(setup.criteria, u0)
    values, by = {}, {}
    pairs = {"acceleration": (s[0], cause[0]), "deceleration": (s[1], cause[1])}
    for name, (v, c), (v2, c2) in (("yaw_acceleration", (s[2], cause[2]), (s[3], cause[3])),
                                   ("lateral_acceleration", (lat[0], cause_t[0]),
                                    (lat[1], cause_t[1]))):
        pairs[name] = (np.minimum(v, v2), np.where(v <= v2, c, c2))
    for name, (v, c) in pairs.items():
        values[name] = v
        by[name] = np.array([_name(causes, k) for k in c], dtype=object)
    return BatchLimits(values=values, limited_by=by, status=status, speed=setup.speed,
                       turn_speed=setup.turn_speed, policy=setup.policy, drive=setup.drive.name)


def motion_limits(robot, q, *, payload=None, friction=None, grade=0.0, speed=0.0,
                  turn_speed=None, zmp_margin=0.0, traction_ceiling=1.0, candidate=None,
                  direction=None):
    """Largest base accelerations with the arm held at q (a planner's limiter).

    For the base running straight at `speed` (equation (1) of
    `opspace.limits._engine`): the largest forward acceleration a and braking
    deceleration, the largest yaw acceleration α (both senses; the smaller is
    reported), and in a steady turn at `turn_speed` the largest lateral
    acceleration v_t ω (both senses).  Each holds every criterion:

    * drive torque: |τ_i| <= torque_limit at each wheel (description), or the
      candidate motor's envelope and gearbox peak (`candidate`);
    * drive speed: |φ̇_i| <= the wheel speed limit (top_speed / r, or the
      candidate's);
    * traction: traction use <= `traction_ceiling` at each drive wheel
      (friction circle, the description's normal-load model);
    * tip-over: ZMP at least `zmp_margin` inside the support polygon;
    * joint effort: each arm joint's effort holding the arm <= its URDF limit.

    Parameters
    ----------
    robot : MobileManipulator
    q : array (robot.model.nq,)   the configuration (its base pose is ignored)
    payload : None (as attached now), True (the described payload), False, or a Payload
    friction : float   tyre-ground μ > 0, default the description's
    grade : float      ground rise / run along the robot's forward axis (>0: uphill)
    speed : float      base speed, m/s, >= 0 (straight-line state)
    turn_speed : float speed of the turn for the lateral limit, m/s > 0; default
                       `speed`, else half the description's top_speed, else 1 m/s
    zmp_margin : float least ZMP distance to a support edge, m, >= 0
    traction_ceiling : float   largest traction use allowed, in (0, 1]
    candidate : (Motor, Gearbox, ratio) from a catalogue, or None (description)
    direction : (a, α) or None   also the limit along this direction (m/s², rad/s²)

    Returns
    -------
    MotionLimits

    Raises
    ------
    ConfigError   bad argument; or the robot cannot stand at rest on `grade`
    """
    setup = _Setup(robot, payload=payload, friction=friction, grade=grade, speed=speed,
                   turn_speed=turn_speed, zmp_margin=zmp_margin,
                   traction_ceiling=traction_ceiling, candidate=candidate)
    qs = _arm_rows(robot, np.asarray(q, dtype=float)[None] if np.ndim(q) == 1 else q)
    if len(qs) != 1:
        raise ConfigError("motion_limits: `q` must be one configuration; use "
                          "motion_limits_batch for many")
    extra = []
    if direction is not None:
        d = np.asarray(direction, dtype=float)
        if d.shape != (2,) or not np.all(np.isfinite(d)) or not np.any(d != 0):
            raise ConfigError(f"motion_limits: `direction` must be (a, α), finite, not both "
                              f"zero, got {direction!r}")
        extra = [tuple(d)]
    s, cause, u0, lat, cause_t = _solve_all(robot, setup, qs, extra)
    status = _held(setup.criteria, u0)[0]
    if status != "ok" and setup.grade != 0.0:
        raise ConfigError(f"motion_limits: grade {setup.grade:g} is beyond what the robot can "
                          f"stand on at this pose ({status.split(': ', 1)[1]} at rest)")
    causes = setup.criteria.causes
    lim = lambda name, v, c, sense=None: Limit(float(v), _name(causes, c), UNITS[name], sense)  # noqa
    yaw = min((s[2, 0], cause[2, 0], "left"), (s[3, 0], cause[3, 0], "right"))
    turn = min((lat[0, 0], cause_t[0, 0], "left"), (lat[1, 0], cause_t[1, 0], "right"))
    combined = None
    if extra:
        combined = Limit(float(s[4, 0]), _name(causes, cause[4, 0]), "1")
    return MotionLimits(
        acceleration=lim("acceleration", s[0, 0], cause[0, 0]),
        deceleration=lim("deceleration", s[1, 0], cause[1, 0]),
        yaw_acceleration=lim("yaw_acceleration", *yaw),
        lateral_acceleration=lim("lateral_acceleration", *turn),
        combined=combined, speed=setup.speed, turn_speed=setup.turn_speed, grade=setup.grade,
        friction=setup.mu, payload=setup.payload is not None, policy=setup.policy,
        drive=setup.drive.name, status=status,
        notes=("in a turn, drive friction and rolling resistance are interpolated "
               "quadratically in the yaw rate (exact rigid-body terms)",))
