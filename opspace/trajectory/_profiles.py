"""Scalar motion profiles (see the package docstring)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar, Union

import numpy as np

from ._checks import (_UNIT_ACC, _UNIT_DIST, _UNIT_JERK, _UNIT_VEL, _as_times, _nonnegative,
                      _positive, _real, _to_dict)


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
