"""Static stability of the wheeled base: support polygon, ZMP, contact loads, margins.

Frames and signs
----------------
Every position is a point of the ground plane written in the base frame
(x forward, y left, z up, origin on the ground below the wheel-axle midpoint;
DESIGN.md).  A wrench (f, n) is the TOTAL ground reaction acting ON the robot,
expressed in the base frame, with its moment n taken about the base-frame
origin.  On flat ground z is the ground normal, so f_z > 0 while the robot
stands.

Equations
---------
Centre of pressure / zero-moment point on the plane z = h: the point p where the
moment of the ground reaction has no horizontal component (Sardain &
Bessonnet, "Forces acting on a biped robot. Center of pressure—zero moment
point", IEEE Trans. SMC-A 34(5), 2004).  From n_p = n − p × f with p = (p_x, p_y, h)::

    p_x = (h f_x − n_y) / f_z,      p_y = (h f_y + n_x) / f_z            (1)

Per-contact normal loads N (k,) must satisfy the equilibrium of the normal force
and of the two tilting moments::

    A N = f_z [1, c_x, c_y]ᵀ,      A = [[1 … 1], [x_1 … x_k], [y_1 … y_k]]   (2)

with c the centre of pressure.  Three non-collinear contacts make (2) square
(statically determinate); N / f_z are then the barycentric coordinates of c.
With more contacts the chassis is taken rigid on contacts of equal vertical
stiffness: the deflections lie on a plane, N_i = α + β x_i + γ y_i, which is the
minimum-norm solution N = A⁺ b of (2) (the rigid-cap pile-group formula
N_i = F/k + M_y x_i / Σx² + M_x y_i / Σy² about centroidal principal axes).
Contacts are unilateral: where the plane gives N_i < 0 the contact lifts, and
the loads are re-solved on the contacts left, so that the result is the unique
solution of  min ‖N‖² subject to (2), N ≥ 0  (its KKT conditions are
N_i = max(0, α + β x_i + γ y_i): no lifted contact would penetrate).  That
small problem is solved exactly as a least-distance program through NNLS
(Lawson & Hanson, Solving Least Squares Problems, 1974, ch. 23).

Tip-over and stopping (quasi-static, rigid robot)::

    θ_tip = atan(d / h)                                                 (3)
    a_tip = g d / h                                                     (4)
    a_trac = μ g ρ                       (no load transfer)             (5a)
    a_trac = μ g ρ / (1 + μ h / L)       (two contact lines)            (5b)
    t_stop = v / a,   s_stop = v² / (2 a),   a = min(a_tip, a_trac)     (6)

(3)-(4) are the static tip condition with d the horizontal distance from the
COM projection to the edge and h the COM height: the ZMP reaches the edge
(the quasi-static rollover threshold a/g = t / (2h) of Gillespie, Fundamentals
of Vehicle Dynamics, 1992, ch. 9, with d = t/2).  (5b) is the longitudinal load
transfer between two contact lines (Gillespie 1992, ch. 2-3), derived in
`stopping_limits`.  Chapter numbers and the Lawson & Hanson algorithm are
recalled from memory; every equation here is re-derived where it is used.

The lead's centroidal-momentum wrench function feeds `zmp` and `normal_loads`;
the functions here take plain arrays only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from scipy.optimize import nnls
from scipy.spatial import ConvexHull, QhullError

from .._common import real_array as _real

__all__ = [
    "ContactLoads",
    "SupportPolygon",
    "normal_loads",
    "support_polygon",
    "zmp",
]


# Relative tolerances on lengths normalised by the contact layout's size and on
# loads normalised by f_z.
_COLLINEAR_TOL = 1e-9
_INSIDE_TOL = 1e-12
_LOAD_TOL = 1e-12


# --------------------------------------------------------------------------- validation

def _points(name, x, dim):
    """A point (dim,) or points (n, dim), finite."""
    a = _real(name, x)
    if a.ndim not in (1, 2) or a.shape[-1] != dim:
        raise ValueError(f"`{name}` must have shape ({dim},) or (n, {dim}), got {a.shape}")
    return a


def _positive(name, x):
    a = _real(name, x)
    if np.any(a <= 0):
        raise ValueError(f"`{name}` must be > 0, got {x!r}")
    return a


def _scalar(name, x):
    a = _real(name, x)
    if a.shape != ():
        raise ValueError(f"`{name}` must be a scalar, got shape {a.shape}")
    return float(a)


def _out(a):
    """0-d arrays become floats; other arrays pass through."""
    return float(a) if np.ndim(a) == 0 else a


def _contacts(contacts_xy):
    P = _real("contacts_xy", contacts_xy)
    if P.ndim != 2 or P.shape[1] != 2:
        raise ValueError(f"`contacts_xy` must have shape (k, 2) with k >= 2 ground contact "
                         f"points (x, y) in m, got shape {P.shape}")
    if P.shape[0] < 2:
        raise ValueError(f"`contacts_xy` needs at least 2 contact points, got {P.shape[0]}")
    return P


def _layout(P):
    """Centroid, size and collinearity of a contact layout P (k, 2).

    Returns (c0, L, axis): L = largest distance from the centroid c0, and `axis`
    the unit direction of the line when the contacts are collinear, else None.
    """
    c0 = P.mean(axis=0)
    Q = P - c0
    L = float(np.max(np.linalg.norm(Q, axis=1)))
    if L == 0.0:
        raise ValueError(f"`contacts_xy`: all {len(P)} contact points coincide at {P[0]}; "
                         "a support needs at least 2 distinct points")
    _, s, Vt = np.linalg.svd(Q / L, full_matrices=False)
    collinear = s.size < 2 or s[1] <= _COLLINEAR_TOL * s[0]
    return c0, L, (Vt[0] if collinear else None)


# --------------------------------------------------------------------------- polygon

def _edge_distances(V, pts):
    """Distance of pts (n, 2) to each edge segment of the closed chain V (k, 2).

    Returns dist (n, k) and side (n, k) = e × (p − v_i), > 0 left of edge i
    (inside, for a counter-clockwise polygon).
    """
    e = np.roll(V, -1, axis=0) - V                          # (k, 2)
    w = pts[:, None, :] - V[None, :, :]                     # (n, k, 2)
    t = np.clip(np.einsum("nkj,kj->nk", w, e) / np.einsum("kj,kj->k", e, e), 0.0, 1.0)
    dist = np.linalg.norm(w - t[..., None] * e, axis=-1)
    side = e[:, 0] * w[..., 1] - e[:, 1] * w[..., 0]
    return dist, side


@dataclass(frozen=True, eq=False)
class SupportPolygon:
    """Convex support polygon of the ground contacts, in the base-frame ground plane.

    Attributes
    ----------
    vertices : ndarray, shape (k, 2)
        Corners, m, counter-clockwise, k >= 3; or k = 2 for the degenerate case
        of collinear contacts (the support is the segment between them).
    edges : ndarray, shape (k, 2, 2)
        Edge i runs from ``vertices[i]`` to ``vertices[(i + 1) % k]``.
    is_segment : bool
        True when the contacts are collinear (k = 2): no point is inside.
    """

    vertices: np.ndarray

    def __post_init__(self):
        V = np.array(_real("vertices", self.vertices), dtype=float)
        if V.ndim != 2 or V.shape[1] != 2 or V.shape[0] < 2:
            raise ValueError(f"`vertices` must have shape (k, 2) with k >= 2, got {V.shape}")
        size = float(np.max(np.linalg.norm(V - V.mean(axis=0), axis=1)))
        if size == 0.0:
            raise ValueError("`vertices` are all the same point")
        if V.shape[0] >= 3:
            e = np.roll(V, -1, axis=0) - V
            turn = e[:, 0] * np.roll(e, -1, axis=0)[:, 1] - e[:, 1] * np.roll(e, -1, axis=0)[:, 0]
            if np.any(turn <= -_COLLINEAR_TOL * size**2) or not np.any(turn > 0):
                raise ValueError("`vertices` must be a convex polygon in counter-clockwise "
                                 "order; build it with support_polygon(contacts_xy)")
        V.setflags(write=False)
        object.__setattr__(self, "vertices", V)

    @property
    def is_segment(self) -> bool:
        return self.vertices.shape[0] == 2

    @property
    def edges(self) -> np.ndarray:
        return np.stack([self.vertices, np.roll(self.vertices, -1, axis=0)], axis=1)

    @property
    def area(self) -> float:
        """Enclosed area, m² (shoelace formula); 0 for a segment."""
        x, y = self.vertices.T
        return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))

    def margin(self, p):
        """Signed distance from p to the nearest edge: > 0 inside, < 0 outside.

        Parameters
        ----------
        p : array_like, shape (2,) or (n, 2)
            Point(s) of the ground plane, m (typically the ZMP).

        Returns
        -------
        distance : float or ndarray, shape (n,)
            m; its magnitude is the Euclidean distance to the boundary.
        edge_index : int or ndarray of int, shape (n,)
            The nearest edge (see `edges`); the lowest index among ties
            (at a vertex, both adjacent edges are nearest).
        """
        if self.is_segment:
            raise ValueError("the support is a segment (the contacts are collinear), so no "
                             "point is inside it and a tip-over margin is undefined: the "
                             "robot needs a contact off the line (a caster) to stand")
        P = _points("p", p, 2)
        dist, side = _edge_distances(self.vertices, np.atleast_2d(P))
        i = np.argmin(dist, axis=1)
        d = dist[np.arange(len(i)), i]
        d = np.where(np.all(side >= 0.0, axis=1), d, -d)
        if P.ndim == 1:
            return float(d[0]), int(i[0])
        return d, i

    def to_dict(self) -> dict:
        return {"vertices": self.vertices.tolist(), "is_segment": self.is_segment,
                "area": self.area}


def support_polygon(contacts_xy) -> SupportPolygon:
    """Convex hull of the ground contact points, counter-clockwise.

    Computed with Qhull through `scipy.spatial.ConvexHull` (Barber, Dobkin &
    Huhdanpaa, "The Quickhull algorithm for convex hulls", ACM TOMS 22(4), 1996);
    contacts inside the hull or on an edge are not vertices.

    Parameters
    ----------
    contacts_xy : array_like, shape (k, 2)
        Contact points (x, y) in the base frame, m; k >= 2.

    Returns
    -------
    SupportPolygon
        For collinear contacts a degenerate one: its two extreme points, with
        ``is_segment`` True, on which `margin` raises a ValueError saying why.
    """
    P = _contacts(contacts_xy)
    key = P.tobytes() + bytes(P.shape)
    polygon = _POLYGONS.get(key)        # a robot's contacts are asked for again and again
    if polygon is None:
        polygon = _support_polygon(P)
        if len(_POLYGONS) >= 64:
            _POLYGONS.clear()
        _POLYGONS[key] = polygon         # frozen, read-only vertices: safe to share
    return polygon


_POLYGONS = {}


def _support_polygon(P):
    c0, _, axis = _layout(P)
    if axis is not None:
        t = (P - c0) @ axis
        return SupportPolygon(P[[np.argmin(t), np.argmax(t)]])
    try:
        hull = ConvexHull(P)
    except QhullError as exc:  # nearly collinear beyond the tolerance above
        raise ValueError(f"`contacts_xy`: Qhull could not build the hull of {P.tolist()}: "
                         f"{str(exc).splitlines()[0]}") from exc
    return SupportPolygon(P[hull.vertices])  # Qhull's 2-D vertices are counter-clockwise


# --------------------------------------------------------------------------- ZMP

def zmp(force, moment, *, height=0.0, airborne="raise"):
    """Zero-moment point (centre of pressure) of the ground reaction on z = height.

    p_x = (h f_x − n_y) / f_z,  p_y = (h f_y + n_x) / f_z   (eq. 1 of the module
    docstring; Sardain & Bessonnet, IEEE Trans. SMC-A 34(5), 2004: the point
    where the horizontal moment of the ground reaction vanishes).

    Parameters
    ----------
    force : array_like, shape (3,) or (n, 3)
        Total ground-reaction force f on the robot, base frame, N.
    moment : array_like, same shape as `force`
        Its moment n about the base-frame origin, base frame, N·m.
    height : float, keyword-only
        Height h of the plane, m (0: the ground).
    airborne : {"raise", "nan"}, keyword-only
        What to do where f_z <= 0 (no support: the ZMP is undefined):
        "raise" (default) raises a ValueError listing the instants;
        "nan" returns nan there (test with ``np.isnan(p[..., 0])``).

    Returns
    -------
    ndarray, shape (2,) or (n, 2)
        (p_x, p_y) in the base frame, m.
    """
    f = _points("force", force, 3)
    n = _points("moment", moment, 3)
    if n.shape != f.shape:
        raise ValueError(f"`moment` must have the shape of `force` {f.shape}, got {n.shape}")
    h = _scalar("height", height)
    if airborne not in ("raise", "nan"):
        raise ValueError(f"`airborne` must be 'raise' or 'nan', got {airborne!r}")
    f_x, f_y, f_z = np.moveaxis(f, -1, 0)
    n_x, n_y, _ = np.moveaxis(n, -1, 0)
    lifted = ~(f_z > 0.0)
    if airborne == "raise" and np.any(lifted):
        idx = np.flatnonzero(np.atleast_1d(lifted))
        raise ValueError(f"`force`: f_z <= 0 at instant(s) {idx[:10].tolist()}"
                         f"{' …' if idx.size > 10 else ''}: the robot is airborne there and "
                         "the ZMP is undefined (pass airborne='nan' to get nan instead)")
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.stack([(h * f_x - n_y) / f_z, (h * f_y + n_x) / f_z], axis=-1)
    p[lifted] = np.nan
    return p


# --------------------------------------------------------------------------- contact loads

@dataclass(frozen=True, eq=False)
class ContactLoads:
    """Normal loads of the ground contacts at one or many instants.

    Attributes
    ----------
    N : ndarray, shape (k,) or (n, k)
        Normal force at each contact, N, >= 0 (order of `contacts_xy`);
        nan where `supported` is False.
    lifted : ndarray of bool, same shape as N
        Contacts carrying no load (lifted off, or exactly at lift-off);
        False where `supported` is False.
    supported : bool ndarray, shape () or (n,)
        False where the centre of pressure is outside the support polygon
        (the robot tips: no distribution with N >= 0 exists).
    model : str
        The load-distribution model used.
    """

    N: np.ndarray
    lifted: np.ndarray
    supported: np.ndarray
    model: str

    def to_dict(self) -> dict:
        return {"N": np.asarray(self.N).tolist(), "lifted": np.asarray(self.lifted).tolist(),
                "supported": np.asarray(self.supported).tolist(), "model": self.model}


def _least_distance(Z, N0):
    """min ‖w‖ s.t. Z w >= −N0, by NNLS (Lawson & Hanson 1974, ch. 23, algorithm LDP).

    E = [Zᵀ; hᵀ], f = (0, …, 0, 1), u = argmin ‖E u − f‖ over u >= 0, r = E u − f,
    w = −r[:-1] / r[-1]; r = 0 means the constraints are incompatible (None).
    """
    E = np.vstack([Z.T, -N0[None, :]])
    f = np.zeros(E.shape[0])
    f[-1] = 1.0
    u, _ = nnls(E, f)
    r = E @ u - f
    if abs(r[-1]) <= 1e-14:
        return None
    return -r[:-1] / r[-1]


def _unilateral(A, Z, N0):
    """Unique min ‖N‖ s.t. A N = b, N >= 0, for N0 = A⁺ b (one instant, normalised)."""
    w = _least_distance(Z, N0)
    if w is None:
        return None
    N = np.maximum(N0 + Z @ w, 0.0)
    # Re-solve the plane on the loaded contacts: exact equilibrium, no NNLS round-off.
    on = N > 1e-9
    N_on, *_ = np.linalg.lstsq(A[:, on], A @ N0, rcond=None)  # A N0 = b when supported
    if np.all(N_on >= -_LOAD_TOL):
        N = np.zeros_like(N)
        N[on] = np.maximum(N_on, 0.0)
    return N


def normal_loads(contacts_xy, cop_xy, f_z) -> ContactLoads:
    """Normal load of each ground contact from the centre of pressure and f_z.

    Solves A N = f_z [1, c_x, c_y]ᵀ (eq. 2 of the module docstring) for N >= 0:

    * 3 non-collinear contacts: the exact, statically determinate solution.
    * 4 or more: rigid chassis on contacts of EQUAL vertical stiffness (model
      assumption: the chassis does not bend and every wheel/caster with its
      suspension has the same vertical spring rate), so the loads follow a
      plane of deflection N_i = α + β x_i + γ y_i, the minimum-norm statically
      admissible distribution.  A contact whose plane load would be negative
      lifts off (N_i = 0, ``lifted``) and the rest are re-solved; the result is
      the unique solution of min ‖N‖² s.t. A N = b, N >= 0.
    * collinear contacts: the lever rule along the line, supported only when
      the centre of pressure lies on the segment.

    Parameters
    ----------
    contacts_xy : array_like, shape (k, 2)
        Contact points in the base frame, m; k >= 2.
    cop_xy : array_like, shape (2,) or (n, 2)
        Centre of pressure (ZMP on the ground, see `zmp`), m.
    f_z : float or array_like, shape (n,)
        Total normal ground reaction, N, > 0.

    Returns
    -------
    ContactLoads
        N and lifted of shape (k,) for one instant, (n, k) for many.
    """
    P = _contacts(contacts_xy)
    cop = _points("cop_xy", cop_xy, 2)
    f_z = _real("f_z", f_z)
    if f_z.ndim > 1:
        raise ValueError(f"`f_z` must be a scalar or shape (n,), got {f_z.shape}")
    if np.any(f_z <= 0.0):
        idx = np.flatnonzero(np.atleast_1d(f_z <= 0.0))[:10].tolist()
        raise ValueError(f"`f_z` must be > 0 N (robot on the ground), got f_z <= 0 at {idx}")
    try:
        batch = np.broadcast_shapes(cop.shape[:-1], f_z.shape)
    except ValueError as exc:
        raise ValueError(f"`cop_xy` {cop.shape} and `f_z` {f_z.shape} describe different "
                         "numbers of instants") from exc
    k = P.shape[0]
    c0, L, axis = _layout(P)
    Pn = (P - c0) / L                                        # normalised layout
    C = np.broadcast_to((cop - c0) / L, batch + (2,)).reshape(-1, 2)
    A = np.vstack([np.ones(k), Pn.T])                        # (3, k)
    B = np.column_stack([np.ones(len(C)), C])                # (n, 3) = b / f_z

    U, s, Vt = np.linalg.svd(A)
    rank = int(np.sum(s > _COLLINEAR_TOL * s[0]))
    A_pinv = Vt[:rank].T @ (U[:, :rank] / s[:rank]).T        # (k, 3)
    Z = Vt[rank:].T                                          # null space of A, (k, k − rank)
    N0 = B @ A_pinv.T                                        # plane model, all contacts

    if axis is None:
        dist, side = _edge_distances(support_polygon(Pn).vertices, C)
        supported = np.all(side >= 0.0, axis=1) | (dist.min(axis=1) <= _INSIDE_TOL)
        model = ("statically determinate: 3 non-collinear contacts" if k == 3 else
                 "rigid chassis on unilateral contacts of equal vertical stiffness: plane "
                 "of deflection N_i = α + β x_i + γ y_i (minimum-norm N >= 0), lift-off "
                 "contacts dropped and the rest re-solved")
    else:
        dist, _ = _edge_distances(support_polygon(Pn).vertices, C)
        supported = dist.min(axis=1) <= _INSIDE_TOL
        model = ("collinear contacts: lever rule along the contact line (minimum-norm, "
                 "equal stiffness among the contacts on it)")

    N = np.full_like(N0, np.nan)
    fast = supported & np.all(N0 >= -_LOAD_TOL, axis=1)
    N[fast] = np.maximum(N0[fast], 0.0)
    for j in np.flatnonzero(supported & ~fast):              # lift-off: few instants
        Nj = _unilateral(A, Z, N0[j])
        if Nj is None:
            supported[j] = False
        else:
            N[j] = Nj
    lifted = supported[:, None] & (N <= _LOAD_TOL)
    N[lifted] = 0.0

    N = N.reshape(batch + (k,)) * np.asarray(f_z)[..., None]
    return ContactLoads(N=N, lifted=lifted.reshape(batch + (k,)),
                        supported=supported.reshape(batch), model=model)

