"""Duty-cycle timelines: pieces of base and arm motion joined end to end."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ._checks import _JOIN_TOL, _as_vector, _nonnegative, _positive, _to_dict
from ._motions import BaseSegment, JointMove


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
