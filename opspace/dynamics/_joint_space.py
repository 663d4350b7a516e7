"""Joint-space dynamics in reduced coordinates.

    M(q) ν̇ + c(q, ν) + g(q) + f(q, ν) = Q

with ν = (φ̇_r, φ̇_l, q̇_arm), v = S ν (see `opspace.model`), and

    M = Sᵀ M_pin S                  (crba, armature included)
    c = Sᵀ (h_pin(q, S ν) − g_pin)  (Coriolis and centrifugal)
    g = Sᵀ g_pin(q)                 (gravity, on the left-hand side)
    f = f_C sign(ν) + f_v ν + f_rr  (Coulomb, viscous, rolling resistance)

Because Ṡ = 0 the reduced equations are the Kane / d'Alembert projection of
the constrained equations onto the admissible motions (Kane & Levinson,
Dynamics: Theory and Applications, 1985, ch. 6); the rolling constraint forces
drop out.  Coulomb friction is zero at zero velocity (no stiction model).

Rolling resistance: each contact i carries a static normal load N_i (the
weight shared by a rigid chassis on contacts of equal vertical stiffness, at
the current centre of mass) and resists with C_rr N_i: on a drive wheel a
torque C_rr N_i r sign(φ̇_i); on a caster a force C_rr N_i opposite the
caster's ground velocity, mapped to ν by the contact Jacobian.
"""

from __future__ import annotations

import functools
import math
import os
from dataclasses import dataclass

import numpy as np
import pinocchio as pin
import threadpoolctl
from scipy.linalg import lapack

from .. import _compiled
from .._common import as_vector as _vec
from ..errors import ModelError

__all__ = [
    "DriveInertia",
    "batch_threads",
    "set_batch_threads",
    "JointSpaceTerms",
    "drive_inertia",
    "forward_dynamics",
    "friction",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "potential_energy",
    "static_contact_loads",
]


@dataclass(frozen=True)
class JointSpaceTerms:
    """Reduced joint-space terms at (q, ν).

    M : ndarray (nv, nv)  mass matrix, kg·m² / kg·m / kg by coordinate pair
    c : ndarray (nv,)     Coriolis and centrifugal efforts, N·m or N
    g : ndarray (nv,)     gravity efforts, N·m or N (M ν̇ + c + g = Q)
    """

    M: np.ndarray
    c: np.ndarray
    g: np.ndarray

    @property
    def h(self):
        """c + g, the bias efforts."""
        return self.c + self.g

    def to_dict(self):
        return {"M": self.M.tolist(), "c": self.c.tolist(), "g": self.g.tolist()}


# ---------------------------------------------------------------- checks
_F64 = np.dtype(float)


def _plain(x, size):
    """x is already a float vector of shape (size,) (finiteness not checked)."""
    return type(x) is np.ndarray and x.dtype is _F64 and x.shape == (size,)


def _state(robot, q, nu):
    return _vec("q", q, robot.model.nq), _vec("nu", nu, robot.nv)


# ------------------------------------------------------------ joint space
def joint_space(robot, q, nu):
    """Reduced mass matrix, Coriolis/centrifugal and gravity terms.

    M = Sᵀ M_pin S,  c = Sᵀ (h_pin(q, Sν) − g_pin(q)),  g = Sᵀ g_pin(q).

    Parameters
    ----------
    q : ndarray (robot.model.nq,)  full configuration
    nu : ndarray (robot.nv,)       reduced velocity, rad/s and m/s

    Returns
    -------
    JointSpaceTerms
    """
    q, nu = _state(robot, q, nu)
    return _joint_space(robot, q, nu)


def _joint_space(robot, q, nu):
    model, data, S, St = robot.model, robot.data, robot.S, robot.St
    M_pin = pin.crba(model, data, q)
    h_pin = pin.nonLinearEffects(model, data, q, S.dot(nu))
    g = St.dot(pin.computeGeneralizedGravity(model, data, q))
    return JointSpaceTerms(St.dot(M_pin).dot(S), St.dot(h_pin) - g, g)


def kinetic_energy(robot, q, nu):
    """T = ½ νᵀ M ν, J (armature included)."""
    q, nu = _state(robot, q, nu)
    M = robot.S.T.dot(pin.crba(robot.model, robot.data, q)).dot(robot.S)
    return 0.5 * float(nu.dot(M).dot(nu))


def potential_energy(robot, q):
    """V = −m gᵀ p_com, J (zero at the ground plane), gravity 9.80665 m/s²."""
    q = _vec("q", q, robot.model.nq)
    return float(pin.computePotentialEnergy(robot.model, robot.data, q))


