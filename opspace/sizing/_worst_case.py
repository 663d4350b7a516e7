"""Worst arm poses for the drives and for tip-over, and the shortest safe stop.

The arm is held still at a pose q_a (with the rated payload, if described)
while the base goes through the duty cycle's most demanding instants: the
samples of each (payload, grade) group with the extreme forward acceleration,
yaw acceleration and lateral acceleration v ω.  Two searches over the arm's
joint limits:

1. maximise the peak wheel torque  max_k max_i |Q_i(q_a, instant k)|
   (inverse dynamics with friction and rolling resistance);
2. minimise the tip-over margin  min_k d(ZMP_k, support-polygon edge).

Each is a coarse grid (batch inverse dynamics for 1; for 2 the arm-locked
robot as one rigid body, below) refined by `scipy.optimize.minimize`
(Powell, bounded) on the exact figures (inverse dynamics; ground wrench from
the centroidal momentum rate).

Grid model for the margin (arm locked, base at the origin, heading 0): the base
origin accelerates at a_o = (a, v ω, 0) in base axes, so the COM c of the
composite body accelerates at

    c̈ = (a − α c_y − ω² c_x,  v ω + α c_x − ω² c_y,  0)

and the ground wrench is f = m (c̈ − g⃗),  n_o = I_G α⃗ + ω⃗ × I_G ω⃗ + c × f,
with ω⃗ = ω ẑ, α⃗ = α ẑ (Euler's equations for the composite body; the spin
momentum of the wheels is left out of the grid and kept in the refinement).
ZMP = (−n_y, n_x) / f_z (Sardain & Bessonnet 2004).

Shortest stop: from the cycle's top speed, on flat ground, arm at the worst
tip-over pose: the largest deceleration at which the ZMP stays inside the
support polygon and no drive wheel exceeds its friction, found by bisection on
the exact figures; time v/a and distance v²/(2a).
"""

from __future__ import annotations

import contextlib
import itertools
import math
from dataclasses import dataclass

import numpy as np
import pinocchio as pin
from scipy.optimize import minimize

from .._common import GRAVITY
from ..dynamics import inverse_dynamics, inverse_dynamics_batch
from ..stability import ground_wrench, stability_track, tyre_forces
from ..stability import zmp as zmp_of

__all__ = ["Instant", "StopFigures", "WorstPose", "critical_instants", "shortest_stop",
           "worst_poses"]


@dataclass(frozen=True)
class Instant:
    """A base motion state: v m/s, a m/s², omega rad/s, alpha rad/s², grade
    (rise/run), payload held, and the cycle time t s it was taken from."""

    v: float
    a: float
    omega: float
    alpha: float
    grade: float
    payload: bool
    t: float


def _pose_dict(names, units, q):
    return {n: {"value": float(v), "unit": u} for n, u, v in zip(names, units, q)}


@dataclass(frozen=True)
class WorstPose:
    """An arm pose found by the search: q (n_arm,) rad or m, the figure it
    reaches (N·m for the torque search, m for the margin search), the instant
    index that sets it, and the figure at the best grid point before refining."""

    objective: str
    q: np.ndarray
    value: float
    unit: str
    instant: int
    grid_value: float
    evaluations: int

    def to_dict(self, joint_names, units):
        return {"objective": self.objective, "pose": _pose_dict(joint_names, units, self.q),
                "value": {"value": self.value, "unit": self.unit},
                "grid_value": {"value": self.grid_value, "unit": self.unit},
                "instant": {"value": self.instant, "unit": "1"},
                "evaluations": {"value": self.evaluations, "unit": "1"}}


def critical_instants(ev):
    """The cycle's most demanding base states, per (payload, grade) group."""
    picks = {}
    lateral = ev.v * ev.omega
    for key in sorted({(bool(p), float(g)) for p, g in zip(ev.payload, ev.grade)}):
        m = np.flatnonzero((ev.payload == key[0]) & (ev.grade == key[1]))
        for series in (ev.a, -ev.a, ev.alpha, -ev.alpha, lateral, -lateral, np.abs(ev.v)):
            i = int(m[np.argmax(series[m])])
            picks[i] = Instant(float(ev.v[i]), float(ev.a[i]), float(ev.omega[i]),
                               float(ev.alpha[i]), key[1], key[0], float(ev.t[i]))
    return [picks[i] for i in sorted(picks)]


def _grid_axes(robot, levels):
    axes = []
    for k in range(robot.n_arm):
        lo, hi = robot.lower[k], robot.upper[k]
        lo, hi = (lo if math.isfinite(lo) else -math.pi), (hi if math.isfinite(hi) else math.pi)
        axes.append(np.linspace(lo, hi, levels[k]))
    return axes


def _levels(robot, budget):
    """Grid levels per joint: more on the proximal joints, within `budget` poses."""
    n = robot.n_arm
    levels = [3] * n
    k = 0
    while np.prod(levels) * 4 / 3 <= budget and k < n:
        levels[k] += 1
        k += 1
    return levels


