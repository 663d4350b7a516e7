"""Worst arm poses for the drives, tip-over and traction, and the shortest safe stop.

The arm is held still at a pose q_a (with the rated payload, if described)
while the base goes through the duty cycle's most demanding instants: the
samples of each (payload, grade) group with the extreme forward acceleration,
yaw acceleration and lateral acceleration v ω.  Three searches over the arm's
joint limits:

1. maximise the peak wheel torque  max_k max_i |τ_out,i(q_a, instant k)|
   (inverse dynamics with friction and rolling resistance; τ_out = Q − J_m G² φ̈,
   the gearbox output torque on the wheel without the described rotor, as in
   `cycle`);
2. minimise the tip-over margin  min_k d(ZMP_k, support-polygon edge);
3. maximise the traction use  max_k max_i |F_i| / (μ N_i)  (Coulomb friction).

Only physical poses count: a pose whose link origins (URDF joint origins that
move with the arm) or tool point lie below the floor (z < 0 in the base frame)
or inside the chassis volume (`footprint` box, 1 mm inside its faces) is left
out (`clearance`): checked on the moving joint origins, the tool point and
the corners and rim points of the URDF's <collision> boxes, cylinders and
spheres where given (meshes are not loaded); `WorstPose.geometry` says which.
The excluded count is reported.

Each search is a coarse grid (batch inverse dynamics for 1 and 3; for 2 the
arm-locked robot as one rigid body, below), then a global refinement on the
exact figures (inverse dynamics; ground wrench from the centroidal momentum
rate): SciPy's `differential_evolution` (Storn & Price, "Differential
evolution", J. Global Optimization 11, 1997), seeded with the best grid pose,
and a bounded Powell polish from its result and from the best grid poses
(multi-start); the best point seen is kept.  A non-physical pose costs a
penalty larger than any figure, growing with its depth into the floor or the
chassis, so the search stays among physical poses.

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
from scipy.optimize import differential_evolution, minimize

from ..dynamics import inverse_dynamics_batch
from ..errors import ModelError
from ..stability import ground_wrench, stability_track, tyre_forces
from ..stability import zmp as zmp_of

__all__ = ["ArmGeometry", "Instant", "StopFigures", "WorstPose", "arm_geometry", "clearance",
           "critical_instants", "shortest_stop", "worst_poses"]


@dataclass(frozen=True)
class Instant:
    """A base motion state: v m/s, a m/s², omega rad/s, alpha rad/s², grade
    (rise/run; `cross`: rise/run across, left side up > 0), payload held, and the cycle time t s it was taken from."""

    v: float
    a: float
    omega: float
    alpha: float
    grade: float
    payload: bool
    t: float
    cross: float = 0.0


def _pose_dict(names, units, q):
    return {n: {"value": float(v), "unit": u} for n, u, v in zip(names, units, q)}


@dataclass(frozen=True)
class WorstPose:
    """An arm pose found by the search: q (n_arm,) rad or m, the figure it
    reaches (N·m for the torque search, m for the margin search, dimensionless
    for traction use), the instant index that sets it, the figure at the best
    grid point before refining, the objective evaluations, and `excluded` the
    grid poses left out as non-physical (`clearance`)."""

    objective: str
    q: np.ndarray
    value: float
    unit: str
    instant: int
    grid_value: float
    evaluations: int
    excluded: int = 0
    geometry: str = ""

    def to_dict(self, joint_names, units):
        return {"objective": self.objective, "pose": _pose_dict(joint_names, units, self.q),
                "value": {"value": self.value, "unit": self.unit},
                "grid_value": {"value": self.grid_value, "unit": self.unit},
                "instant": {"value": self.instant, "unit": "1"},
                "evaluations": {"value": self.evaluations, "unit": "1"},
                "excluded_poses": {"value": self.excluded, "unit": "1"},
                "clearance_checked_on": self.geometry}


def critical_instants(ev):
    """The cycle's most demanding base states, per (payload, grade, cross grade) group."""
    picks = {}
    lateral = ev.v * ev.omega
    cross = ev.cross_grade if ev.cross_grade is not None else np.zeros_like(ev.grade)
    for key in sorted({(bool(p), float(g), float(c))
                       for p, g, c in zip(ev.payload, ev.grade, cross)}):
        m = np.flatnonzero((ev.payload == key[0]) & (ev.grade == key[1]) & (cross == key[2]))
        for series in (ev.a, -ev.a, ev.alpha, -ev.alpha, lateral, -lateral, np.abs(ev.v)):
            i = int(m[np.argmax(series[m])])
            picks[i] = Instant(float(ev.v[i]), float(ev.a[i]), float(ev.omega[i]),
                               float(ev.alpha[i]), key[1], key[0], float(ev.t[i]), key[2])
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
    """{(grade, cross grade): [instant indices]}."""
    groups = {}
    for k, inst in enumerate(instants):
        groups.setdefault((inst.grade, inst.cross), []).append(k)
    return groups