# ---------------------------------------------------------------- friction
def static_contact_loads(contacts_xy, cop_xy, weight):
    """Normal loads of a rigid chassis on contacts of equal vertical stiffness.

    The loads are the minimum-norm solution of the equilibrium equations
    Σ N_i = W,  Σ N_i x_i = W x_p,  Σ N_i y_i = W y_p  (x_p: centre of
    pressure); for equal springs under a rigid plate this is the deflection
    plane N_i = α + β x_i + γ y_i (exact for three non-collinear contacts).
    Lift-off is not modelled here; see `opspace.stability` for that.

    contacts_xy (k, 2) m, cop_xy (2,) m, weight N -> N (k,) N
    """
    P = np.asarray(contacts_xy, dtype=float)
    A = np.vstack([np.ones(len(P)), P[:, 0], P[:, 1]])
    b = weight * np.array([1.0, cop_xy[0], cop_xy[1]])
    return np.linalg.lstsq(A, b, rcond=None)[0]


class _RollingTerms:
    """Constant pieces of the rolling-resistance model of one robot.

    N = W · A⁺ [1, x_p, y_p]ᵀ  (A⁺: pseudo-inverse of the equilibrium rows of
    `static_contact_loads`), and for each caster the rows J_x, J_y of its
    ground-velocity Jacobian in the base frame, v_c = (J_x ν, J_y ν).
    """

    def __init__(self, robot):
        P = np.array([c.position for c in robot.contacts])
        A = np.vstack([np.ones(len(P)), P[:, 0], P[:, 1]])
        self.A_pinv = np.linalg.pinv(A)                       # (k, 3)
        S = robot.S
        self.Jx = S[0][None, :] - P[2:, 1:2] * S[2][None, :]  # (n_casters, nv)
        self.Jy = P[2:, 0:1] * S[2][None, :]
        self.c_rr = robot.rolling_resistance
        self.r = robot.wheel_radius
        #: per caster (J_x, J_y on the two wheel columns) as floats for scalar loops
        self.caster_rows = [(float(jx[0]), float(jx[1]), float(jy[0]), float(jy[1]))
                            for jx, jy in zip(self.Jx, self.Jy)]
        #: rows of A⁺ as floats: N_i = W (a_i0 + a_i1 x_p + a_i2 y_p)
        self.A_rows = [tuple(float(v) for v in row) for row in self.A_pinv]


def compiled_plant(robot, locked, friction):
    """The compiled plant of the robot (`opspace._compiled.kernel_plant`), or None.

    locked (nv,) bool: coordinates held still; friction: Coulomb, viscous and
    rolling resistance on/off.
    """
    if robot.mimic:   # the kernel's S is [A 0; I]: no mimic rows (the NumPy loop runs)
        return None
    terms = _rolling_terms(robot)
    free = (~np.asarray(locked, bool)).astype(float)
    return _compiled.kernel_plant(robot.S, free, robot.coulomb, robot.viscous, friction,
                                  terms.A_pinv, terms.caster_rows, robot.rolling_resistance,
                                  robot.wheel_radius)


def _rolling_terms(robot):
    terms = getattr(robot, "_rolling_terms", None)
    if terms is None:
        terms = robot._rolling_terms = _RollingTerms(robot)
    return terms


def _cop_in_base(q, com_w):
    """Ground projection of the COM in base coordinates, (..., 2)."""
    dx, dy = com_w[..., 0] - q[..., 0], com_w[..., 1] - q[..., 1]
    c, s = q[..., 2], q[..., 3]
    return np.stack([c * dx + s * dy, -s * dx + c * dy], axis=-1)


def _rolling_from_loads(terms, N, nus):
    """f_rr (n, nv) from loads N (n, k) and velocities nus (n, nv)."""
    f = np.zeros_like(nus)
    f[:, 0] = terms.c_rr * terms.r * N[:, 0] * np.sign(nus[:, 0])
    f[:, 1] = terms.c_rr * terms.r * N[:, 1] * np.sign(nus[:, 1])
    if terms.Jx.shape[0]:
        vcx, vcy = nus.dot(terms.Jx.T), nus.dot(terms.Jy.T)      # (n, n_casters)
        speed = np.hypot(vcx, vcy)
        k = np.divide(terms.c_rr * N[:, 2:], speed, out=np.zeros_like(speed), where=speed > 0)
        f += (k * vcx).dot(terms.Jx) + (k * vcy).dot(terms.Jy)  # −J_cᵀ F, F = −C_rr N v̂
    return f


