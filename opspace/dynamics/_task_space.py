"""Task-space (operational-space) dynamics in reduced coordinates.

For a frame with task Jacobian J (rows [linear; angular], world-aligned at the
frame origin, `pinocchio.LOCAL_WORLD_ALIGNED`, reduced by J = J_pin S) the
task coordinates obey, with M ν̇ + c + g = Q and Q = Jᵀ F,

    Λ(q) ẍ + μ(q, ν) + p(q) = F

    Λ = (J M⁻¹ Jᵀ)⁻¹                 task-space inertia, kg (linear rows) / kg·m²
    J̄ = M⁻¹ Jᵀ Λ                     dynamically consistent generalized inverse
    μ = Λ (J M⁻¹ c − J̇ν)             Coriolis / centrifugal task force
    p = Λ J M⁻¹ g                     gravity task force
    N = I − J̄ J                       null-space projector (Nᵀ acts on efforts)

(Khatib 1987, "A unified approach for motion and force control of robot
manipulators: the operational space formulation", IEEE J. Robotics and
Automation 3(1).)  J̇ν is the classical acceleration of the frame origin (and
the angular acceleration) at zero ν̇.  When J is square and regular,
Λ = J⁻ᵀ M J⁻¹, μ = J⁻ᵀ c − Λ J̇ν, p = J⁻ᵀ g (`cartesian_task_space`).

Two choices of the task coordinates' mobility (`base`):

- ``"whole_body"``: every reduced coordinate (both wheels and the arm) takes
  part; J is (k, nv).
- ``"locked"``: arm-only task space; the wheels are held by their own servo
  and the base is a moving support.  With ν = (ν_w, ν_a) and the task
  acceleration ẍ = J ν̇_a + J_base ν̇_w + J̇ν (J = the arm columns, J_base the
  wheel columns, J̇ν at the full ν, so the base velocity is included), the arm
  rows of the dynamics M_aa ν̇_a + M_aw ν̇_w + c_a + g_a = Q_a give, for a
  prescribed wheel acceleration ν̇_w,

      F = Λ ẍ + μ + p + Γ ν̇_w,     Γ = Λ (J M_aa⁻¹ M_aw − J_base)

  with Λ, μ, p, J̄, N formed from M_aa, c_a, g_a (the arm rows of the
  whole-body c and g: the Coriolis and centrifugal efforts of the base's
  motion are in c_a).  Γ (`coupling`) is the task force per unit wheel
  acceleration that a controller adds to carry the arm along with the base.

Near a singularity J M⁻¹ Jᵀ loses rank.  Write J M⁻¹ Jᵀ = U diag(σᵢ²) Uᵀ:
the σᵢ are the singular values of the inertia-weighted Jacobian J M^(-1/2)
and 1/σᵢ² are the principal task masses.  When σ_min < ε (`damping`, in
1/√kg for linear rows; the angular rows share the number in 1/√(kg·m²)), the
inverse is damped (damped least squares with a variable damping factor,
Chiaverini, Siciliano & Egeland 1994, IEEE Trans. Control Systems Technology
2(2); recalled from memory):

    Λ = U diag(1 / (σᵢ² + λ²)) Uᵀ,    λ² = ε² − σ_min²  (i.e. λ_max = ε)

so the damping is zero at σ_min = ε (Λ is continuous), and a damped Λ has its
largest principal mass exactly 1/ε² (default ε = 0.05: 400 kg).  Above the
threshold the result is exactly the undamped one.  The result says whether it
was damped.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import pinocchio as pin
from scipy.linalg import lapack

from ..errors import ModelError
from .._common import as_vector as _vec
from ._terms import frame_terms, mass_and_jacobian
from ._terms import solve_spd as _solve_spd

__all__ = [
    "AXIS_NAMES",
    "DEFAULT_DAMPING",
    "InertiaEllipsoid",
    "TaskSpaceTerms",
    "cartesian_task_space",
    "effective_mass",
    "inertia_ellipsoid",
    "task_space",
]

#: names of the six task rows: linear x, y, z then angular about x, y, z (world axes)
AXIS_NAMES = ("x", "y", "z", "rx", "ry", "rz")
#: default threshold ε on the smallest singular value of J M^(-1/2), 1/√kg
DEFAULT_DAMPING = 0.05

_LWA = pin.LOCAL_WORLD_ALIGNED
_WORLD = pin.Convention.WORLD
_BASES = ("whole_body", "locked")


# ------------------------------------------------------------------ results
@dataclass(frozen=True, eq=False)
class TaskSpaceTerms:
    """Operational-space terms of one frame at (q, ν).

    n is robot.nv for ``base="whole_body"`` and robot.n_arm for ``"locked"``;
    k the number of task rows (`axes`).  Units by row: linear rows m, N, kg;
    angular rows rad, N·m, kg·m² (products mixed accordingly).

    J : ndarray (k, n)          task Jacobian, [linear; angular] rows, world-aligned
    Jdot_nu : ndarray (k,)      J̇ν, m/s² or rad/s² (classical acceleration at ν̇ = 0)
    Lambda : ndarray (k, k)     task-space inertia Λ (damped if `damped`)
    Lambda_inv : ndarray (k, k) J M⁻¹ Jᵀ (never damped), 1/kg or 1/(kg·m²)
    mu : ndarray (k,)           Λ (J M⁻¹ c − J̇ν), N or N·m
    p : ndarray (k,)            Λ J M⁻¹ g, N or N·m
    Jbar : ndarray (n, k)       M⁻¹ Jᵀ Λ
    damped : bool               the damped inverse was used (σ_min < `threshold`)
    threshold : float           ε, 1/√kg (0: no damping)
    J_base : ndarray (k, 2) or None   wheel columns of the whole-body J (locked only)
    coupling : ndarray (k, 2) or None Γ = Λ (J M_aa⁻¹ M_aw − J_base), N per rad/s² (locked)
    frame : str, axes : tuple[str], base : str   what the terms describe

    Derived (computed on first access): N (n, n) = I − J̄ J; sigma_min (the
    smallest singular value of J M^(-1/2)); condition (σ_max / σ_min of J, 2-norm,
    inf if rank-deficient); manipulability sqrt(det(J Jᵀ)) (Yoshikawa 1985,
    IJRR 4(2)).
    """

    J: np.ndarray
    Jdot_nu: np.ndarray
    Lambda: np.ndarray
    Lambda_inv: np.ndarray
    mu: np.ndarray
    p: np.ndarray
    Jbar: np.ndarray
    damped: bool
    threshold: float
    J_base: np.ndarray | None
    coupling: np.ndarray | None
    frame: str
    axes: tuple
    base: str

    @functools.cached_property
    def N(self):
        """Null-space projector N = I − J̄ J, (n, n); Nᵀ Q₀ leaves ẍ unchanged."""
        return np.eye(self.J.shape[1]) - self.Jbar.dot(self.J)

    @functools.cached_property
    def sigma_min(self):
        """Smallest singular value of J M^(-1/2) (the damping criterion)."""
        w = np.linalg.eigvalsh(self.Lambda_inv)
        return math.sqrt(max(float(w[0]), 0.0))

    @functools.cached_property
    def condition(self):
        """Condition number σ_max / σ_min of J (2-norm); inf when rank-deficient."""
        s = np.linalg.svd(self.J, compute_uv=False)
        return float(s[0] / s[-1]) if s[-1] > s[0] * 1e-15 else math.inf

    @functools.cached_property
    def manipulability(self):
        """Yoshikawa's manipulability measure sqrt(det(J Jᵀ))."""
        return math.sqrt(max(float(np.linalg.det(self.J.dot(self.J.T))), 0.0))

    def to_dict(self):
        """JSON-ready dict of every field and derived quantity."""
        out = {}
        for name in ("J", "Jdot_nu", "Lambda", "Lambda_inv", "mu", "p", "Jbar", "N"):
            out[name] = getattr(self, name).tolist()
        for name in ("J_base", "coupling"):
            value = getattr(self, name)
            out[name] = None if value is None else value.tolist()
        out.update(damped=self.damped, threshold=self.threshold, frame=self.frame,
                   axes=list(self.axes), base=self.base, sigma_min=self.sigma_min,
                   condition=self.condition, manipulability=self.manipulability)
        return out


