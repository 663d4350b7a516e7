"""Tool paths through waypoints in the world."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._checks import _as_times, _as_vector


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