def _static_loads(robot, terms, qs, coms):
    weight = robot.total_mass() * -robot.model.gravity.linear[2]
    cop = _cop_in_base(qs, coms)
    rhs = np.column_stack([np.ones(len(cop)), cop])               # (n, 3)
    return np.maximum(weight * rhs.dot(terms.A_pinv.T), 0.0)     # (n, k)


def _static_loads_one(robot, terms, q):
    """Static contact loads (k,) N at one configuration (no validation)."""
    cx, cy, _ = pin.centerOfMass(robot.model, robot.data, q, False).tolist()
    x, y, c, s = q[:4].tolist()
    dx, dy = cx - x, cy - y
    weight = robot.total_mass() * -robot.model.gravity.linear[2]
    N = terms.A_pinv.dot((weight, weight * (c * dx + s * dy), weight * (c * dy - s * dx)))
    return np.maximum(N, 0.0, out=N)


class RollingLoads:
    """Rolling resistance at one set of static loads, in scalars (the inner-loop
    form of `_rolling_from_loads`): wheel torques k_i sign(φ̇_i) with
    k_i = C_rr N_i r, and each caster's force C_rr N_c against its ground
    velocity (J_x ν, J_y ν), which only the wheel rates move."""

    def __init__(self, robot, q):
        # the loads of `_static_loads_one`, written in scalars (an inner-loop path)
        terms = _rolling_terms(robot)
        cx, cy, _ = pin.centerOfMass(robot.model, robot.data, q, False).tolist()
        x, y, c, s = q[:4].tolist()
        dx, dy = cx - x, cy - y
        xp, yp = c * dx + s * dy, c * dy - s * dx
        W = robot.total_mass() * -robot.model.gravity.linear[2]
        N = [max(W * (a0 + a1 * xp + a2 * yp), 0.0) for a0, a1, a2 in terms.A_rows]
        c_rr, r = terms.c_rr, terms.r
        self.k = (c_rr * r * N[0], c_rr * r * N[1])
        self.casters = [(*rows, c_rr * n) for rows, n in zip(terms.caster_rows, N[2:]) if n > 0.0]

    def wheel_efforts(self, nu):
        """(f_r, f_l), N·m on the wheel coordinates (left-hand side)."""
        w0, w1 = float(nu[0]), float(nu[1])
        k0, k1 = self.k
        f0 = k0 if w0 > 0 else (-k0 if w0 < 0 else 0.0)
        f1 = k1 if w1 > 0 else (-k1 if w1 < 0 else 0.0)
        for jx0, jx1, jy0, jy1, cN in self.casters:
            vx, vy = jx0 * w0 + jx1 * w1, jy0 * w0 + jy1 * w1
            speed = math.hypot(vx, vy)
            if speed > 0.0:
                k = cN / speed
                f0 += k * (vx * jx0 + vy * jy0)
                f1 += k * (vx * jx1 + vy * jy1)
        return f0, f1


def rolling_loads(robot, q):
    """`RollingLoads` at q, reused while q and the robot's revision stay the
    same (a controller and a simulator ask for the same q in one step)."""
    cached = getattr(robot, "_rolling_loads", None)
    if cached is not None and cached[0] == robot.revision and np.array_equal(cached[1], q):
        return cached[2]
    loads = RollingLoads(robot, q)
    robot._rolling_loads = (robot.revision, q.copy(), loads)
    return loads


def _rolling_resistance(robot, q, nu):
    """Rolling-resistance efforts f_rr (nv,), on the left-hand side (one state)."""
    f = np.zeros(robot.nv)
    if robot.rolling_resistance != 0.0:
        f[0], f[1] = rolling_loads(robot, q).wheel_efforts(nu)
    return f


def _rolling_resistance_batch(robot, qs, nus):
    terms = _rolling_terms(robot)
    model, data = robot.model, robot.data
    coms = np.array([pin.centerOfMass(model, data, q, False) for q in qs])
    return _rolling_from_loads(terms, _static_loads(robot, terms, qs, coms), nus)


def friction(robot, q, nu):
    """Friction efforts f (nv,) on the left-hand side, N·m or N.

    f = f_C sign(ν) + f_v ν + f_rr(q, ν), zero at zero velocity.
    """
    q, nu = _state(robot, q, nu)
    return _friction(robot, q, nu)


def _friction(robot, q, nu):
    return robot.coulomb * np.sign(nu) + robot.viscous * nu + _rolling_resistance(robot, q, nu)