@dataclass(frozen=True, eq=False)
class InertiaEllipsoid:
    """Principal effective masses of a frame's linear task inertia.

    center : ndarray (3,)       frame origin in the world, m
    directions : ndarray (3, 3) unit principal directions as columns (world axes)
    masses : ndarray (3,)       principal masses m_i = 1/λ_i(J_v M⁻¹ J_vᵀ), kg,
                                ascending; inf along a direction the frame
                                cannot move in (λ_i ≤ 1e-12 λ_max)
    base : str                  "whole_body" or "locked"

    The effective mass along a unit u is m_u = 1/Σᵢ (uᵀ dᵢ)² / m_i (Khatib 1995,
    IJRR 14(1)); the ellipsoid {x : xᵀ Λ⁻¹ x = 1} has semi-axes sqrt(m_i) along dᵢ.
    """

    center: np.ndarray
    directions: np.ndarray
    masses: np.ndarray
    base: str

    def mass_along(self, u):
        """Effective mass along direction u (3,), kg (u is normalised)."""
        u = _unit("direction", u, 3)
        with np.errstate(divide="ignore"):
            inv = np.where(np.isinf(self.masses), 0.0, 1.0 / self.masses)
        return 1.0 / float(((self.directions.T.dot(u)) ** 2).dot(inv))

    def to_dict(self):
        return {"center": self.center.tolist(), "directions": self.directions.tolist(),
                "masses": [float(m) if math.isfinite(m) else None for m in self.masses],
                "base": self.base}


