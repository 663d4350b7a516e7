"""Differential-drive base segments and arm joint moves."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._checks import _as_times, _as_vector, _positive, _real, _to_dict
from ._profiles import MinimumJerkProfile, Profile, _check_profile, s_curve, trapezoidal


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


@dataclass(frozen=True, eq=False)
class DelayedMove(JointMove):
    """A joint move that waits `delay` s at q_start, then moves: for a move
    that starts part-way into the piece it shares with a base segment.

    duration : float > delay   s, the whole (wait + move); the move itself
                               lasts duration − delay
    delay : float >= 0         s
    """

    delay: float = 0.0

    def __post_init__(self):
        super().__post_init__()
        delay = _real("delay", self.delay)
        if not (delay >= 0.0 and delay < self.duration):
            raise ValueError(f"`delay` must be in [0, duration = {self.duration}) s, got {delay}")
        object.__setattr__(self, "delay", delay)

    def sample(self, t) -> ArmMotion:
        t = _as_times(t)
        move = JointMove(self.q_start, self.q_end, self.duration - self.delay, self.shape)
        out = move.sample(np.maximum(t - self.delay, 0.0))
        waiting = t < self.delay
        out.qd[waiting] = 0.0
        out.qdd[waiting] = 0.0
        return out


def joint_move(q_start, q_end, duration, *, profile="minimum_jerk", delay=0.0) -> JointMove:
    """Interpolate the arm from `q_start` to `q_end` (shape (n,), rad or m) in `duration` s.

    `profile` is "minimum_jerk" (default), "trapezoidal" (accelerating for the first
    third of the time, braking for the last), "s_curve" (see `_unit_shape`), or any
    profile object, used as a shape and rescaled to the duration and the distance.
    `delay` > 0 (s) holds q_start that long first (a `DelayedMove` of duration
    delay + duration).
    """
    shape = _unit_shape(profile) if isinstance(profile, str) else profile
    if delay:
        return DelayedMove(q_start, q_end, delay + duration, shape, delay)
    return JointMove(q_start, q_end, duration, shape)