# ------------------------------------------------------ inverse / forward
def inverse_dynamics(robot, q, nu, nu_dot, *, with_friction=True):
    """Efforts Q = M ν̇ + c + g + f, N·m at the wheels and arm joints (N for prismatic).

    Parameters
    ----------
    q : ndarray (model.nq,), nu, nu_dot : ndarray (nv,)
    with_friction : include Coulomb, viscous and rolling resistance

    Returns
    -------
    Q : ndarray (nv,)
    """
    kernel = _compiled.inverse_dynamics_kernel(robot)
    Q = None
    if kernel is not None and _plain(q, robot.model.nq) and _plain(nu, robot.nv) \
            and _plain(nu_dot, robot.nv):
        # the same products in one compiled call, which also checks finiteness
        Q = np.empty(robot.nv)
        if not kernel.rnea(robot.model, robot.data, q, nu, nu_dot, Q):
            Q = None                            # not finite: the checks below say which
    if Q is None:
        q, nu = _state(robot, q, nu)
        nu_dot = _vec("nu_dot", nu_dot, robot.nv)
        S = robot.S
        Q = robot.St.dot(pin.rnea(robot.model, robot.data, q, S.dot(nu), S.dot(nu_dot)))
    if with_friction:
        Q += _friction(robot, q, nu)
    return Q


def forward_dynamics(robot, q, nu, Q, *, with_friction=True):
    """Accelerations ν̇ solving M ν̇ = Q − c − g − f (Cholesky of M).

    Returns
    -------
    nu_dot : ndarray (nv,)

    Raises
    ------
    ModelError   if M is not positive definite at q
    """
    q, nu = _state(robot, q, nu)
    Q = _vec("Q", Q, robot.nv)
    js = _joint_space(robot, q, nu)
    rhs = Q - js.c - js.g
    if with_friction:
        rhs = rhs - _friction(robot, q, nu)
    return _solve_spd(js.M, rhs)


def _solve_spd(M, rhs):
    """x = M⁻¹ rhs by one LAPACK dposv call (Cholesky factor and solve)."""
    _, x, info = lapack.dposv(M, rhs, lower=0, overwrite_a=0, overwrite_b=0)
    if info != 0:
        raise ModelError(f"mass matrix is not positive definite (LAPACK dposv info={info})")
    return x


# ------------------------------------------------------------------ batch
class _Pool:
    """A Pinocchio ModelPool, rebuilt when the robot's inertias change."""

    def __init__(self, robot, threads):
        self.revision = robot.revision
        self.threads = threads
        self.pool = pin.ModelPool(robot.model, threads)


@functools.lru_cache(maxsize=1)
def _blas_controller():
    return threadpoolctl.ThreadpoolController()


_BATCH_THREADS = {"threads": None}


def set_batch_threads(threads=None):
    """Set how many OpenMP threads `inverse_dynamics_batch` uses when its call
    does not say (`threads=`): an int >= 1, or None for min(2, cores).

    A worker process that runs one task per core sets 1.  Results do not
    depend on it (each state is computed alone).
    """
    if threads is not None and (isinstance(threads, bool) or not isinstance(threads, int)
                                or threads < 1):
        raise ValueError(f"`threads` must be an int >= 1 or None, got {threads!r}")
    _BATCH_THREADS["threads"] = threads


def batch_threads():
    """The number of threads `inverse_dynamics_batch` uses by default."""
    return _BATCH_THREADS["threads"] or max(1, min(2, os.cpu_count() or 1))