# ------------------------------------------------------------------ checks
def _unit(name, u, size):
    u = _vec(name, u, size)
    n = math.sqrt(u.dot(u))
    if not n > 0.0:
        raise ValueError(f"`{name}` must be a non-zero vector, got {u}")
    return u / n


def _frame(robot, frame):
    """(frame id, name); None means the robot's tool frame."""
    if frame is None:
        return robot.tool_frame_id, robot.tool_frame
    if not isinstance(frame, str):
        raise ValueError(f"`frame` must be a frame name (str) or None, got {frame!r}")
    return robot.frame_id(frame), frame


def _rows(axes):
    """(row selector, axis names) for "linear", "angular", "full" or a selection.

    The selector is a slice when the rows are contiguous (a view, no copy)."""
    if isinstance(axes, str):
        return _rows_cached(axes)
    try:
        key = tuple(axes)
        hash(key)
    except TypeError:
        return _parse_rows(axes)
    return _rows_cached(key)


@functools.lru_cache(maxsize=64)
def _rows_cached(axes):
    return _parse_rows(axes)


def _parse_rows(axes):
    if isinstance(axes, str):
        named = {"linear": (0, 1, 2), "angular": (3, 4, 5), "full": (0, 1, 2, 3, 4, 5)}
        if axes in named:
            idx = named[axes]
        elif axes in AXIS_NAMES:
            idx = (AXIS_NAMES.index(axes),)
        else:
            raise ValueError(f"`axes` must be 'linear', 'angular', 'full' or a selection of "
                             f"{AXIS_NAMES} (names or row indices 0-5), got {axes!r}")
    else:
        try:
            items = list(axes)
        except TypeError:
            raise ValueError(f"`axes` must be 'linear', 'angular', 'full' or a sequence of "
                             f"axis names {AXIS_NAMES}, got {axes!r}") from None
        idx = []
        for a in items:
            if isinstance(a, str) and a in AXIS_NAMES:
                idx.append(AXIS_NAMES.index(a))
            elif isinstance(a, (int, np.integer)) and not isinstance(a, bool) and 0 <= a < 6:
                idx.append(int(a))
            else:
                raise ValueError(f"`axes` entry {a!r} is not one of {AXIS_NAMES} or 0-5")
        if not idx or len(set(idx)) != len(idx):
            raise ValueError(f"`axes` must select at least one row, each once, got {axes!r}")
        idx = tuple(idx)
    names = tuple(AXIS_NAMES[i] for i in idx)
    if idx == tuple(range(idx[0], idx[0] + len(idx))):
        return slice(idx[0], idx[0] + len(idx)), names
    sel = np.array(idx)
    sel.setflags(write=False)   # shared through the cache
    return sel, names


def _base(base):
    if base not in _BASES:
        raise ValueError(f"`base` must be 'whole_body' or 'locked', got {base!r}")
    return base == "locked"


def _threshold(damping):
    if damping is None:
        return 0.0
    eps = float(damping)
    if not (math.isfinite(eps) and eps >= 0.0):
        raise ValueError(f"`damping` must be a threshold >= 0 (1/√kg) or None, got {damping!r}")
    return eps


