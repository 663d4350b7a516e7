"""Contact points along a motion, over the arm's workspace, and the heaviest pose.

Along a motion (a duty cycle's samples or a simulation's record) each contact
point's speed |v_P| is compared with its permissible speed for the effective
mass along its own direction of motion (`_points.effective_masses`): the
speed use |v_P| / v_max, and the margin 1 − use.  A use above 1 is an
exceedance.

Maps: arm configurations are sampled over the joint limits (a scrambled
Halton sequence), the point's position (base frame, base at rest) and
its permissible speed along a chosen base-frame direction are binned on a
grid of a top view (x, y) or a side view (x, z); each cell holds the LOWEST
permissible speed of the configurations that put the point there (the rule is
conservative over the arm's self-motion).

The heaviest pose: the arm configuration of largest whole-body effective mass
along a direction, by the best of the Halton samples refined with bounded
L-BFGS-B (SciPy).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._points import along_motion_all, effective_masses, mass_along, point_position

__all__ = ["ContactTrack", "SpeedMap", "contact_track", "heaviest_pose", "speed_map"]


@dataclass(frozen=True, eq=False)
class ContactTrack:
    """Contact points over a motion (n samples, k points).

    t (n,) s; names (k,); speed, mass, v_max (n, k) m/s, kg, m/s along each
    point's motion (v_max nan where no body region is at the point's height or
    the point is at rest); region (n, k) names ("" where none); use (n, k) =
    speed / v_max (0 at rest, nan without a region).  `worst` lists per point
    the instant of highest use.
    """

    t: np.ndarray
    names: tuple
    speed: np.ndarray
    mass: np.ndarray
    v_max: np.ndarray
    region: np.ndarray
    use: np.ndarray

    @property
    def status(self):
        """"within" or "exceeded" (a use above 1 somewhere)."""
        return "exceeded" if np.nanmax(self.use, initial=0.0) > 1.0 else "within"

    def worst(self):
        """Per point: dict of name, time s, use, speed m/s, v_max m/s, mass kg, region
        (use inf where the region permits no transient contact; all None for a
        point never evaluated against a region)."""
        rows = []
        for j, name in enumerate(self.names):
            col = np.where(np.isnan(self.use[:, j]), -1.0, self.use[:, j])
            i = int(np.argmax(col))
            if col[i] < 0.0:
                rows.append({"name": name, "time": None, "use": None, "speed": None,
                             "v_max": None, "mass": None, "region": None})
                continue
            rows.append({"name": name, "time": float(self.t[i]), "use": float(self.use[i, j]),
                         "speed": float(self.speed[i, j]), "v_max": float(self.v_max[i, j]),
                         "mass": float(self.mass[i, j]), "region": str(self.region[i, j])})
        return rows

    def to_dict(self):
        worst = []
        for w in self.worst():
            note = ("transient contact not permitted for this region"
                    if w["use"] is not None and math.isinf(w["use"]) else None)
            worst.append({k: (_num(v) if isinstance(v, float) else v) for k, v in w.items()}
                         | {"note": note})
        return {"status": self.status, "worst": worst,
                "units": {"time": "s", "speed": "m/s", "v_max": "m/s", "mass": "kg"}}


def _num(x):
    """A finite float, else None (JSON holds no infinities)."""
    return float(x) if x is not None and math.isfinite(x) else None


def contact_track(robot, qs, nu, points, regions, *, t, payload_flags=None, payload=None,
                  max_samples=1500):
    """Speeds of the contact points against their permissible speeds over a motion.

    Parameters
    ----------
    qs : (n, nq);  nu : (n, nv);  t : (n,) s
    points : sequence of ContactPointSpec;  regions : RegionTable
    payload_flags : (n,) bool or None   samples in which `payload` is held
    payload : Payload or None
    max_samples : evaluate at most this many samples (evenly thinned, the
        last always kept); the cycle's peaks of smooth profiles survive it

    Returns
    -------
    ContactTrack
    """
    qs, nu, t = np.asarray(qs, float), np.asarray(nu, float), np.asarray(t, float)
    n = len(t)
    idx = np.unique(np.linspace(0, n - 1, min(n, max_samples)).round().astype(int))
    flags = (np.zeros(n, bool) if payload_flags is None
             else np.asarray(payload_flags, bool))
    k = len(points)
    shape = (len(idx), k)
    speed, mass = np.zeros(shape), np.full(shape, np.nan)
    v_max, use = np.full(shape, np.nan), np.full(shape, np.nan)
    region = np.full(shape, "", dtype=object)
    with robot.kept():
        for held in (False, True):
            rows = np.nonzero(flags[idx] == held)[0]
            if len(rows) == 0:
                continue
            if held and payload is not None:
                robot.attach_payload(payload)
            else:
                robot.detach_payload()
            for i in rows:
                s = idx[i]
                found = along_motion_all(robot, qs[s], nu[s], points, regions)
                for j, (v, m, reg, vm) in enumerate(found):
                    speed[i, j], mass[i, j] = v, m
                    region[i, j] = reg.name if reg is not None else ""
                    if v <= 1e-9:
                        use[i, j] = 0.0 if reg is not None else np.nan
                    elif vm is not None:
                        v_max[i, j] = vm
                        use[i, j] = v / vm if vm > 0 else np.inf
    return ContactTrack(t[idx], tuple(p.name for p in points), speed, mass, v_max, region, use)


@dataclass(frozen=True, eq=False)
class SpeedMap:
    """Lowest permissible speed of a point over a grid of its positions.

    view "top" (x, y) or "side" (x, z), base frame; edges_a, edges_b (cells+1,)
    m; v_max (na, nb) m/s (nan: no sample reached the cell, or no region);
    region: the rule ("height" or a region name); direction (3,) base frame;
    samples: configurations evaluated.
    """

    point: str
    view: str
    edges_a: np.ndarray
    edges_b: np.ndarray
    v_max: np.ndarray
    region: str
    direction: tuple
    samples: int

    def to_dict(self):
        return {"point": self.point, "view": self.view, "edges_a": self.edges_a.tolist(),
                "edges_b": self.edges_b.tolist(), "region": self.region,
                "direction": list(self.direction), "samples": self.samples,
                "v_max": [[_num(x) for x in row] for row in self.v_max], "units": "m/s"}


def _arm_bounds(robot):
    lo = np.where(np.isfinite(robot.lower), robot.lower, -math.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, math.pi)
    return lo, hi


_PRIMES = (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53, 59, 61, 67, 71)


def _radical_inverse(i, base):
    """Van der Corput radical inverse of the integers i (array) in `base`."""
    out, f = np.zeros(len(i)), 1.0 / base
    i = i.copy()
    while np.any(i > 0):
        out += f * (i % base)
        i //= base
        f /= base
    return out


def _halton(robot, samples, seed):
    """Arm configurations over the joint limits: a Halton sequence (one prime
    base per joint; Halton, Numerische Mathematik 2, 1960) shifted by a seeded
    random offset modulo 1 (a Cranley-Patterson rotation).  Written here because
    importing scipy.stats costs about a second."""
    lo, hi = _arm_bounds(robot)
    n = robot.n_arm
    if n > len(_PRIMES):
        u = np.random.default_rng(seed).random((samples, n))
    else:
        i = np.arange(1, samples + 1)
        u = np.column_stack([_radical_inverse(i, b) for b in _PRIMES[:n]])
        u = (u + np.random.default_rng(seed).random(n)) % 1.0
    return lo + u * (hi - lo)


def speed_map(robot, spec, regions, *, view="top", direction=(1.0, 0.0, 0.0), samples=2000,
              cell=0.1, seed=0):
    """Map of the lowest permissible speed of a contact point (see module docstring).

    Returns
    -------
    SpeedMap
    """
    if view not in ("top", "side"):
        raise ValueError(f"`view` must be 'top' or 'side', got {view!r}")
    if not cell > 0:
        raise ValueError(f"`cell` must be > 0 m, got {cell}")
    arms = _halton(robot, int(samples), seed)
    b = 1 if view == "top" else 2
    pos, vel = np.empty((len(arms), 2)), np.full(len(arms), np.nan)
    for i, a in enumerate(arms):
        pm = effective_masses(robot, robot.configuration(arm=a), spec, direction=direction,
                              regions=regions)
        pos[i] = pm.position[0], pm.position[b]
        if pm.v_whole_body is not None:
            vel[i] = pm.v_whole_body
    edges = [np.arange(math.floor(pos[:, c].min() / cell), math.ceil(pos[:, c].max() / cell) + 1)
             * cell for c in (0, 1)]
    edges = [e if len(e) > 1 else np.array([e[0], e[0] + cell]) for e in edges]
    ia = np.clip(np.searchsorted(edges[0], pos[:, 0], "right") - 1, 0, len(edges[0]) - 2)
    ib = np.clip(np.searchsorted(edges[1], pos[:, 1], "right") - 1, 0, len(edges[1]) - 2)
    grid = np.full((len(edges[0]) - 1, len(edges[1]) - 1), np.inf)
    ok = np.isfinite(vel)
    np.minimum.at(grid, (ia[ok], ib[ok]), vel[ok])
    grid[np.isinf(grid)] = np.nan
    return SpeedMap(spec.name, view, edges[0], edges[1], grid, spec.region or "height",
                    tuple(float(x) for x in direction), len(arms))


def heaviest_pose(robot, spec, *, direction=(1.0, 0.0, 0.0), samples=96, seed=0, starts=2):
    """Arm configuration of largest whole-body effective mass of a point along a
    base-frame direction, and that mass (kg).  Configurations that put the
    point below the floor are not physical and are skipped.

    Returns
    -------
    (q_arm (n_arm,), mass kg)
    """
    from scipy.optimize import minimize

    lo, hi = _arm_bounds(robot)

    def objective(a):
        q = robot.configuration(arm=a)
        if point_position(robot, q, spec)[0][2] < 0.0:
            return 0.0
        m = mass_along(robot, q, spec, direction)
        return -m if math.isfinite(m) else 0.0

    arms = _halton(robot, int(samples), seed)
    values = np.array([objective(a) for a in arms])
    best_a, best_f = arms[int(np.argmin(values))], float(values.min())
    for i in np.argsort(values)[:starts]:
        res = minimize(objective, arms[i], method="L-BFGS-B", bounds=list(zip(lo, hi)),
                       options={"maxiter": 30, "maxfun": 200})
        if res.fun < best_f:
            best_a, best_f = np.clip(res.x, lo, hi), float(res.fun)
    return best_a, -best_f