def _grouped_states(robot, poses, instants):
    """Per (grade, cross grade) group of instants, with gravity tilted for it:
    (instant indices, then the batch states of every pose × those instants)."""
    for key, ks in _by_grade(instants).items():
        tilt(robot, *key)
        yield (ks, *_states(robot, poses, [instants[k] for k in ks]))


def tilt(robot, grade, cross=0.0):
    """Gravity of a ground that rises `grade` (rise/run) along the robot's
    forward axis and `cross` along its left axis (`set_ground_slope`)."""
    robot.set_ground_slope(math.atan(grade), math.atan(cross))


def _inverse_dynamics(robot, qs, nu, nu_dot):
    """`inverse_dynamics_batch`, on one thread for the small batches of the
    refinement (OpenMP start-up and spin-waits cost more than they save there)."""
    return inverse_dynamics_batch(robot, qs, nu, nu_dot, threads=1 if len(qs) < 2000 else None)


def _peak_torque_batch(robot, poses, instants):
    """(P, K) peak wheel torque for every pose and instant, N·m: the larger
    |τ_out,i| = |Q_i − J_m G² φ̈_i| of the two drive wheels, the torque the
    gearbox output delivers to the wheel with the described rotor's reflected
    inertia removed (the definition of `cycle`, used everywhere)."""
    P, K = len(poses), len(instants)
    out = np.empty((P, K))
    for ks, qs, nu, nu_dot in _grouped_states(robot, poses, instants):
        Q = _inverse_dynamics(robot, qs, nu, nu_dot)
        tau_out = Q[:, :2] - robot.description.drive.reflected_inertia * nu_dot[:, :2]
        out[:, ks] = np.abs(tau_out).max(axis=1).reshape(P, len(ks))
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
        tilt(robot, inst.grade, inst.cross)
        g_vec = robot.model.gravity.linear.copy()
        w, al = inst.omega, inst.alpha
        acc = np.column_stack([inst.a - al * com[:, 1] - w * w * com[:, 0],
                               inst.v * w + al * com[:, 0] - w * w * com[:, 1], np.zeros(P)])
        f = m * (acc - g_vec)
        n_G = I_G[:, :, 2] * al + np.cross(np.array([0.0, 0.0, w]), I_G[:, :, 2] * w)
        n_o = n_G + np.cross(com, f)
        margin = polygon.margin(zmp_of(f, n_o, airborne="nan"))[0]
        out[:, k] = np.where(np.isfinite(margin), margin, -np.inf)     # airborne: the worst
    return out


def _margin_batch(robot, poses, instants, polygon):
    """(P, K) exact tip-over margin, m: ZMP of the ground wrench (centroidal
    momentum rate) to the nearest support edge; −inf when the robot is airborne."""
    P, K = len(poses), len(instants)
    out = np.empty((P, K))
    for ks, qs, nu, nu_dot in _grouped_states(robot, poses, instants):
        w = ground_wrench(robot, qs, nu, nu_dot)
        m = polygon.margin(zmp_of(w.force, w.moment, airborne="nan"))[0]
        out[:, ks] = np.where(np.isfinite(m), m, -np.inf).reshape(P, len(ks))
    return out


LIFTED_USE = 10.0   # traction use counted for a drive wheel without load (N = 0)


def _traction_batch(robot, poses, instants):
    """(P, K) highest traction use of the two drive wheels, pose × instant.

    A drive wheel that has lifted (N = 0, use infinite) counts as LIFTED_USE,
    so that the search can rank such poses."""
    P, K = len(poses), len(instants)
    out = np.empty((P, K))
    for ks, qs, nu, nu_dot in _grouped_states(robot, poses, instants):
        Q = _inverse_dynamics(robot, qs, nu, nu_dot)
        F = tyre_forces(robot, qs, nu, nu_dot, Q)
        use = stability_track(robot, qs, nu, nu_dot, F).traction
        use = np.where(np.isfinite(use), np.minimum(use, LIFTED_USE), LIFTED_USE)
        out[:, ks] = use.max(axis=1).reshape(P, len(ks))
    return out