# ----------------------------------------------------------- the damped inverse
def _task_rhs(k, m):
    """Right-hand sides [I_k | B] for `_solve_task` (Fortran order, B to be filled)."""
    return _task_rhs_template(k, m).copy(order="F")


@functools.lru_cache(maxsize=32)
def _task_rhs_template(k, m):
    rhs = np.zeros((k, k + m), order="F")
    rhs[:, :k] = np.eye(k)
    rhs.setflags(write=False)
    return rhs


def _solve_task(Linv, rhs, eps):
    """X = Λ rhs = [Λ | Λ B] for the mobility Linv = J M⁻¹ Jᵀ (k, k) and
    rhs = [I_k | B] (k, k + m), Fortran order (see `_task_rhs`; not modified).

    One dposv.  The bound λ_max(Λ) ≤ trace(Λ) certifies σ_min ≥ ε cheaply;
    otherwise the eigenvalues decide and, below the threshold, the damped
    inverse of the module docstring is used.

    Returns (X, damped).
    """
    k = Linv.shape[0]
    _, X, info = lapack.dposv(Linv, rhs)    # upper, no overwrite (keywords cost 0.5 µs)
    eps2 = eps * eps
    # trace(Λ) by scalar reads: for k ≤ 6 cheaper than any NumPy reduction
    r = range(k)
    if info == 0 and (eps2 == 0.0 or sum(map(X.item, r, r)) * eps2 <= 1.0):
        return X, False
    if eps2 == 0.0:
        raise ModelError(f"the task mobility J M⁻¹ Jᵀ is singular (LAPACK dposv info={info}): "
                         "the frame cannot move along some task axis here; pass a damping "
                         f"threshold (e.g. damping={DEFAULT_DAMPING}) or choose other axes")
    w, U = np.linalg.eigh(0.5 * (Linv + Linv.T))
    s2 = np.maximum(w, 0.0)
    if info == 0 and s2[0] >= eps2:
        return X, False
    lam2 = eps2 - s2[0]
    Lam = (U / (s2 + lam2)).dot(U.T)
    return Lam.dot(rhs), True


# ------------------------------------------------------------ kinematics pass
def _kinematics(robot, data, q, v, fid, rows):
    """M (nv, nv), c, g (nv,), J (k, nv) and J̇ν (k,) from one pass of calls."""
    M, J6, h_pin, Jdot_nu, g_pin = frame_terms(robot, data, q, v, fid, rows, gravity=True)
    g = robot.St.dot(g_pin)
    return M, robot.St.dot(h_pin) - g, g, J6.dot(robot.S), Jdot_nu


def _terms(robot, q, nu, fid, rows, k, locked, eps):
    """The fast path of `task_space` (no validation): a tuple of fields.

    Whole body: J, c and g are written straight into the right-hand sides
    [Jᵀ | c | g] of one dposv with M; then Λ [I | J M⁻¹c − J̇ν | J M⁻¹g] by a
    second one (`_solve_task`).  Locked: [J_aᵀ | c_a | g_a | M_aw] with M_aa,
    and the extra columns J M_aa⁻¹ M_aw − J_base give Γ.
    """
    S, St = robot.S, robot.St
    M, J6, h_pin, Jdot_nu, g_pin = frame_terms(robot, robot.data, q, S.dot(nu), fid, rows,
                                               gravity=True)
    if locked:
        J_full = J6.dot(S)
        J_base, J = J_full[:, :2], np.ascontiguousarray(J_full[:, 2:])
        g = St.dot(g_pin)
        rhs = np.empty((robot.n_arm, k + 4), order="F")
        rhs[:, :k] = J.T
        rhs[:, k] = St.dot(h_pin)[2:] - g[2:]
        rhs[:, k + 1] = g[2:]
        rhs[:, k + 2:] = M[2:, :2]
        Mx = M[2:, 2:]
    else:
        J_base = None
        rhs = np.empty((robot.nv, k + 2), order="F")
        J = rhs[:, :k].T                                   # a C-order view
        np.dot(J6, S, out=J)
        c, g = rhs[:, k], rhs[:, k + 1]
        np.dot(St, g_pin, out=g)
        np.dot(St, h_pin, out=c)
        c -= g
        Mx = M
    _, Y, info = lapack.dposv(Mx, rhs)          # [M⁻¹Jᵀ | M⁻¹c | M⁻¹g (| M⁻¹M_aw)]
    if info:
        _solve_spd(Mx, rhs)                     # raises the ModelError
    JY = J.dot(Y)
    Linv = JY[:, :k]
    rhs2 = _task_rhs(k, JY.shape[1] - k)
    rhs2[:, k:] = JY[:, k:]
    rhs2[:, k] -= Jdot_nu
    if locked:
        rhs2[:, k + 2:] -= J_base
    X, damped = _solve_task(Linv, rhs2, eps)
    Lam = X[:, :k]
    coupling = X[:, k + 2:] if locked else None
    Jbar = Y[:, :k].dot(Lam)
    return J, Jdot_nu, Lam, Linv, X[:, k], X[:, k + 1], Jbar, damped, J_base, coupling


