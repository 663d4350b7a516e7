"""Motion profiles, differential-drive base paths, arm moves and duty-cycle timelines.

Kinematics only: nothing here knows masses or forces (that is `dynamics`).

Scalar profiles
---------------
A scalar profile moves a coordinate s (m, or rad for a spin or a joint) from 0 to
``distance`` in ``duration`` seconds. The trapezoidal, S-curve, velocity-ramp,
cruise and dwell profiles are tables of phases of constant jerk; on phase k, with
τ = t − t_k,

    j = j_k,   a = a_k + j_k τ,   v = v_k + a_k τ + j_k τ²/2,
    s = s_k + v_k τ + a_k τ²/2 + j_k τ³/6,

where (s_k, v_k) are carried over from the end of phase k − 1 and a_k is set per
phase (trapezoidal profiles step a_k and have j_k = 0; the jerk impulse at a step is
not represented). The minimum-jerk profile is the quintic of Flash & Hogan (1985).

Sampling rule, for every profile: values are right-continuous (at a switch the later
phase holds); for t < 0 the start state (0, v_start, 0, 0) holds and for
t ≥ duration the end state (distance, v_end, 0, 0).

Base paths
----------
A differential-drive base moves in its own frame with forward speed v and yaw rate
ω (x forward, y left, z up; DESIGN.md). A segment turns a scalar profile s(t) into
(v, ω) and integrates the pose exactly from the segment start (x, y, θ) = 0:

    line:  v = ṡ, ω = 0,      x = s, y = 0, θ = 0
    arc:   v = ṡ, ω = ṡ / R,  θ = s / R, x = R sin θ, y = R (1 − cos θ)
    spin:  v = 0, ω = ṡ,      x = y = 0, θ = s

(the arc is the unicycle ẋ = v cos θ, ẏ = v sin θ, θ̇ = v / R integrated in closed
form; R is signed, R > 0 turns left).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import ClassVar, Union

import numpy as np

__all__ = [
    "BASE_PIECE_KINDS",
    "ToolPath",
    "ToolSample",
    "base_piece",
    "ArmMotion",
    "BaseMotion",
    "BaseSegment",
    "JointMove",
    "MinimumJerkProfile",
    "Phase",
    "Piece",
    "PiecewiseProfile",
    "ProfileSample",
    "Timeline",
    "TimelineSample",
    "arc",
    "constant_velocity",
    "dwell",
    "joint_move",
    "line",
    "minimum_jerk",
    "s_curve",
    "spin",
    "trapezoidal",
    "velocity_change",
]

# Absolute tolerance for "the same speed / position" at piece boundaries (m/s, rad/s,
# m, rad): far above rounding of the closed forms, far below anything physical.
_JOIN_TOL = 1e-9

_UNIT_DIST = "(m or rad)"
_UNIT_VEL = "(m/s or rad/s)"
_UNIT_ACC = "(m/s² or rad/s²)"
_UNIT_JERK = "(m/s³ or rad/s³)"


# --------------------------------------------------------------------------- checks
def _real(name, x, unit=""):
    try:
        value = float(x)
    except (TypeError, ValueError):
        raise ValueError(f"`{name}` must be a real number {unit}, got {x!r}") from None
    if not math.isfinite(value):
        raise ValueError(f"`{name}` must be a finite number {unit}, got {value}")
    return value


def _positive(name, x, unit):
    value = _real(name, x, unit)
    if not value > 0.0:
        raise ValueError(f"`{name}` must be a finite number > 0 {unit}, got {value}")
    return value


def _nonnegative(name, x, unit):
    value = _real(name, x, unit)
    if value < 0.0:
        raise ValueError(f"`{name}` must be a finite number >= 0 {unit}, got {value}")
    return value


def _as_times(t):
    t = np.atleast_1d(np.asarray(t, dtype=float))
    if t.ndim != 1:
        raise ValueError(f"`t` must be a scalar or a 1-D array of times in s, got shape {t.shape}")
    if not np.all(np.isfinite(t)):
        raise ValueError(f"`t` has non-finite entries: {t[~np.isfinite(t)]}")
    return t


def _as_vector(name, x, size=None):
    x = np.array(x, dtype=float)
    if x.ndim != 1 or (size is not None and x.shape != (size,)):
        expected = f"({size},)" if size is not None else "(n,)"
        raise ValueError(f"`{name}` must have shape {expected}, got {x.shape}")
    if not np.all(np.isfinite(x)):
        raise ValueError(f"`{name}` has non-finite entries: {x}")
    x.setflags(write=False)
    return x


def _to_dict(obj):
    out = {}
    for f in fields(obj):
        value = getattr(obj, f.name)
        out[f.name] = value.tolist() if isinstance(value, np.ndarray) else value
    return out


# ------------------------------------------------------------------ scalar profiles
@dataclass(frozen=True, eq=False)
class ProfileSample:
    """A scalar profile sampled at times t; unpacks as ``s, v, a, j = sample``.

    s : ndarray, shape (len(t),)   position, m or rad
    v : ndarray, shape (len(t),)   velocity ṡ, m/s or rad/s
    a : ndarray, shape (len(t),)   acceleration s̈, m/s² or rad/s²
    j : ndarray, shape (len(t),)   jerk, m/s³ or rad/s³
    """

    s: np.ndarray
    v: np.ndarray
    a: np.ndarray
    j: np.ndarray

    def __iter__(self):
        return iter((self.s, self.v, self.a, self.j))

    def to_dict(self):
        return _to_dict(self)


@dataclass(frozen=True)
class Phase:
    """One phase of constant jerk: `duration` s, acceleration `a` at its start, jerk `j`."""

    duration: float
    a: float
    j: float


@dataclass(frozen=True)
class PiecewiseProfile:
    """Scalar profile made of phases of constant jerk (see the module docstring).

    Parameters
    ----------
    kind : str                 what built it ("trapezoidal", "s_curve", ...)
    v_start : float            velocity at t = 0, m/s or rad/s
    phases : tuple of Phase    at least one; durations >= 0 s

    Attributes (derived)
    --------------------
    duration : float   total time, s
    distance : float   s(duration), m or rad
    v_end : float      ṡ(duration), m/s or rad/s
    """

    kind: str
    v_start: float
    phases: tuple
    duration: float = field(init=False)
    distance: float = field(init=False)
    v_end: float = field(init=False)

    def __post_init__(self):
        phases = tuple(self.phases)
        if not phases or not all(isinstance(p, Phase) for p in phases):
            raise ValueError(f"`phases` must be a non-empty sequence of Phase, got {self.phases!r}")
        for k, p in enumerate(phases):
            _nonnegative(f"phases[{k}].duration", p.duration, "(s)")
            _real(f"phases[{k}].a", p.a, _UNIT_ACC)
            _real(f"phases[{k}].j", p.j, _UNIT_JERK)
        object.__setattr__(self, "phases", phases)
        object.__setattr__(self, "v_start", _real("v_start", self.v_start, _UNIT_VEL))
        knots, s_k, v_k, _, _ = self._table()
        object.__setattr__(self, "duration", float(knots[-1]))
        object.__setattr__(self, "distance", float(s_k[-1]))
        object.__setattr__(self, "v_end", float(v_k[-1]))

    def _table(self):
        """Phase start times t_k, s_k, v_k (n+1 entries) and a_k, j_k (n entries)."""
        n = len(self.phases)
        knots, s_k, v_k = np.zeros(n + 1), np.zeros(n + 1), np.zeros(n + 1)
        a_k = np.array([p.a for p in self.phases], dtype=float)
        j_k = np.array([p.j for p in self.phases], dtype=float)
        v_k[0] = self.v_start
        for k, p in enumerate(self.phases):
            T = p.duration
            knots[k + 1] = knots[k] + T
            v_k[k + 1] = v_k[k] + a_k[k] * T + j_k[k] * T**2 / 2
            s_k[k + 1] = s_k[k] + v_k[k] * T + a_k[k] * T**2 / 2 + j_k[k] * T**3 / 6
        return knots, s_k, v_k, a_k, j_k

    def sample(self, t) -> ProfileSample:
        """Evaluate at times `t` (s, scalar or shape (n,)) -> ProfileSample of shape (n,)."""
        t = _as_times(t)
        knots, s_k, v_k, a_k, j_k = self._table()
        k = np.clip(np.searchsorted(knots, t, side="right") - 1, 0, len(self.phases) - 1)
        tau = np.clip(t, 0.0, knots[-1]) - knots[k]
        j = j_k[k]
        a = a_k[k] + j * tau
        v = v_k[k] + a_k[k] * tau + j * tau**2 / 2
        s = s_k[k] + v_k[k] * tau + a_k[k] * tau**2 / 2 + j * tau**3 / 6
        before, after = t < 0.0, t >= knots[-1]
        s = np.where(before, 0.0, np.where(after, s_k[-1], s))
        v = np.where(before, self.v_start, np.where(after, v_k[-1], v))
        a = np.where(before | after, 0.0, a)
        j = np.where(before | after, 0.0, j)
        return ProfileSample(s=s, v=v, a=a, j=j)


@dataclass(frozen=True)
class MinimumJerkProfile:
    """Rest-to-rest minimum-jerk profile (Flash & Hogan, J. Neuroscience 5(7), 1985).

    With τ = t / T:  s = d (10τ³ − 15τ⁴ + 6τ⁵),  v = (d/T) 30τ²(1 − τ)²,
    a = (d/T²) 60τ(1 − τ)(1 − 2τ),  j = (d/T³) 60(1 − 6τ + 6τ²).

    distance : float   d, m or rad (any sign)
    duration : float   T > 0, s
    """

    distance: float
    duration: float
    kind: ClassVar[str] = "minimum_jerk"
    v_start: ClassVar[float] = 0.0
    v_end: ClassVar[float] = 0.0

    def __post_init__(self):
        object.__setattr__(self, "distance", _real("distance", self.distance, _UNIT_DIST))
        object.__setattr__(self, "duration", _positive("duration", self.duration, "(s)"))

    def sample(self, t) -> ProfileSample:
        """Evaluate at times `t` (s, scalar or shape (n,)) -> ProfileSample of shape (n,)."""
        t = _as_times(t)
        d, T = self.distance, self.duration
        tau = np.clip(t / T, 0.0, 1.0)
        inside = (t >= 0.0) & (t < T)
        s = d * tau**3 * (10.0 - 15.0 * tau + 6.0 * tau**2)
        v = d / T * 30.0 * tau**2 * (1.0 - tau) ** 2
        a = np.where(inside, d / T**2 * 60.0 * tau * (1.0 - tau) * (1.0 - 2.0 * tau), 0.0)
        j = np.where(inside, d / T**3 * 60.0 * (1.0 - 6.0 * tau + 6.0 * tau**2), 0.0)
        return ProfileSample(s=s, v=v, a=a, j=j)


Profile = Union[PiecewiseProfile, MinimumJerkProfile]


def trapezoidal(distance, v_max, a_max, *, d_max=None, v_start=0.0, v_end=0.0) -> PiecewiseProfile:
    """Time-optimal trapezoidal (or triangular) velocity profile.

    Biagiotti & Melchiorri, Trajectory Planning for Automatic Machines and Robots
    (2008), sec. 3.2, generalised to a braking limit d_max ≠ a_max. With D = |distance|
    and boundary speeds v₀, v₁ along the motion, the speed rises at a_max, cruises,
    and falls at d_max:

        T_a = (v_p − v₀)/a_max,  T_d = (v_p − v₁)/d_max,
        T_c = [D − (v_p² − v₀²)/(2 a_max) − (v_p² − v₁²)/(2 d_max)] / v_p,

    with v_p = v_max when T_c ≥ 0, else (triangular, T_c = 0)
    v_p = √[(2 a_max d_max D + d_max v₀² + a_max v₁²) / (a_max + d_max)].
    Rest to rest with d_max = a_max this gives T = D/v_max + v_max/a_max, or
    T = 2√(D/a_max) when v_max is not reached.

    Parameters
    ----------
    distance : float            signed displacement, m or rad (negative moves backwards)
    v_max, a_max : float > 0    speed and acceleration limits, m/s, m/s² (or rad)
    d_max : float > 0, optional braking limit, default a_max
    v_start, v_end : float      boundary velocities, same sign as `distance` (or 0),
                                at most v_max in magnitude
    Returns
    -------
    PiecewiseProfile with three phases (accelerate, cruise, brake), some maybe empty.
    """
    d = _real("distance", distance, _UNIT_DIST)
    v_max = _positive("v_max", v_max, _UNIT_VEL)
    a_max = _positive("a_max", a_max, _UNIT_ACC)
    d_max = a_max if d_max is None else _positive("d_max", d_max, _UNIT_ACC)
    sigma = -1.0 if d < 0.0 else 1.0
    D = abs(d)
    v0 = sigma * _real("v_start", v_start, _UNIT_VEL)
    v1 = sigma * _real("v_end", v_end, _UNIT_VEL)
    for name, value in (("v_start", v0), ("v_end", v1)):
        if not 0.0 <= value <= v_max:
            raise ValueError(
                f"`{name}` must point along `distance` ({d}) with magnitude <= v_max = {v_max}"
                f" {_UNIT_VEL}, got {sigma * value}")
    D_min = (v0**2 - v1**2) / (2 * d_max) if v0 > v1 else (v1**2 - v0**2) / (2 * a_max)
    if D < D_min * (1.0 - 1e-12):
        raise ValueError(
            f"`distance` = {d} is too short to go from v_start = {sigma * v0} to v_end ="
            f" {sigma * v1} with a_max = {a_max}, d_max = {d_max}: |distance| must be >= {D_min}")
    D_acc = (v_max**2 - v0**2) / (2 * a_max)
    D_dec = (v_max**2 - v1**2) / (2 * d_max)
    if D_acc + D_dec <= D:
        v_p, T_c = v_max, (D - D_acc - D_dec) / v_max
    else:
        v_p = math.sqrt((2 * a_max * d_max * D + d_max * v0**2 + a_max * v1**2) / (a_max + d_max))
        v_p, T_c = max(v_p, v0, v1), 0.0  # max(): rounding at the feasibility edge
    phases = (Phase((v_p - v0) / a_max, sigma * a_max, 0.0),
              Phase(T_c, 0.0, 0.0),
              Phase((v_p - v1) / d_max, -sigma * d_max, 0.0))
    return PiecewiseProfile("trapezoidal", sigma * v0, phases)


def _jerk_limited_ramp(dv, a_max, j_max):
    """(T_j, T_a) of a speed change dv >= 0 from and to zero acceleration.

    T_j = a_max/j_max, T_a = T_j + dv/a_max if dv ≥ a_max²/j_max (a_max reached),
    else T_j = √(dv/j_max), T_a = 2 T_j (Biagiotti & Melchiorri 2008, sec. 3.4).
    """
    if dv * j_max >= a_max**2:
        T_j = a_max / j_max
        return T_j, T_j + dv / a_max
    T_j = math.sqrt(dv / j_max)
    return T_j, 2.0 * T_j


def s_curve(distance, v_max, a_max, j_max) -> PiecewiseProfile:
    """Rest-to-rest jerk-limited (double S, 7-phase) profile, minimum time.

    Biagiotti & Melchiorri, Trajectory Planning for Automatic Machines and Robots
    (2008), sec. 3.4 (double S velocity profile), specialised to v₀ = v₁ = 0 and
    symmetric limits, where every case has a closed form. Phases: jerk +J for T_j,
    0 for T_a − 2T_j, −J for T_j, cruise T_v, then the mirror image; D = |distance|.
    The acceleration and braking halves are point-symmetric, so each covers v_p T_a / 2.

    1. v_max reached: (T_j, T_a) of the ramp 0 → v_max (a_max reached iff
       v_max j_max ≥ a_max²), T_v = D/v_max − T_a ≥ 0. With both limits reached,
       T = D/v_max + v_max/a_max + a_max/j_max.
    2. v_max not reached, a_max reached (D ≥ 2 a_max³/j_max²): T_j = a_max/j_max,
       T_a = (a_max²/j_max + √(a_max⁴/j_max² + 4 a_max D)) / (2 a_max), T_v = 0.
    3. neither: T_j = (D / (2 j_max))^(1/3), T_a = 2 T_j, T_v = 0, T = 4 T_j.

    Parameters
    ----------
    distance : float                  signed displacement, m or rad
    v_max, a_max, j_max : float > 0   limits, m/s, m/s², m/s³ (or rad)
    Returns
    -------
    PiecewiseProfile with seven phases (empty ones kept, duration 0).
    """
    d = _real("distance", distance, _UNIT_DIST)
    v_max = _positive("v_max", v_max, _UNIT_VEL)
    a_max = _positive("a_max", a_max, _UNIT_ACC)
    j_max = _positive("j_max", j_max, _UNIT_JERK)
    sigma = -1.0 if d < 0.0 else 1.0
    D = abs(d)
    T_j, T_a = _jerk_limited_ramp(v_max, a_max, j_max)
    if D >= v_max * T_a:
        T_v = D / v_max - T_a
    elif D >= 2.0 * a_max**3 / j_max**2:
        r = a_max**2 / j_max
        T_j, T_v = a_max / j_max, 0.0
        T_a = (r + math.sqrt(r * r + 4.0 * a_max * D)) / (2.0 * a_max)
    else:
        T_j, T_v = (D / (2.0 * j_max)) ** (1.0 / 3.0), 0.0
        T_a = 2.0 * T_j
    T_c = max(T_a - 2.0 * T_j, 0.0)
    J = sigma * j_max
    a_p = J * T_j
    phases = (Phase(T_j, 0.0, J), Phase(T_c, a_p, 0.0), Phase(T_j, a_p, -J),
              Phase(T_v, 0.0, 0.0),
              Phase(T_j, 0.0, -J), Phase(T_c, -a_p, 0.0), Phase(T_j, -a_p, J))
    return PiecewiseProfile("s_curve", 0.0, phases)


def minimum_jerk(distance, duration) -> MinimumJerkProfile:
    """Minimum-jerk rest-to-rest move of `distance` (m or rad) in `duration` > 0 s.

    s = d (10τ³ − 15τ⁴ + 6τ⁵), τ = t/T (Flash & Hogan, J. Neuroscience 5(7), 1985).
    """
    return MinimumJerkProfile(distance, duration)


def velocity_change(v0, v1, a_max, *, j_max=None) -> PiecewiseProfile:
    """Speed ramp from v0 to v1 (accelerate or brake) as fast as the limits allow.

    Without `j_max`: constant acceleration ±a_max for T = |v1 − v0| / a_max.
    With `j_max`: trapezoidal acceleration (jerk ±j_max), T = T_a of the ramp in
    `_jerk_limited_ramp` (Biagiotti & Melchiorri 2008, sec. 3.4). Either way the
    acceleration history is point-symmetric, so the distance is (v0 + v1) T / 2.

    Parameters
    ----------
    v0, v1 : float           start and end velocity, m/s or rad/s
    a_max : float > 0        acceleration (and braking) limit, m/s² or rad/s²
    j_max : float > 0        optional jerk limit, m/s³ or rad/s³
    """
    v0 = _real("v0", v0, _UNIT_VEL)
    v1 = _real("v1", v1, _UNIT_VEL)
    a_max = _positive("a_max", a_max, _UNIT_ACC)
    sigma = -1.0 if v1 < v0 else 1.0
    dv = abs(v1 - v0)
    if j_max is None:
        phases = (Phase(dv / a_max, sigma * a_max, 0.0),)
    else:
        j_max = _positive("j_max", j_max, _UNIT_JERK)
        T_j, T_a = _jerk_limited_ramp(dv, a_max, j_max)
        a_p = sigma * j_max * T_j
        phases = (Phase(T_j, 0.0, sigma * j_max), Phase(max(T_a - 2 * T_j, 0.0), a_p, 0.0),
                  Phase(T_j, a_p, -sigma * j_max))
    return PiecewiseProfile("velocity_change", v0, phases)


def constant_velocity(v, duration) -> PiecewiseProfile:
    """Cruise at velocity `v` (m/s or rad/s) for `duration` >= 0 s: s = v t."""
    v = _real("v", v, _UNIT_VEL)
    T = _nonnegative("duration", duration, "(s)")
    return PiecewiseProfile("constant_velocity", v, (Phase(T, 0.0, 0.0),))


def dwell(duration) -> PiecewiseProfile:
    """Stand still for `duration` >= 0 s."""
    T = _nonnegative("duration", duration, "(s)")
    return PiecewiseProfile("dwell", 0.0, (Phase(T, 0.0, 0.0),))


def _check_profile(name, profile):
    if not isinstance(profile, (PiecewiseProfile, MinimumJerkProfile)):
        raise ValueError(f"`{name}` must be a profile from opspace.trajectory,"
                         f" got {type(profile).__name__}")
    return profile


# ------------------------------------------------------------------------ base paths
@dataclass(frozen=True, eq=False)
class BaseMotion:
    """Base motion sampled at times t, all arrays of shape (len(t),).

    x, y, theta : pose of the base frame, m, m, rad (relative to the segment start
                  for a segment; in the world for a timeline); theta is not wrapped
    v, a        : forward velocity and acceleration in the base frame, m/s, m/s²
    omega, alpha: yaw rate and yaw acceleration, rad/s, rad/s²
    """

    x: np.ndarray
    y: np.ndarray
    theta: np.ndarray
    v: np.ndarray
    a: np.ndarray
    omega: np.ndarray
    alpha: np.ndarray

    def to_dict(self):
        return _to_dict(self)


@dataclass(frozen=True)
class BaseSegment:
    """A differential-drive base segment driven by a scalar profile.

    kind : "line" | "arc" | "spin"
    profile : the scalar profile; its s is the path length (m) for line and arc and
              the yaw angle (rad) for spin
    radius : float, arcs only: signed turn radius, m (> 0 turns left, ω = v / R)
    """

    kind: str
    profile: Profile
    radius: float | None = None

    def __post_init__(self):
        if self.kind not in ("line", "arc", "spin"):
            raise ValueError(f"`kind` must be 'line', 'arc' or 'spin', got {self.kind!r}")
        _check_profile("profile", self.profile)
        if self.kind == "arc":
            R = _real("radius", self.radius, "(m)")
            if R == 0.0:
                raise ValueError("`radius` must be non-zero (m; > 0 turns left), got 0.0:"
                                 " use spin() to turn on the spot")
            object.__setattr__(self, "radius", R)
        elif self.radius is not None:
            raise ValueError(f"`radius` is only for arcs, got radius = {self.radius}"
                             f" for a {self.kind}")

    @property
    def duration(self) -> float:
        """Duration of the segment, s."""
        return self.profile.duration

    def sample(self, t) -> BaseMotion:
        """Base motion at segment times `t` (s, shape (n,)), pose relative to the segment start."""
        s, sd, sdd, _ = self.profile.sample(t)
        z = np.zeros_like
        if self.kind == "line":
            return BaseMotion(x=s, y=z(s), theta=z(s), v=sd, a=sdd, omega=z(s), alpha=z(s))
        if self.kind == "spin":
            return BaseMotion(x=z(s), y=z(s), theta=s, v=z(s), a=z(s), omega=sd, alpha=sdd)
        R = self.radius
        theta = s / R
        # y = R (1 − cos θ) written as 2R sin²(θ/2): no cancellation for large R
        return BaseMotion(x=R * np.sin(theta), y=2.0 * R * np.sin(theta / 2) ** 2, theta=theta,
                          v=sd, a=sdd, omega=sd / R, alpha=sdd / R)


def line(profile) -> BaseSegment:
    """Straight drive: forward speed v = ṡ, ω = 0; `profile` gives the path length, m."""
    return BaseSegment("line", profile)


def arc(profile, radius) -> BaseSegment:
    """Circular arc of signed `radius` (m, > 0 turns left): v = ṡ, ω = ṡ / radius."""
    return BaseSegment("arc", profile, radius)


def spin(profile) -> BaseSegment:
    """Turn on the spot: `profile` gives the yaw angle (rad), v = 0, ω = ṡ."""
    return BaseSegment("spin", profile)


# ------------------------------------------------------------------------- arm moves
@dataclass(frozen=True, eq=False)
class ArmMotion:
    """Arm joint motion at times t: q, qd, qdd of shape (len(t), n), rad or m (per s, s²)."""

    q: np.ndarray
    qd: np.ndarray
    qdd: np.ndarray

    def to_dict(self):
        return _to_dict(self)


def _unit_shape(name):
    # Unit-distance shapes of unit duration. Trapezoid: 1/3 of the time accelerating
    # (v_max = 1.5, a_max = 4.5: T = 1/1.5 + 1.5/4.5 = 1). S-curve: T_a = 1/3 with
    # T_j = T_a/4, T_v = 1/3 (v_max = 1.5, a_max = 6, j_max = 72: T = 2/3 + 1/4 + 1/12 = 1).
    if name == "minimum_jerk":
        return MinimumJerkProfile(1.0, 1.0)
    if name == "trapezoidal":
        return trapezoidal(1.0, 1.5, 4.5)
    if name == "s_curve":
        return s_curve(1.0, 1.5, 6.0, 72.0)
    raise ValueError(
        f"`profile` must be 'minimum_jerk', 'trapezoidal', 's_curve' or a profile object,"
        f" got {name!r}")


@dataclass(frozen=True, eq=False)
class JointMove:
    """Joint-space move q(t) = q_start + (q_end − q_start) σ(t / duration).

    σ is `shape` rescaled to unit distance and to `duration`:
    σ(τ) = p.s(τ T_p) / p.d, so q̇ = Δq p.v (T_p/T) / p.d and q̈ = Δq p.a (T_p/T)² / p.d
    for a profile p of duration T_p and distance p.d.

    q_start, q_end : ndarray, shape (n,)   joint positions, rad or m
    duration : float > 0                   s
    shape : profile                        non-zero distance, positive duration
    """

    q_start: np.ndarray
    q_end: np.ndarray
    duration: float
    shape: Profile

    def __post_init__(self):
        q0 = _as_vector("q_start", self.q_start)
        object.__setattr__(self, "q_start", q0)
        object.__setattr__(self, "q_end", _as_vector("q_end", self.q_end, q0.size))
        object.__setattr__(self, "duration", _positive("duration", self.duration, "(s)"))
        shape = _check_profile("shape", self.shape)
        if shape.distance == 0.0 or not shape.duration > 0.0:
            raise ValueError(
                f"`shape` must have a non-zero distance and a positive duration, got distance ="
                f" {shape.distance}, duration = {shape.duration}")

    def sample(self, t) -> ArmMotion:
        """Joint motion at move times `t` (s, shape (m,)) -> arrays of shape (m, n)."""
        t = _as_times(t)
        p = self.shape
        r = p.duration / self.duration
        s, v, a, _ = p.sample(t * r)
        dq = self.q_end - self.q_start
        return ArmMotion(q=self.q_start + np.outer(s / p.distance, dq),
                         qd=np.outer(v * r / p.distance, dq),
                         qdd=np.outer(a * r * r / p.distance, dq))


def joint_move(q_start, q_end, duration, *, profile="minimum_jerk") -> JointMove:
    """Interpolate the arm from `q_start` to `q_end` (shape (n,), rad or m) in `duration` s.

    `profile` is "minimum_jerk" (default), "trapezoidal" (accelerating for the first
    third of the time, braking for the last), "s_curve" (see `_unit_shape`), or any
    profile object, used as a shape and rescaled to the duration and the distance.
    """
    shape = _unit_shape(profile) if isinstance(profile, str) else profile
    return JointMove(q_start, q_end, duration, shape)


# -------------------------------------------------------------------------- timeline
@dataclass(frozen=True)
class Piece:
    """One step of a duty cycle: a base segment and an arm move run from the same start.

    base : BaseSegment or None (the base stands still)
    arm : JointMove or None (the arm holds its position)
    duration : float or None, s; default the longer member. A member shorter than
               the piece must end at rest; it then holds its end state.
    """

    base: BaseSegment | None = None
    arm: JointMove | None = None
    duration: float | None = None

    def __post_init__(self):
        if self.base is not None and not isinstance(self.base, BaseSegment):
            raise ValueError(f"`base` must be a BaseSegment or None,"
                             f" got {type(self.base).__name__}")
        if self.arm is not None and not isinstance(self.arm, JointMove):
            raise ValueError(f"`arm` must be a JointMove or None, got {type(self.arm).__name__}")
        members = [m for m in (self.base, self.arm) if m is not None]
        if self.duration is None:
            if not members:
                raise ValueError("a piece with neither base nor arm motion needs a `duration` (s)")
            duration = max(m.duration for m in members)
        else:
            duration = _nonnegative("duration", self.duration, "(s)")
        object.__setattr__(self, "duration", duration)
        for name, m in (("base", self.base), ("arm", self.arm)):
            if m is None:
                continue
            if m.duration > duration + _JOIN_TOL * max(1.0, duration):
                raise ValueError(f"the {name} motion lasts {m.duration} s, longer than the"
                                 f" piece duration {duration} s")
            if m.duration < duration and np.max(np.abs(_rates(m, m.duration))) > _JOIN_TOL:
                raise ValueError(
                    f"the {name} motion lasts {m.duration} s < piece duration {duration} s"
                    f" but does not end at rest (end rates {_rates(m, m.duration)}):"
                    " it cannot hold its end state")


def _rates(member, t):
    """Velocities of a base segment (v, ω) or an arm move (q̇) at one time t."""
    if member is None:
        return np.zeros(0)
    if isinstance(member, BaseSegment):
        m = member.sample(t)
        return np.array([m.v[0], m.omega[0]])
    return member.sample(t).qd[0]


@dataclass(frozen=True, eq=False)
class TimelineSample:
    """A timeline sampled on a uniform grid; arrays of shape (len(t),) unless noted.

    t : s;  segment : int index of the piece each sample belongs to
    x, y, theta : world pose of the base, m, m, rad (heading carried over, not wrapped)
    v, a, omega, alpha : base forward speed / acceleration (m/s, m/s²), yaw rate /
                         acceleration (rad/s, rad/s²)
    q, qd, qdd : arm joints, shape (len(t), n), rad or m (per s, s²)
    """

    t: np.ndarray
    segment: np.ndarray
    x: np.ndarray
    y: np.ndarray
    theta: np.ndarray
    v: np.ndarray
    a: np.ndarray
    omega: np.ndarray
    alpha: np.ndarray
    q: np.ndarray
    qd: np.ndarray
    qdd: np.ndarray

    def to_dict(self):
        return _to_dict(self)


@dataclass(frozen=True, eq=False)
class Timeline:
    """A duty cycle: pieces run one after the other, each on its own clock.

    Parameters
    ----------
    pieces : sequence of Piece or (base or None, arm or None, duration or None)
    base_pose : (x, y, theta) world pose at t = 0, m, m, rad
    q_start : arm position at t = 0, shape (n,); default the first arm move's start
    Checks: each arm move starts where the arm is, and the base (v, ω) and arm (q̇)
    velocities match across every boundary (to 1e-9), so a sampled timeline is
    continuous in velocity.
    """

    pieces: tuple
    base_pose: tuple = (0.0, 0.0, 0.0)
    q_start: np.ndarray | None = None
    duration: float = field(init=False)
    start_times: np.ndarray = field(init=False, repr=False)
    start_poses: np.ndarray = field(init=False, repr=False)  # (len(pieces) + 1, 3)
    start_q: np.ndarray = field(init=False, repr=False)  # (len(pieces) + 1, n)

    def __post_init__(self):
        pieces = tuple(p if isinstance(p, Piece) else _as_piece(k, p)
                       for k, p in enumerate(self.pieces))
        if not pieces:
            raise ValueError("`pieces` must hold at least one piece")
        pose = _as_vector("base_pose", self.base_pose, 3)
        moves = [p.arm for p in pieces if p.arm is not None]
        if self.q_start is not None:
            q = _as_vector("q_start", self.q_start)
        else:
            q = moves[0].q_start if moves else np.zeros(0)
        starts, poses, qs = [0.0], [pose], [q]
        for k, p in enumerate(pieces):
            if p.arm is not None:
                if p.arm.q_start.shape != q.shape:
                    raise ValueError(f"pieces[{k}]: arm move has {p.arm.q_start.size} joints,"
                                     f" expected {q.size}")
                if not np.allclose(p.arm.q_start, q, rtol=0.0, atol=_JOIN_TOL):
                    raise ValueError(f"pieces[{k}]: arm move starts at q = {p.arm.q_start}"
                                     f" but the arm is at {q}")
                q = p.arm.q_end
            if k > 0:
                _check_join(k, pieces[k - 1], p, q.size)
            if p.base is not None:
                end = p.base.sample(p.base.duration)
                pose = _compose(pose, end.x[0], end.y[0], end.theta[0])
            starts.append(starts[-1] + p.duration)
            poses.append(pose)
            qs.append(q)
        object.__setattr__(self, "pieces", pieces)
        object.__setattr__(self, "base_pose", tuple(float(x) for x in poses[0]))
        object.__setattr__(self, "duration", starts[-1])
        object.__setattr__(self, "start_times", np.array(starts))
        object.__setattr__(self, "start_poses", np.array(poses))
        object.__setattr__(self, "start_q", np.array(qs).reshape(len(qs), q.size))

    @property
    def end_pose(self) -> np.ndarray:
        """World pose (x, y, theta) at the end of the last piece, m, m, rad."""
        return self.start_poses[-1].copy()

    def sample(self, dt) -> TimelineSample:
        """Sample on t = 0, dt, 2 dt, ... up to `duration` (s; the end is included when
        it is a multiple of dt to 1e-9 relative). A sample at a boundary belongs to the
        later piece."""
        dt = _positive("dt", dt, "(s)")
        n_t = int(math.floor(self.duration / dt * (1.0 + 1e-12) + 1e-9)) + 1
        if n_t > 50_000_000:
            raise ValueError(f"`dt` = {dt} s gives {n_t} samples over {self.duration} s:"
                             " choose a larger dt")
        t = np.minimum(dt * np.arange(n_t), self.duration)
        ends = self.start_times[1:]
        segment = np.minimum(np.searchsorted(ends, t, side="right"), len(self.pieces) - 1)
        n = self.start_q.shape[1]
        out = {name: np.zeros(n_t) for name in ("x", "y", "theta", "v", "a", "omega", "alpha")}
        q, qd, qdd = np.zeros((n_t, n)), np.zeros((n_t, n)), np.zeros((n_t, n))
        for k, p in enumerate(self.pieces):
            m = segment == k
            if not np.any(m):
                continue
            t_k = t[m] - self.start_times[k]
            X0, Y0, TH0 = self.start_poses[k]
            if p.base is None:
                out["x"][m], out["y"][m], out["theta"][m] = X0, Y0, TH0
            else:
                b = p.base.sample(t_k)
                c, s = math.cos(TH0), math.sin(TH0)
                out["x"][m] = X0 + c * b.x - s * b.y
                out["y"][m] = Y0 + s * b.x + c * b.y
                out["theta"][m] = TH0 + b.theta
                for name in ("v", "a", "omega", "alpha"):
                    out[name][m] = getattr(b, name)
            if p.arm is None:
                q[m] = self.start_q[k]
            else:
                arm = p.arm.sample(t_k)
                q[m], qd[m], qdd[m] = arm.q, arm.qd, arm.qdd
        return TimelineSample(t=t, segment=segment, q=q, qd=qd, qdd=qdd, **out)


def _as_piece(k, p):
    try:
        base, arm, duration = p
    except (TypeError, ValueError):
        raise ValueError(f"pieces[{k}] must be a Piece or a (base, arm, duration) triple,"
                         f" got {p!r}") from None
    try:
        return Piece(base, arm, duration)
    except ValueError as err:
        raise ValueError(f"pieces[{k}]: {err}") from None


def _compose(pose, x, y, theta):
    """World pose after moving by (x, y, theta) given in the frame of `pose`."""
    X, Y, TH = pose
    c, s = math.cos(TH), math.sin(TH)
    return np.array([X + c * x - s * y, Y + s * x + c * y, TH + theta])


def _check_join(k, prev, nxt, n):
    """Velocities at the end of piece k−1 must equal those at the start of piece k."""
    checks = (("base (v, ω)", prev.base, nxt.base, 2), ("arm q̇", prev.arm, nxt.arm, n))
    for label, a, b, size in checks:
        end = _rates(a, prev.duration) if a is not None else np.zeros(size)
        start = _rates(b, 0.0) if b is not None else np.zeros(size)
        if not np.allclose(end, start, rtol=0.0, atol=_JOIN_TOL):
            raise ValueError(
                f"pieces[{k}]: {label} starts at {start} but pieces[{k - 1}] ends at {end}:"
                " a velocity step needs infinite acceleration; end the previous profile at"
                " the speed where this one starts")


# --------------------------------------------------------------------- tool paths
@dataclass(frozen=True, eq=False)
class ToolSample:
    """A tool path sampled at times t: position p (n, 3) m, velocity v (n, 3) m/s,
    acceleration a (n, 3) m/s², rotation R (n, 3, 3), angular velocity w
    (n, 3) rad/s and angular acceleration dw (n, 3) rad/s², world frame."""

    p: np.ndarray
    v: np.ndarray
    a: np.ndarray
    R: np.ndarray
    w: np.ndarray
    dw: np.ndarray


def _exp3(phi):
    """Rotation matrix of the rotation vector phi (Rodrigues' formula)."""
    th = math.sqrt(float(phi.dot(phi)))
    K = np.array([[0.0, -phi[2], phi[1]], [phi[2], 0.0, -phi[0]], [-phi[1], phi[0], 0.0]])
    if th < 1e-12:
        return np.eye(3) + K
    return np.eye(3) + math.sin(th) / th * K + (1 - math.cos(th)) / th**2 * K.dot(K)


def _log3(R):
    """Rotation vector of R (inverse of `_exp3`, angle in [0, π))."""
    c = max(-1.0, min(1.0, (np.trace(R) - 1.0) / 2.0))
    th = math.acos(c)
    v = np.array([R[2, 1] - R[1, 2], R[0, 2] - R[2, 0], R[1, 0] - R[0, 1]])
    if th < 1e-12:
        return v / 2.0
    if th > math.pi - 1e-6:
        raise ValueError("a rotation of π between two waypoints is ambiguous: add a waypoint")
    return th / (2.0 * math.sin(th)) * v


@dataclass(frozen=True, eq=False)
class ToolPath:
    """Tool waypoints in the world, passed at given times.

    Position: on each segment [t_k, t_{k+1}] (duration D, τ = (t − t_k)/D) the
    quintic Hermite curve with end velocities v_k, v_{k+1} and zero end
    accelerations,

        p = h₀₀ p_k + h₁₀ D v_k + h₀₁ p_{k+1} + h₁₁ D v_{k+1},
        h₀₀ = 1 − 10τ³ + 15τ⁴ − 6τ⁵,  h₁₀ = τ − 6τ³ + 8τ⁴ − 3τ⁵,
        h₀₁ = 10τ³ − 15τ⁴ + 6τ⁵,      h₁₁ = −4τ³ + 7τ⁴ − 3τ⁵

    (continuous in position, velocity and acceleration).  The tool is at rest
    (v_k = 0) at the first and last waypoints, at every `stop` waypoint and at
    both ends of a hold (two waypoints at the same place); elsewhere it passes
    with the Catmull–Rom velocity v_k = (p_{k+1} − p_{k−1}) / (t_{k+1} − t_{k−1})
    (Catmull & Rom, 1974).  With every v_k = 0 each segment is the minimum-jerk
    move of Flash & Hogan (1985).

    Rotation: about the fixed axis of R_{k+1} R_kᵀ with the minimum-jerk
    profile σ(τ):  R = exp(σ φ) R_k, φ = log(R_{k+1} R_kᵀ), ω = σ̇ φ, ω̇ = σ̈ φ
    (world axes; at rest at every waypoint).  Outside [t_0, t_last] the path
    holds its end waypoint.

    times (m,) s strictly increasing; positions (m, 3) m; rotations (m, 3, 3)
    or one (3, 3) for all; stops (m,) bool or None.
    """

    times: np.ndarray
    positions: np.ndarray
    rotations: np.ndarray
    stops: np.ndarray | None = None

    def __post_init__(self):
        t = _as_vector("times", self.times)
        P = np.asarray(self.positions, dtype=float)
        if P.shape != (t.size, 3) or not np.all(np.isfinite(P)):
            raise ValueError(f"`positions` must have shape ({t.size}, 3), finite, got {P.shape}")
        if t.size < 1 or np.any(np.diff(t) <= 0):
            raise ValueError(f"`times` must be strictly increasing, got {t.tolist()}")
        R = np.asarray(self.rotations, dtype=float)
        if R.shape == (3, 3):
            R = np.repeat(R[None], t.size, axis=0)
        if R.shape != (t.size, 3, 3):
            raise ValueError(f"`rotations` must have shape ({t.size}, 3, 3) or (3, 3), got {R.shape}")
        stops = np.zeros(t.size, bool) if self.stops is None else np.asarray(self.stops, bool)
        V = np.zeros((t.size, 3))
        for k in range(1, t.size - 1):
            hold = (np.allclose(P[k], P[k - 1], atol=1e-12) or np.allclose(P[k], P[k + 1], atol=1e-12))
            if not (stops[k] or hold):
                V[k] = (P[k + 1] - P[k - 1]) / (t[k + 1] - t[k - 1])
        phis = np.array([_log3(R[k + 1].dot(R[k].T)) for k in range(t.size - 1)]).reshape(-1, 3)
        object.__setattr__(self, "times", t)
        object.__setattr__(self, "positions", P)
        object.__setattr__(self, "rotations", R)
        object.__setattr__(self, "stops", stops)
        object.__setattr__(self, "velocities", V)
        object.__setattr__(self, "_phis", phis)

    def sample(self, t) -> ToolSample:
        t = _as_times(t)
        T, P, V = self.times, self.positions, self.velocities
        n = t.size
        p, v, a = np.empty((n, 3)), np.zeros((n, 3)), np.zeros((n, 3))
        R, w, dw = np.empty((n, 3, 3)), np.zeros((n, 3)), np.zeros((n, 3))
        k = np.clip(np.searchsorted(T, t, side="right") - 1, 0, max(T.size - 2, 0))
        for i in range(n):
            if T.size == 1 or t[i] <= T[0]:
                p[i], R[i] = P[0], self.rotations[0]
                continue
            if t[i] >= T[-1]:
                p[i], R[i] = P[-1], self.rotations[-1]
                continue
            j = k[i]
            D = T[j + 1] - T[j]
            x = (t[i] - T[j]) / D
            x2, x3, x4, x5 = x * x, x**3, x**4, x**5
            h = (1 - 10 * x3 + 15 * x4 - 6 * x5, x - 6 * x3 + 8 * x4 - 3 * x5,
                 10 * x3 - 15 * x4 + 6 * x5, -4 * x3 + 7 * x4 - 3 * x5)
            hd = (-30 * x2 + 60 * x3 - 30 * x4, 1 - 18 * x2 + 32 * x3 - 15 * x4,
                  30 * x2 - 60 * x3 + 30 * x4, -12 * x2 + 28 * x3 - 15 * x4)
            hdd = (-60 * x + 180 * x2 - 120 * x3, -36 * x + 96 * x2 - 60 * x3,
                   60 * x - 180 * x2 + 120 * x3, -24 * x + 84 * x2 - 60 * x3)
            c0, c1, c2, c3 = P[j], D * V[j], P[j + 1], D * V[j + 1]
            p[i] = h[0] * c0 + h[1] * c1 + h[2] * c2 + h[3] * c3
            v[i] = (hd[0] * c0 + hd[1] * c1 + hd[2] * c2 + hd[3] * c3) / D
            a[i] = (hdd[0] * c0 + hdd[1] * c1 + hdd[2] * c2 + hdd[3] * c3) / D**2
            s = x3 * (10 - 15 * x + 6 * x2)
            sd = 30 * x2 * (1 - x) ** 2 / D
            sdd = 60 * x * (1 - 3 * x + 2 * x2) / D**2
            phi = self._phis[j]
            R[i] = _exp3(s * phi).dot(self.rotations[j])
            w[i], dw[i] = sd * phi, sdd * phi
        return ToolSample(p=p, v=v, a=a, R=R, w=w, dw=dw)


# ----------------------------------------------------------- segments by name
BASE_PIECE_KINDS = ("straight", "arc", "turn", "stop", "dwell")


def _limited_profile(distance, values, speed="speed"):
    """S-curve when `values` has a jerk limit, else trapezoidal (deceleration
    limit `deceleration` when given)."""
    if "jerk" in values:
        return s_curve(distance, values[speed], values["acceleration"], values["jerk"])
    return trapezoidal(distance, values[speed], values["acceleration"],
                       d_max=values.get("deceleration"))


def base_piece(kind, values):
    """A rest-to-rest base `Piece` from a segment's kind and its keys (SI), as
    described in the duty-cycle and scenario files:

    straight  distance, speed, acceleration[, deceleration, jerk]    a line
    arc       radius (> 0 left), angle travelled, then as straight  s = |R| angle
    turn      angle (> 0 left), rate, acceleration[, jerk]          on the spot
    stop      speed, acceleration, cruise, deceleration             reach the speed,
              hold it `cruise` s, brake: d = v²/(2a) + v t_c + v²/(2 d_b)
    dwell     duration                                              stand still
    """
    v = values
    if kind == "straight":
        return Piece(base=line(_limited_profile(v["distance"], v)))
    if kind == "arc":
        return Piece(base=arc(_limited_profile(abs(v["radius"]) * v["angle"], v), v["radius"]))
    if kind == "turn":
        return Piece(base=spin(_limited_profile(v["angle"], v, speed="rate")))
    if kind == "stop":
        speed, a, d = v["speed"], v["acceleration"], v["deceleration"]
        distance = speed**2 / (2 * a) + speed * v["cruise"] + speed**2 / (2 * d)
        return Piece(base=line(trapezoidal(distance, speed, a, d_max=d)))
    if kind == "dwell":
        return Piece(duration=v["duration"])
    raise ValueError(f"`kind` must be one of {', '.join(BASE_PIECE_KINDS)}, got {kind!r}")