def clearance(robot, poses, *, inset=1e-3, geometry=None):
    """Depth (P,) m of each arm pose into the floor or the chassis; 0 = physical.

    Checked points (`geometry`, default `arm_geometry(robot)`): the arm's joint
    origins that move with the arm (the mount and the first joint's origin are
    fixed to the chassis), the tool point and, where the URDF gives them, the
    corners and rim points of the <collision> boxes, cylinders and spheres of
    the links that move with the arm; in the base frame with the base on flat
    ground.  Floor: depth −z where z < 0 (a sphere: its lowest point).
    Chassis: the description's `footprint` box [x_min, x_max] × [y_min, y_max]
    × [0, height], shrunk by `inset` m on every face; the depth of a point
    inside is its distance to the nearest face (none without a footprint).
    Returns the largest depth over the points.
    """
    geometry = arm_geometry(robot) if geometry is None else geometry
    fp = robot.description.base.footprint
    out = np.zeros(len(poses))
    for p, q in enumerate(robot.configurations(np.atleast_2d(poses))):
        pts = robot.arm_points(q)[2:]          # also updates robot.data.oMf
        low = []
        for fid, local, radius in geometry.shapes:
            X = robot.data.oMf[fid]
            world = local @ X.rotation.T + X.translation
            pts = np.vstack([pts, world])
            if radius:
                low.append(world[0, 2] - radius)  # a sphere's lowest point (row 0: centre)
        depth = np.maximum(-pts[:, 2], 0.0)
        if low:
            depth = np.append(depth, np.maximum(-np.array(low), 0.0))
        if fp is not None:
            x0, x1, y0, y1, h = fp
            faces = np.column_stack([pts[:, 0] - x0, x1 - pts[:, 0], pts[:, 1] - y0,
                                     y1 - pts[:, 1], h - pts[:, 2]]) - inset
            inside = np.all(faces > 0.0, axis=1) & (pts[:, 2] >= 0.0)
            depth = np.append(depth, np.where(inside, faces.min(axis=1), 0.0))
        out[p] = depth.max()
    return out


@dataclass(frozen=True)
class ArmGeometry:
    """What `clearance` checks: shapes ((frame id, points (k, 3) in the link
    frame, sphere radius or 0), ...) and `used`, in words."""

    shapes: tuple
    used: str


def _shape_points(shape):
    """Sample points of a URDF shape in its own frame (rows), and a sphere's radius."""
    import itertools as it
    if shape.kind == "box":
        h = np.array(shape.size) / 2
        return np.array(list(it.product(*[(-v, v) for v in h]))), 0.0
    if shape.kind == "cylinder":
        r, L = shape.size
        a = np.linspace(0.0, 2 * np.pi, 12, endpoint=False)
        rim = np.column_stack([r * np.cos(a), r * np.sin(a)])
        return np.vstack([np.column_stack([rim, np.full(12, z)]) for z in (-L / 2, L / 2)]), 0.0
    r = shape.size[0]
    return np.vstack([np.zeros(3), r * np.eye(3), -r * np.eye(3)]), r


def arm_geometry(robot):
    """The collision geometry of the arm's moving links (boxes, cylinders,
    spheres of the URDF's <collision> elements; meshes are not loaded), with
    what was used in words."""
    from ..description import read_shapes

    d = robot.description
    found = read_shapes(d.arm_urdf, sources=("collision",))
    first_arm_joint = robot.model.getJointId(robot.arm_joint_names[0]) if robot.n_arm else 0
    shapes, skipped = [], 0
    for sh in found.shapes:
        if sh.kind == "mesh" or not robot.model.existFrame(sh.link):
            skipped += 1
            continue
        fid = robot.model.getFrameId(sh.link)
        if robot.model.frames[fid].parentJoint < first_arm_joint:
            continue                                     # fixed to the chassis
        local, radius = _shape_points(sh)
        X = pin.SE3(pin.rpy.rpyToMatrix(np.array(sh.rpy)), np.array(sh.xyz))
        shapes.append((fid, local @ X.rotation.T + X.translation, radius))
    used = "the moving joint origins and the tool point"
    if shapes:
        used += (f", and {len(shapes)} URDF collision shapes (box, cylinder, sphere) of the "
                 f"moving links")
    else:
        used += " (no usable URDF collision shapes on the moving links)"
    if skipped:
        used += f"; {skipped} collision meshes or unknown links not used"
    return ArmGeometry(tuple(shapes), used)


PENALTY = 1e6   # objective of a non-physical pose (plus its depth, m), above any figure


def _objective(robot, batch, sign, geometry=None):
    """sign × figure of poses (P, n) from the (P, K) `batch` reduced over the
    instants (max for sign −1, min for sign +1); PENALTY + depth for the
    non-physical poses (module docstring).  Takes x of shape (n,) or (n, S)
    (SciPy's vectorised layout)."""
    def f(x):
        x = np.asarray(x, dtype=float)
        poses = x[None] if x.ndim == 1 else x.T
        depth = clearance(robot, poses, geometry=geometry)
        val = np.full(len(poses), PENALTY) + depth
        ok = depth == 0.0
        if ok.any():
            val[ok] = (sign * batch(poses[ok])).min(axis=1)
        return float(val[0]) if x.ndim == 1 else val
    return f