# ------------------------------------------------------------------ public API
def task_space(robot, q, nu, frame=None, axes="full", *, base="whole_body",
               damping=DEFAULT_DAMPING):
    """Operational-space terms of `frame` in reduced coordinates.

    Λ = (J M⁻¹ Jᵀ)⁻¹,  J̄ = M⁻¹ Jᵀ Λ,  μ = Λ (J M⁻¹ c − J̇ν),  p = Λ J M⁻¹ g,
    N = I − J̄ J  (Khatib 1987, IEEE J. Robotics and Automation 3(1)); see the
    module docstring for the locked base and the damping.

    Parameters
    ----------
    q : ndarray (robot.model.nq,)   full configuration
    nu : ndarray (robot.nv,)        reduced velocity, rad/s and m/s
    frame : str or None             a frame of the model; None = the robot's tool frame
    axes : "linear" | "angular" | "full" | sequence of "x","y","z","rx","ry","rz"
           rows of the world-aligned [linear; angular] Jacobian
    base : "whole_body" | "locked"  wheels in the task space, or arm only
    damping : float >= 0 or None    threshold ε on σ_min(J M^(-1/2)), 1/√kg;
                                    None or 0: no damping (ModelError if singular)

    Returns
    -------
    TaskSpaceTerms

    Raises
    ------
    ConfigError   unknown frame;  ValueError   bad shapes, axes, base, damping
    ModelError    singular task with damping disabled
    """
    q, nu = _vec("q", q, robot.model.nq), _vec("nu", nu, robot.nv)
    fid, name = _frame(robot, frame)
    rows, names = _rows(axes)
    locked = _base(base)
    eps = _threshold(damping)
    terms = _terms(robot, q, nu, fid, rows, len(names), locked, eps)
    return TaskSpaceTerms(*terms[:8], threshold=eps, J_base=terms[8], coupling=terms[9],
                          frame=name, axes=names, base=base)


def cartesian_task_space(robot, q, nu, frame=None, axes="full", *, base="whole_body"):
    """Task-space terms by the Cartesian form, for a square, regular J.

    Λ = J⁻ᵀ M J⁻¹,  μ = J⁻ᵀ c − Λ J̇ν,  p = J⁻ᵀ g,  J̄ = J⁻¹,  N = 0
    (Khatib 1987, eq. 39 with J invertible); locked base: Γ = J⁻ᵀ M_aw − Λ J_base.
    A task force maps exactly to efforts and back: Q = Jᵀ F, F = J⁻ᵀ Q.
    Same parameters as `task_space`.

    Raises
    ------
    ValueError  J is not square (k ≠ n);  ModelError  J is singular (cond > 1e12)
    """
    q, nu = _vec("q", q, robot.model.nq), _vec("nu", nu, robot.nv)
    fid, name = _frame(robot, frame)
    rows, names = _rows(axes)
    locked = _base(base)
    M, c, g, J, Jdot_nu = _kinematics(robot, robot.data, q, robot.S.dot(nu), fid, rows)
    J_base = None
    if locked:
        J_base, J, M_aw = J[:, :2], J[:, 2:], M[2:, :2]
        M, c, g = M[2:, 2:], c[2:], g[2:]
    k, n = J.shape
    if k != n:
        raise ValueError(f"the Cartesian form needs a square task Jacobian: {k} task rows "
                         f"{names} but {n} coordinates (base={base!r})")
    cond = np.linalg.cond(J)
    if not cond < 1e12:
        raise ModelError(f"the task Jacobian is singular at this configuration (condition "
                         f"number {cond:.3g}): the Cartesian form needs a regular J")
    Jt_inv = np.linalg.inv(J.T)   # k ≤ 6 and regular: the Cartesian form's own definition
    Lam = Jt_inv.dot(M).dot(Jt_inv.T)
    Lam = 0.5 * (Lam + Lam.T)
    mu = Jt_inv.dot(c) - Lam.dot(Jdot_nu)
    p = Jt_inv.dot(g)
    coupling = Jt_inv.dot(M_aw) - Lam.dot(J_base) if locked else None
    Linv = J.dot(np.linalg.solve(M, J.T))
    return TaskSpaceTerms(J=J, Jdot_nu=Jdot_nu, Lambda=Lam, Lambda_inv=0.5 * (Linv + Linv.T),
                          mu=mu, p=p, Jbar=Jt_inv.T.copy(), damped=False, threshold=0.0,
                          J_base=J_base, coupling=coupling, frame=name, axes=names, base=base)


