"""The controller's inputs and outputs: gains, targets, base plans and what a
command did (`CommandInfo`), with their validators."""

from __future__ import annotations

import math
from typing import NamedTuple
from dataclasses import dataclass

import numpy as np

from .._common import as_vector as _vec
from ..dynamics import resolve_frame as _frame

__all__ = ["BasePlan", "CommandInfo", "CommandSample", "Gains", "Target"]

#: tolerance on RᵀR = I and det R = 1 for a target rotation
ROTATION_TOL = 1e-6


# ------------------------------------------------------------------ checks
def _frozen(name, x, shape):
    x = np.array(x, dtype=float)
    if x.shape != shape:
        raise ValueError(f"`{name}` must have shape {shape}, got {x.shape}")
    if not np.all(np.isfinite(x)):
        raise ValueError(f"`{name}` has non-finite entries: {x}")
    x.setflags(write=False)
    return x


def _twist(name, x):
    """(3,) linear only (angular part zero) or (6,) [linear; angular] -> (6,)."""
    x = np.array(x, dtype=float)
    if x.shape == (3,):
        x = np.concatenate((x, np.zeros(3)))
    return _frozen(name, x, (6,))


def _rotation(R):
    R = _frozen("rotation", R, (3, 3))
    err = np.abs(R.T.dot(R) - np.eye(3)).max()
    det = np.linalg.det(R)
    if err > ROTATION_TOL or abs(det - 1.0) > ROTATION_TOL:
        raise ValueError(
            f"`rotation` must be a rotation matrix (RᵀR = I, det R = +1 to {ROTATION_TOL}), "
            f"got max|RᵀR − I| = {err:.3g}, det R = {det:.6g}; orthonormalise it, e.g. "
            "pinocchio.Quaternion(R).normalized().matrix()")
    return R


def _per_axis(name, x, size, unit):
    x = np.asarray(x, dtype=float)
    if x.ndim == 0:
        if size is None:
            raise ValueError(f"`{name}` is a scalar: give `size` (the number of axes)")
        x = np.full(size, float(x))
    if x.ndim != 1 or (size is not None and x.shape != (size,)):
        raise ValueError(f"`{name}` must be a scalar or have shape ({size or 'n'},), "
                         f"got {x.shape}")
    if not np.all(np.isfinite(x)) or np.any(x < 0.0):
        raise ValueError(f"`{name}` must be finite and >= 0 {unit} per axis, got {x}")
    return x


# ------------------------------------------------------------------ values
@dataclass(frozen=True, eq=False)
class Gains:
    """Feedback gains of a* = ẍ_d + K_d ė + K_p e (task) or of the posture.

    Kp : ndarray (n, n)   stiffness, 1/s² (per unit task inertia)
    Kd : ndarray (n, n)   damping, 1/s
    Both symmetric positive semi-definite (ValueError otherwise).
    """

    Kp: np.ndarray
    Kd: np.ndarray

    def __post_init__(self):
        Kp, Kd = np.array(self.Kp, dtype=float), np.array(self.Kd, dtype=float)
        for name, K in (("Kp", Kp), ("Kd", Kd)):
            if K.ndim != 2 or K.shape[0] != K.shape[1] or K.shape != Kp.shape:
                raise ValueError(f"`{name}` must be a square matrix of the shape of Kp "
                                 f"{Kp.shape}, got {K.shape}")
            if not np.all(np.isfinite(K)):
                raise ValueError(f"`{name}` has non-finite entries: {K}")
            scale = max(np.abs(K).max(), 1.0)
            if np.abs(K - K.T).max() > 1e-12 * scale:
                raise ValueError(f"`{name}` must be symmetric, got {K.tolist()}")
            w = np.linalg.eigvalsh(K)
            if w[0] < -1e-12 * scale:
                raise ValueError(f"`{name}` must be positive semi-definite (no negative "
                                 f"gains), got eigenvalues {w.tolist()}")
            K.setflags(write=False)
        object.__setattr__(self, "Kp", Kp)
        object.__setattr__(self, "Kd", Kd)

    @property
    def size(self):
        return self.Kp.shape[0]

    @classmethod
    def from_stiffness(cls, stiffness, damping_ratio=1.0, *, size=None):
        """Diagonal gains from a stiffness K_p = ω_n² (1/s²) and a damping ratio ζ
        per axis: K_d = 2 ζ √K_p.  Scalars are repeated `size` times."""
        if size is None and np.ndim(stiffness) == 1:
            size = len(stiffness)
        Kp = _per_axis("stiffness", stiffness, size, "(1/s²)")
        zeta = _per_axis("damping_ratio", damping_ratio, Kp.size, "(dimensionless)")
        return cls(np.diag(Kp), np.diag(2.0 * zeta * np.sqrt(Kp)))

    def to_dict(self):
        return {"Kp": self.Kp.tolist(), "Kd": self.Kd.tolist()}