def _states(robot, poses, instants):
    """Batch states: every pose × every instant (arm still)."""
    P, K = len(poses), len(instants)
    qs = robot.configurations(np.repeat(poses, K, axis=0))
    nu = np.zeros((P * K, robot.nv))
    nu_dot = np.zeros((P * K, robot.nv))
    v = np.array([i.v for i in instants]); w = np.array([i.omega for i in instants])
    a = np.array([i.a for i in instants]); al = np.array([i.alpha for i in instants])
    wr, wl = robot.wheel_rates(v, w)
    ar, arl = robot.wheel_rates(a, al)
    nu[:, 0], nu[:, 1] = np.tile(wr, P), np.tile(wl, P)
    nu_dot[:, 0], nu_dot[:, 1] = np.tile(ar, P), np.tile(arl, P)
    return qs, nu, nu_dot


@contextlib.contextmanager
def _held(robot):
    """The rated payload (if described) attached; payload and slope restored after."""
    with robot.kept():
        if robot.description.payload is not None:
            robot.attach_payload()
        yield robot


def _by_grade(instants):
    groups = {}
    for k, inst in enumerate(instants):
        groups.setdefault(inst.grade, []).append(k)
    return groups


def _peak_torque_batch(robot, poses, instants):
    """(P, K) peak |wheel torque| for every pose and instant."""
    P, K = len(poses), len(instants)
    out = np.empty((P, K))
    for grade, ks in _by_grade(instants).items():
        robot.set_ground_slope(math.atan(grade))
        sub = [instants[k] for k in ks]
        qs, nu, nu_dot = _states(robot, poses, sub)
        Q = inverse_dynamics_batch(robot, qs, nu, nu_dot)
        out[:, ks] = np.abs(Q[:, :2]).max(axis=1).reshape(P, len(ks))
    return out


def _margin_grid(robot, poses, instants, polygon):
    """(P, K) tip-over margin of the arm-locked composite body (module docstring)."""
    model, data = robot.model, robot.model.createData()
    P = len(poses)
    m = robot.total_mass()
    com, I_G = np.empty((P, 3)), np.empty((P, 3, 3))
    v0 = np.zeros(model.nv)
    for p, q in enumerate(robot.configurations(poses)):
        pin.ccrba(model, data, q, v0)
        com[p] = data.com[0]
        I_G[p] = data.Ig.inertia
    out = np.empty((P, len(instants)))
    for k, inst in enumerate(instants):
        th = math.atan(inst.grade)
        g_vec = np.array([-math.sin(th), 0.0, -math.cos(th)]) * GRAVITY
        w, al = inst.omega, inst.alpha
        acc = np.column_stack([inst.a - al * com[:, 1] - w * w * com[:, 0],
                               inst.v * w + al * com[:, 0] - w * w * com[:, 1], np.zeros(P)])
        f = m * (acc - g_vec)
        n_G = I_G[:, :, 2] * al + np.cross(np.array([0.0, 0.0, w]), I_G[:, :, 2] * w)
        n_o = n_G + np.cross(com, f)
        margin = polygon.margin(zmp_of(f, n_o, airborne="nan"))[0]
        out[:, k] = np.where(np.isfinite(margin), margin, -np.inf)     # airborne: the worst
    return out


def _exact_peak_torque(robot, qa, instants):
    worst, at = -np.inf, 0
    for grade, ks in _by_grade(instants).items():
        robot.set_ground_slope(math.atan(grade))
        qs, nu, nu_dot = _states(robot, qa[None], [instants[k] for k in ks])
        for j, k in enumerate(ks):
            Q = inverse_dynamics(robot, qs[j], nu[j], nu_dot[j])
            val = float(np.abs(Q[:2]).max())
            if val > worst:
                worst, at = val, k
    return worst, at


def _exact_margin(robot, qa, instants, polygon):
    worst, at = np.inf, 0
    for grade, ks in _by_grade(instants).items():
        robot.set_ground_slope(math.atan(grade))
        qs, nu, nu_dot = _states(robot, qa[None], [instants[k] for k in ks])
        w = ground_wrench(robot, qs, nu, nu_dot)
        margins = polygon.margin(zmp_of(w.force, w.moment, airborne="nan"))[0]
        margins = np.where(np.isfinite(margins), margins, -np.inf)
        j = int(np.argmin(margins))
        if margins[j] < worst:
            worst, at = float(margins[j]), ks[j]
    return worst, at


def _refine(fun, starts, lo, hi, max_evaluations):
    """Bounded Powell from each start; the best point seen, (x, f(x), evaluations).

    The objectives are a max/min over instants (kinks where the worst instant
    changes), so a start can beat the local search's end point: keep the best.
    """
    best_x, best_f, count = None, np.inf, 0
    for x0 in starts:
        f0 = float(fun(x0))
        res = minimize(fun, x0, method="Powell", bounds=list(zip(lo, hi)),
                       options={"maxfev": max_evaluations, "xtol": 1e-3, "ftol": 1e-6})
        x = np.clip(res.x, lo, hi)
        f = float(fun(x))
        count += int(res.nfev) + 2
        for xi, fi in ((x0, f0), (x, f)):
            if fi < best_f:
                best_x, best_f = np.array(xi, dtype=float), fi
    return best_x, best_f, count