def _mobility(robot, q, fid, rows, locked):
    """Λ⁻¹ = J M⁻¹ Jᵀ (velocity-independent) and the frame origin."""
    model, data = robot.model, robot.data
    M, J = mass_and_jacobian(robot, data, q, fid, rows)
    if locked:
        M, J = M[2:, 2:], J[:, 2:]
    Linv = J.dot(_solve_spd(M, np.ascontiguousarray(J.T)))
    pin.updateFramePlacement(model, data, fid)
    return 0.5 * (Linv + Linv.T), data.oMf[fid].translation.copy()


def effective_mass(robot, q, direction, frame=None, *, base="whole_body"):
    """Effective mass of `frame` along a direction, m_u = 1 / (uᵀ Λ⁻¹ u).

    (Khatib 1995, "Inertial properties in robotic manipulation: an object-level
    framework", IJRR 14(1).)  Λ⁻¹ = J M⁻¹ Jᵀ needs no inverse of a singular
    matrix: along a direction the frame cannot move in, m_u = inf.

    Parameters
    ----------
    q : ndarray (robot.model.nq,)
    direction : ndarray (3,) or (6,)  world axes; (3,): linear task (the frame's
                orientation is free), (6,): [linear; angular] full task. Normalised.
    frame : str or None               None = the robot's tool frame
    base : "whole_body" | "locked"

    Returns
    -------
    float   kg (a linear direction), kg·m² (a purely angular one)
    """
    q = _vec("q", q, robot.model.nq)
    d = np.asarray(direction, dtype=float)
    if d.shape not in ((3,), (6,)):
        raise ValueError(f"`direction` must have shape (3,) or (6,), got {d.shape}")
    u = _unit("direction", d, d.size)
    fid, _ = _frame(robot, frame)
    Linv, _ = _mobility(robot, q, fid, slice(0, u.size), _base(base))
    inv_m = float(u.dot(Linv).dot(u))
    return 1.0 / inv_m if inv_m > 1e-12 * np.trace(Linv) else math.inf


def inertia_ellipsoid(robot, q, frame=None, *, base="whole_body"):
    """Principal directions and masses of the linear task inertia of `frame`.

    Eigen-decomposition of Λ⁻¹ = J_v M⁻¹ J_vᵀ = Σ dᵢ dᵢᵀ / mᵢ (Khatib 1995,
    IJRR 14(1)); see `InertiaEllipsoid`.

    Parameters
    ----------
    q : ndarray (robot.model.nq,);  frame : str or None;  base : "whole_body" | "locked"

    Returns
    -------
    InertiaEllipsoid
    """
    q = _vec("q", q, robot.model.nq)
    fid, _ = _frame(robot, frame)
    Linv, center = _mobility(robot, q, fid, slice(0, 3), _base(base))
    w, U = np.linalg.eigh(Linv)              # ascending 1/m: heaviest first
    w, U = w[::-1], U[:, ::-1]               # ascending masses
    with np.errstate(divide="ignore"):
        masses = np.where(w > 1e-12 * w[0], 1.0 / np.maximum(w, 1e-300), math.inf)
    return InertiaEllipsoid(center=center, directions=np.ascontiguousarray(U),
                            masses=masses, base=base)