def _refine(fun, seeds, lo, hi, *, max_evaluations, generations, seed=0):
    """Global then local: differential evolution (vectorised: one batch per
    generation) whose first population holds the best grid poses `seeds` (in
    order, up to half of it) and Latin-hypercube samples, then a bounded Powell
    polish from its best member (module docstring).

    Returns the best point seen, (x, f(x), evaluations).
    """
    n = len(lo)
    size = max(8 * n, 10)
    rng = np.random.default_rng(seed)
    cells = (np.argsort(rng.random((size, n)), axis=0) + rng.random((size, n))) / size
    init = lo + cells * (hi - lo)                           # Latin hypercube
    k = min(len(seeds), size // 2)
    init[:k] = seeds[:k]
    x0, count = np.array(seeds[0], dtype=float), 0
    if generations > 0:
        de = differential_evolution(fun, list(zip(lo, hi)), init=init, seed=seed,
                                    maxiter=generations, tol=1e-8, polish=False,
                                    vectorized=True, updating="deferred")
        x0, count = de.x, int(de.nfev)
    res = minimize(fun, x0, method="Powell", bounds=list(zip(lo, hi)),
                   options={"maxfev": max_evaluations, "xtol": 1e-5, "ftol": 1e-10})
    x = np.clip(res.x, lo, hi)
    best = min(((float(fun(x0)), 0, x0), (float(fun(x)), 1, x)), key=lambda p: p[:2])
    return np.array(best[2], dtype=float), best[0], count + int(res.nfev) + 2


def worst_poses(robot, instants, *, grid_budget=3000, max_evaluations=60, seeds=20,
                generations=25, progress=None):
    """The physical arm poses with the highest peak wheel torque, the least
    tip-over margin and the highest traction use over `instants`.

    Parameters
    ----------
    robot : MobileManipulator
    instants : sequence of Instant (base states; the arm is held still)
    grid_budget : int          poses of the coarse grid (about)
    max_evaluations : int      of the Powell polish
    seeds : int                best grid poses in the first population
    generations : int          differential-evolution generations (0: none)
    progress : callable(done, total) or None

    Returns
    -------
    (WorstPose "peak wheel torque", WorstPose "tip-over margin",
     WorstPose "traction use"), each with `excluded` the grid poses left out
    as non-physical.

    Raises
    ------
    ModelError   when no pose of the grid is physical
    """
    from ..stability import support_polygon

    polygon = support_polygon(np.array([c.position for c in robot.contacts]))
    levels = _levels(robot, grid_budget)
    poses = np.array(list(itertools.product(*_grid_axes(robot, levels))))
    geometry = arm_geometry(robot)
    ok = clearance(robot, poses, geometry=geometry) == 0.0
    if not ok.any():
        raise ModelError(f"{robot.name}: every arm pose of the search grid puts a joint origin or "
                         f"the tool below the floor or inside the chassis footprint")
    excluded = int((~ok).sum())
    poses = poses[ok]
    lo = np.where(np.isfinite(robot.lower), robot.lower, -math.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, math.pi)
    tick = progress or (lambda done, total: None)
    searches = (   # name, unit, sign (−1: maximise), grid (P,), exact (P, K)
        ("peak wheel torque", "N·m", -1.0,
         lambda: _peak_torque_batch(robot, poses, instants).max(axis=1),
         lambda x: _peak_torque_batch(robot, x, instants)),
        ("tip-over margin", "m", 1.0,
         lambda: _margin_grid(robot, poses, instants, polygon).min(axis=1),
         lambda x: _margin_batch(robot, x, instants, polygon)),
        ("traction use", "1", -1.0,
         lambda: _traction_batch(robot, poses, instants).max(axis=1),
         lambda x: _traction_batch(robot, x, instants)),
    )
    found = []
    with _held(robot):
        for n, (name, unit, sign, grid, exact) in enumerate(searches):
            best = np.argsort(sign * grid())[:seeds]
            x, f, count = _refine(_objective(robot, exact, sign, geometry), poses[best], lo, hi,
                                  max_evaluations=max_evaluations, generations=generations)
            row = sign * exact(np.vstack([x, poses[best[0]]]))
            k = int(np.argmin(row[0]))
            found.append(WorstPose(name, x, sign * float(row[0, k]), unit, k,
                                   sign * float(row[1].min()), len(poses) + count, excluded,
                                   geometry.used))
            tick(n + 1, len(searches))
    return tuple(found)


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
        Q = _inverse_dynamics(robot, qs, nu, nu_dot)
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