def worst_poses(robot, instants, *, grid_budget=3000, max_evaluations=400, starts=3,
                progress=None):
    """The arm poses that maximise peak wheel torque and minimise the tip-over margin.

    Returns
    -------
    (WorstPose for "peak wheel torque", WorstPose for "tip-over margin")
    """
    from ..stability import support_polygon

    polygon = support_polygon(np.array([c.position for c in robot.contacts]))
    levels = _levels(robot, grid_budget)
    poses = np.array(list(itertools.product(*_grid_axes(robot, levels))))
    lo = np.where(np.isfinite(robot.lower), robot.lower, -math.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, math.pi)
    with _held(robot):
        torque = _peak_torque_batch(robot, poses, instants).max(axis=1)
        if progress:
            progress(1, 4)
        margin = _margin_grid(robot, poses, instants, polygon).min(axis=1)
        if progress:
            progress(2, 4)
        i_t, i_m = np.argsort(-torque)[:starts], np.argsort(margin)[:starts]
        x_t, f_t, n_t = _refine(lambda x: -_exact_peak_torque(robot, x, instants)[0],
                                poses[i_t], lo, hi, max_evaluations)
        if progress:
            progress(3, 4)
        x_m, f_m, n_m = _refine(lambda x: _exact_margin(robot, x, instants, polygon)[0],
                                poses[i_m], lo, hi, max_evaluations)
        if progress:
            progress(4, 4)
        grid_t = _exact_peak_torque(robot, poses[i_t[0]], instants)[0]
        grid_m = _exact_margin(robot, poses[i_m[0]], instants, polygon)[0]
        k_t = _exact_peak_torque(robot, x_t, instants)[1]
        k_m = _exact_margin(robot, x_m, instants, polygon)[1]
    return (WorstPose("peak wheel torque", x_t, -f_t, "N·m", k_t, grid_t, len(poses) + n_t),
            WorstPose("tip-over margin", x_m, f_m, "m", k_m, grid_m, len(poses) + n_m))


@dataclass(frozen=True)
class StopFigures:
    """Shortest stop from `speed` m/s: deceleration m/s², time s, distance m,
    what limits it ("tip-over" or "traction"), and the arm pose used."""

    speed: float
    deceleration: float
    time: float
    distance: float
    limited_by: str
    pose: np.ndarray

    def to_dict(self, joint_names, units):
        return {"speed": {"value": self.speed, "unit": "m/s"},
                "deceleration": {"value": self.deceleration, "unit": "m/s²"},
                "time": {"value": self.time, "unit": "s"},
                "distance": {"value": self.distance, "unit": "m"},
                "limited_by": self.limited_by,
                "pose": _pose_dict(joint_names, units, self.pose)}


def shortest_stop(robot, speed, q_arm, *, a_max=20.0, tol=1e-4):
    """Largest deceleration from `speed` keeping the ZMP inside and traction ≤ 1.

    Both drive wheels brake equally on flat ground, with the payload held (if
    described) and the arm still at `q_arm`; bisection on the deceleration.
    """
    def check(a):
        qs, nu, nu_dot = _states(robot, q_arm[None], [Instant(speed, -a, 0, 0, 0.0, True, 0.0)])
        Q = inverse_dynamics_batch(robot, qs, nu, nu_dot)
        F = tyre_forces(robot, qs, nu, nu_dot, Q)
        tr = stability_track(robot, qs, nu, nu_dot, F)
        tip_ok = tr.loads.supported[0] and tr.margin[0] >= 0
        lifted[0] = bool(tr.loads.lifted[0, :2].any())
        return tip_ok, bool(np.all(tr.traction[0] <= 1.0))

    lifted = [False]

    with _held(robot):
        robot.set_ground_slope(0.0)
        lo, hi = 0.0, a_max
        tip_ok, trac_ok = check(hi)
        if tip_ok and trac_ok:
            lo = hi
        while hi - lo > tol * max(1.0, hi) and not (tip_ok and trac_ok and lo == hi):
            mid = 0.5 * (lo + hi)
            tip_ok, trac_ok = check(mid)
            if tip_ok and trac_ok:
                lo = mid
            else:
                hi = mid
        tip_hi, _ = check(min(hi * (1 + 1e-3), a_max))
    limited = "tip-over" if not tip_hi else "traction"
    if lo == 0.0:
        # no deceleration keeps it upright and gripping (e.g. a drive wheel lifted
        # off already at rest): no stop figure, said so
        check(0.0)
        limited = "lift-off of a drive wheel" if lifted[0] else limited
        return StopFigures(speed=float(speed), deceleration=0.0, time=np.inf, distance=np.inf,
                           limited_by=limited, pose=np.asarray(q_arm))
    return StopFigures(speed=float(speed), deceleration=float(lo), time=speed / lo,
                       distance=speed**2 / (2 * lo), limited_by=limited, pose=np.asarray(q_arm))