def inverse_dynamics_batch(robot, qs, nus, nu_dots, *, with_friction=True, threads=None):
    """Inverse dynamics over many states at once.

    Same equation as `inverse_dynamics`, evaluated by Pinocchio's
    `rneaInParallel` on a `ModelPool` (OpenMP threads); friction is added with
    vectorised NumPy.

    Parameters
    ----------
    qs : ndarray (n, model.nq); nus, nu_dots : ndarray (n, nv)
    threads : int, default `batch_threads()` (min(2, cores) unless `set_batch_threads`)

    Returns
    -------
    Q : ndarray (n, nv)
    """
    qs = np.asarray(qs, dtype=float)
    nus = np.asarray(nus, dtype=float)
    nu_dots = np.asarray(nu_dots, dtype=float)
    n = qs.shape[0] if qs.ndim == 2 else -1
    for name, x, width in (("qs", qs, robot.model.nq), ("nus", nus, robot.nv),
                           ("nu_dots", nu_dots, robot.nv)):
        if x.ndim != 2 or x.shape != (n, width):
            raise ValueError(f"`{name}` must have shape (n, {width}) with the same n, "
                             f"got {x.shape}")
        if not np.all(np.isfinite(x)):
            raise ValueError(f"`{name}` has non-finite entries")
    if n == 0:
        return np.zeros((0, robot.nv))
    threads = threads or batch_threads()
    pool = getattr(robot, "_batch_pool", None)
    if pool is None or pool.revision != robot.revision or pool.threads != threads:
        pool = robot._batch_pool = _Pool(robot, threads)
    S = robot.S
    # Pinocchio's OpenMP threads and OpenBLAS's threads fight for the cores (and
    # OpenMP workers spin for a while after the parallel call): hold BLAS to one
    # thread for the whole batch, the small products before and after included.
    with _blas_controller().limit(limits=1, user_api="blas"):
        v, a = np.asfortranarray(S.dot(nus.T)), np.asfortranarray(S.dot(nu_dots.T))
        tau = pin.rneaInParallel(threads, pool.pool, np.asfortranarray(qs.T), v, a)
        Q = tau.T.dot(S)
        if with_friction:
            Q = Q + _friction_batch(robot, qs, nus)
    return Q


def _friction_batch(robot, qs, nus):
    """Friction efforts f (n, nv) for many states (no validation)."""
    f = robot.coulomb * np.sign(nus) + robot.viscous * nus
    if robot.rolling_resistance:
        f += _rolling_resistance_batch(robot, qs, nus)
    return f


# ------------------------------------------------------ drive inertia summary
@dataclass(frozen=True)
class DriveInertia:
    """What the drive wheels feel with the arm locked, at one configuration.

    Kinetic energy of the locked robot with base speed v and yaw rate ω (base
    frame, COM at (x_c, y_c) in the base frame, yaw inertia I_P about the
    vertical axis through the pivot, by the parallel-axis theorem
    I_P = I_zz,G + m (x_c² + y_c²)):

        T = ½ m v² − m y_c v ω + ½ I_P ω² + ½ (J_s + J_m G²)(φ̇_r² + φ̇_l²)

    With v = r(φ̇_r + φ̇_l)/2 and ω = r(φ̇_r − φ̇_l)/(2b), Lagrange's equations
    give the wheel block M_w = ∂²T/∂φ̇² (a "fact of the trade" closed form):

        M_w = (m r²/4) [[1 + a − 2y_c/b, 1 − a], [1 − a, 1 + a + 2y_c/b]]
              + (J_s + J_m G²) I,          a = I_P / (m b²)

    Fields: mass kg, com (3,) m in the base frame, yaw_inertia I_P kg·m²,
    distribution a (dimensionless; a = 1 when b equals the radius of gyration
    about the pivot, and each wheel then carries half the mass), M_w (2, 2)
    kg·m², wheel_mass (2,) kg: the translational mass each wheel feels at its
    contact, M_w[i, i] / r², reflected kg·m² per wheel (J_m G²).
    """

    mass: float
    com: np.ndarray
    yaw_inertia: float
    distribution: float
    M_w: np.ndarray
    wheel_mass: np.ndarray
    reflected: float

    def to_dict(self):
        return {"mass": self.mass, "com": self.com.tolist(), "yaw_inertia": self.yaw_inertia,
                "distribution": self.distribution, "M_w": self.M_w.tolist(),
                "wheel_mass": self.wheel_mass.tolist(), "reflected": self.reflected}


def drive_inertia(robot, q):
    """Locked-arm inertia seen by the drive wheels at q (see `DriveInertia`)."""
    q = _vec("q", q, robot.model.nq)
    M_pin = pin.crba(robot.model, robot.data, q)
    m = M_pin[0, 0]
    # planar-joint block in base axes: [[m, 0, −m y_c], [0, m, m x_c], [., ., I_P]]
    y_c, x_c = -M_pin[0, 2] / m, M_pin[1, 2] / m
    com_w = robot.com(q)
    I_P = M_pin[2, 2]
    M = robot.S.T.dot(M_pin).dot(robot.S)
    M_w = M[:2, :2].copy()
    r, b = robot.wheel_radius, robot.half_track
    return DriveInertia(mass=float(m), com=np.array([x_c, y_c, com_w[2]]),
                        yaw_inertia=float(I_P), distribution=float(I_P / (m * b * b)),
                        M_w=M_w, wheel_mass=np.diag(M_w) / r**2,
                        reflected=float(robot.description.drive.reflected_inertia))
