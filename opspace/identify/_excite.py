"""Excitation design: a periodic motion that makes the regressor well conditioned.

Each reduced coordinate follows a finite Fourier series of L harmonics of the
base frequency ω_f (Swevers, Ganseman, Tükel, De Schutter & Van Brussel,
"Optimal robot excitation and identification", IEEE Trans. Robotics and
Automation 13(5), 1997):

    q_k(t) = q_k0 + Σ_l [ a_kl / (ω_f l) sin(ω_f l t) − b_kl / (ω_f l) cos(ω_f l t) ]

(velocities and accelerations in closed form).  The coefficients minimise the
condition number of the column-scaled regressor of the base parameters over
one period, stacked at `samples` instants, subject to the arm's position and
velocity limits, the wheels' speed limit, every coordinate's effort limit (the
description's inverse dynamics) and the robot staying upright (tip-over margin
and traction use from `opspace.stability`): a penalised objective
log cond + 10³ · violation, searched from the best of several random starts
by Powell's method (SciPy) within an evaluation budget.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..dynamics import inverse_dynamics_batch
from ..stability import stability_track, tyre_forces
from ._estimate import base_parameters
from ._regressor import parameter_set, regressor

__all__ = ["Excitation", "design_excitation", "fourier_motion"]


def fourier_motion(q0, a, b, w_f, t):
    """Positions, velocities, accelerations (n, k) of the Fourier series (module docstring).

    q0 (k,); a, b (k, L); w_f rad/s; t (n,) s.
    """
    L = a.shape[1]
    l = np.arange(1, L + 1)
    wt = np.outer(t, l * w_f)                                  # (n, L)
    s, c = np.sin(wt), np.cos(wt)
    pos = q0 + (s.dot((a / (w_f * l)).T) - c.dot((b / (w_f * l)).T))
    vel = c.dot(a.T) + s.dot(b.T)
    acc = -s.dot((a * w_f * l).T) + c.dot((b * w_f * l).T)
    return pos, vel, acc


@dataclass(frozen=True, eq=False)
class Excitation:
    """A designed excitation: q0 (nv,), a, b (nv, L), w_f rad/s; condition
    (the optimised regressor's) and condition_start (the best random start);
    use: the largest fraction of each limit reached (position, velocity,
    effort, tip-over and traction: ≤ 1 when feasible), checked on a grid four
    times finer than the design's; feasible."""

    q0: np.ndarray
    a: np.ndarray
    b: np.ndarray
    w_f: float
    condition: float
    condition_start: float
    use: dict
    feasible: bool

    @property
    def period(self):
        return 2.0 * math.pi / self.w_f

    def motion(self, t):
        return fourier_motion(self.q0, self.a, self.b, self.w_f, t)


class _Problem:
    """Objective, constraints and scaling of one design."""

    def __init__(self, robot, harmonics, period, samples, margin):
        self.robot, self.L = robot, harmonics
        self.w_f = 2.0 * math.pi / period
        self.t = np.linspace(0.0, period, samples, endpoint=False)
        lo = np.where(np.isfinite(robot.lower), robot.lower, -math.pi)
        hi = np.where(np.isfinite(robot.upper), robot.upper, math.pi)
        self.lo, self.hi = lo, hi
        self.q0 = np.concatenate([[0.0, 0.0], 0.5 * (lo + hi)])
        self.margin = margin
        self.params = parameter_set(robot)
        W0 = regressor(robot, self.params, *self._random_states(), None)
        self.base = base_parameters(W0, self.params.names)

    def _random_states(self, n=60, seed=11):
        rng = np.random.default_rng(seed)
        r = self.robot
        qs = np.array([r.configuration(arm=rng.uniform(self.lo, self.hi)) for _ in range(n)])
        return qs, rng.normal(size=(n, r.nv)), rng.normal(size=(n, r.nv))

    def unpack(self, x):
        ab = x.reshape(2, self.robot.nv, self.L)
        return ab[0], ab[1]

    def states(self, x, t=None):
        a, b = self.unpack(x)
        pos, vel, acc = fourier_motion(self.q0, a, b, self.w_f, self.t if t is None else t)
        qs = np.array([self.robot.configuration(wheels=p[:2], arm=p[2:]) for p in pos])
        return pos, vel, acc, qs

    def use(self, x, t=None):
        """Largest fraction of each limit reached over the period (at `t`, default
        the design instants)."""
        r = self.robot
        pos, vel, acc, qs = self.states(x, t)
        span = (self.hi - self.lo) / 2 * (1 - self.margin)
        centre = 0.5 * (self.hi + self.lo)
        out = {"position": float(np.max(np.abs(pos[:, 2:] - centre) / span))}
        vlim = np.where(np.isfinite(r.velocity_limit), r.velocity_limit, np.inf)
        out["velocity"] = float(np.max(np.abs(vel) / vlim))
        Q = inverse_dynamics_batch(r, qs, vel, acc)
        elim = np.where(np.isfinite(r.effort_limit), r.effort_limit, np.inf)
        out["effort"] = float(np.max(np.abs(Q) / elim))
        st = stability_track(r, qs, vel, acc, tyre_forces(r, qs, vel, acc, Q))
        static = max(float(np.nanmax(st.margin)), 1e-6)
        out["tip-over"] = float(np.nanmax(np.where(np.isfinite(st.margin),
                                                   1.0 - st.margin / static, 2.0)))
        trac = np.where(np.isfinite(st.traction), st.traction, 2.0)
        out["traction"] = float(np.max(trac))
        return out

    def condition(self, x):
        pos, vel, acc, qs = self.states(x)
        W = regressor(self.robot, self.params, qs, vel, acc)[:, self.base.index]
        n = np.linalg.norm(W, axis=0)
        Ws = W / np.where(n > 0, n, 1.0)
        # cond(W) = √(λ_max / λ_min) of the Gram matrix: a small symmetric
        # eigenproblem (the SVD of the tall W is far slower here)
        lam = np.linalg.eigvalsh(Ws.T.dot(Ws))
        return float(math.sqrt(lam[-1] / lam[0])) if lam[0] > 0 else math.inf

    def objective(self, x):
        use = self.use(x)
        violation = sum(max(0.0, u - 1.0) for u in use.values())
        return math.log(self.condition(x)) + 1e3 * violation

    def random_start(self, rng):
        """Random coefficients scaled inside the position and velocity limits."""
        r, L = self.robot, self.L
        a, b = rng.normal(size=(r.nv, L)), rng.normal(size=(r.nv, L))
        l = np.arange(1, L + 1)
        for k in range(r.nv):
            bound_v = np.sum(np.abs(a[k]) + np.abs(b[k]))
            vmax = r.velocity_limit[k] if math.isfinite(r.velocity_limit[k]) else 2.0
            scale = 0.6 * vmax / bound_v
            if k >= 2:
                bound_p = np.sum((np.abs(a[k]) + np.abs(b[k])) / (self.w_f * l))
                half = (self.hi[k - 2] - self.lo[k - 2]) / 2 * (1 - self.margin)
                scale = min(scale, 0.9 * half / bound_p)
            a[k] *= scale
            b[k] *= scale
        return np.concatenate([a.ravel(), b.ravel()])


def design_excitation(robot, *, harmonics=3, period=10.0, samples=40, starts=6, budget=150,
                      margin=0.05, seed=0):
    """An excitation of `robot` optimised for identification (module docstring).

    Parameters
    ----------
    harmonics : L;  period : T_f = 2π/ω_f, s;  samples : instants per period
    starts : random starts;  budget : objective evaluations of the search
    margin : fraction of each joint range kept free at both ends

    Returns
    -------
    Excitation
    """
    from scipy.optimize import minimize

    prob = _Problem(robot, harmonics, period, samples, margin)
    rng = np.random.default_rng(seed)
    best, best_f = None, math.inf
    for _ in range(starts):
        x = prob.random_start(rng)
        for _ in range(6):                       # shrink until feasible (efforts, upright)
            if max(prob.use(x).values()) <= 1.0:
                break
            x = 0.7 * x
        f = prob.objective(x)
        if f < best_f:
            best, best_f = x, f
    start_cond = prob.condition(best)
    res = minimize(prob.objective, best, method="Powell",
                   options={"maxfev": budget, "xtol": 1e-3, "ftol": 1e-4})
    x = res.x if res.fun < best_f else best
    a, b = prob.unpack(x)
    # the limits checked again on a grid four times finer than the design's
    use = prob.use(x, np.linspace(0.0, period, 4 * samples, endpoint=False))
    return Excitation(prob.q0, a.copy(), b.copy(), prob.w_f, prob.condition(x), start_cond, use,
                      all(u <= 1.0 for u in use.values()))