@dataclass(frozen=True, eq=False)
class Target:
    """A task-space target of one frame, in the world frame.

    position : ndarray (3,)              p_d, m
    rotation : ndarray (3, 3) or None    R_d (world from frame); needed for angular rows
    velocity : ndarray (6,)              [v_d; ω_d], m/s, rad/s; (3,) = linear only
    acceleration : ndarray (6,)          [a_d; ω̇_d], m/s², rad/s²; (3,) = linear only
    """

    position: np.ndarray
    rotation: np.ndarray | None = None
    velocity: np.ndarray = (0.0, 0.0, 0.0)
    acceleration: np.ndarray = (0.0, 0.0, 0.0)

    def __post_init__(self):
        object.__setattr__(self, "position", _frozen("position", self.position, (3,)))
        if self.rotation is not None:
            object.__setattr__(self, "rotation", _rotation(self.rotation))
        object.__setattr__(self, "velocity", _twist("velocity", self.velocity))
        object.__setattr__(self, "acceleration", _twist("acceleration", self.acceleration))

    @classmethod
    def trusted(cls, position, rotation, velocity, acceleration):
        """A target from arrays already known to be valid (position (3,),
        rotation (3, 3) orthonormal, velocity and acceleration (6,) float):
        no checks, for a simulation's inner loop."""
        obj = object.__new__(cls)
        object.__setattr__(obj, "position", position)
        object.__setattr__(obj, "rotation", rotation)
        object.__setattr__(obj, "velocity", velocity)
        object.__setattr__(obj, "acceleration", acceleration)
        return obj

    @classmethod
    def hold(cls, robot, q, frame=None):
        """Hold the frame's current world pose (zero velocity and acceleration)."""
        fid, _ = _frame(robot, frame)
        X = robot.frame_placement(_vec("q", q, robot.model.nq), fid)
        return cls(X.translation, X.rotation)

    @classmethod
    def from_profile(cls, sample, index, start, end, rotation=None):
        """A point of a straight move from `start` to `end` (m, world) driven by a
        scalar profile sample (`opspace.trajectory.ProfileSample`, s in m along
        the line): p = start + s û, v = ṡ û, a = s̈ û, û = (end − start)/|end − start|."""
        start = _frozen("start", start, (3,))
        d = _frozen("end", end, (3,)) - start
        length = math.sqrt(d.dot(d))
        if not length > 0.0:
            raise ValueError(f"`end` must differ from `start`, got {start.tolist()} twice")
        u = d / length
        s, sd, sdd = (float(np.asarray(x)[index]) for x in (sample.s, sample.v, sample.a))
        return cls(start + s * u, rotation, sd * u, sdd * u)

    def to_dict(self):
        return {"position": self.position.tolist(),
                "rotation": None if self.rotation is None else self.rotation.tolist(),
                "velocity": self.velocity.tolist(), "acceleration": self.acceleration.tolist()}


@dataclass(frozen=True)
class BasePlan:
    """Planned base motion in the base frame: forward speed v (m/s), yaw rate
    ω (rad/s) and their rates a (m/s²), α (rad/s²)."""

    v: float = 0.0
    omega: float = 0.0
    a: float = 0.0
    alpha: float = 0.0

    def __post_init__(self):
        for name in ("v", "omega", "a", "alpha"):
            value = float(getattr(self, name))
            if not math.isfinite(value):
                raise ValueError(f"BasePlan `{name}` must be finite, got {value}")
            object.__setattr__(self, name, value)

    @classmethod
    def from_timeline(cls, sample, index):
        """From a sampled base motion (`TimelineSample` or `BaseMotion`) at `index`."""
        return cls(*(float(np.asarray(getattr(sample, n))[index])
                     for n in ("v", "omega", "a", "alpha")))


class CommandSample(NamedTuple):
    """What one fast-path command did (`OperationalSpaceController.fast_command`),
    for a simulator's inner loop.  The arrays are the controller's buffers: valid
    until its next call (copy what you keep).

    Q : (nv,)          efforts sent (after the limits), N·m or N
    Q_demand : (nv,)   efforts before the limits
    error : (k,)       task error e (m, rad), world axes
    target_position : (3,)   p_d of the call, m, world
    M : (nv, nv)       reduced mass matrix at (q, ν) (`opspace.dynamics.mass_matrix`)
    h : (nv,)          c + g at (q, ν), N·m or N (`opspace.dynamics.bias_forces`)
    """

    Q: np.ndarray
    Q_demand: np.ndarray
    error: np.ndarray
    target_position: np.ndarray
    M: np.ndarray
    h: np.ndarray


@dataclass(frozen=True, eq=False)
class CommandInfo:
    """What one `command` call did.

    Q : ndarray (nv,)           efforts sent (after the limits), N·m or N
    Q_demand : ndarray (nv,)    efforts before the limits
    saturated : ndarray (nv,)   bool per coordinate: |Q_demand| > limit
    error : ndarray (k,)        task error e (m, rad), world axes
    velocity_error : (k,)       ẋ_d − ẋ, m/s, rad/s
    a_star : ndarray (k,)       commanded task acceleration, m/s², rad/s²
    F : ndarray (k,)            task force Λ a* + μ + p (+ Γ ν̇_w*), N, N·m
    damped : bool               the task inertia was damped (near a singularity)
    target_position : (3,)      p_d of the call, m, world (a simulation records it)
    """

    Q: np.ndarray
    Q_demand: np.ndarray
    saturated: np.ndarray
    error: np.ndarray
    velocity_error: np.ndarray
    a_star: np.ndarray
    F: np.ndarray
    damped: bool
    target_position: np.ndarray | None = None

    @property
    def any_saturated(self):
        return bool(self.saturated.any())

    def to_dict(self):
        out = {name: getattr(self, name).tolist() for name in
               ("Q", "Q_demand", "saturated", "error", "velocity_error", "a_star", "F")}
        out["damped"] = self.damped
        out["target_position"] = (None if self.target_position is None
                                  else self.target_position.tolist())
        return out


_STILL = BasePlan()
