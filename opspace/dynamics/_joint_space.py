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
drop out.  Every term is formed by `opspace.dynamics._terms` (friction and
rolling resistance included); this module validates and assembles results.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pinocchio as pin

from .._common import as_vector as _vec
from ._terms import (batch_threads, bias_forces, blas_controller, compiled_inverse_dynamics,
                     friction_batch, friction_forces, gravity_forces, mass_matrix, model_pool,
                     solve_spd)

__all__ = [
    "DriveInertia",
    "JointSpaceTerms",
    "drive_inertia",
    "forward_dynamics",
    "friction",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "potential_energy",
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
    g = gravity_forces(robot, q)
    return JointSpaceTerms(mass_matrix(robot, q), bias_forces(robot, q, nu) - g, g)


def kinetic_energy(robot, q, nu):
    """T = ½ νᵀ M ν, J (armature included)."""
    q, nu = _state(robot, q, nu)
    return 0.5 * float(nu.dot(mass_matrix(robot, q)).dot(nu))


def potential_energy(robot, q):
    """V = −m gᵀ p_com, J (zero at the ground plane), gravity 9.80665 m/s²."""
    q = _vec("q", q, robot.model.nq)
    return float(pin.computePotentialEnergy(robot.model, robot.data, q))


# ---------------------------------------------------------------- friction
def friction(robot, q, nu):
    """Friction efforts f (nv,) on the left-hand side, N·m or N.

    f = f_C sign(ν) + f_v ν + f_rr(q, ν), zero at zero velocity.
    """
    q, nu = _state(robot, q, nu)
    return friction_forces(robot, q, nu)


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
    kernel = compiled_inverse_dynamics(robot)
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
        Q += friction_forces(robot, q, nu)
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
        rhs = rhs - friction_forces(robot, q, nu)
    return solve_spd(js.M, rhs)


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
    pool = model_pool(robot, threads)
    S = robot.S
    # Pinocchio's OpenMP threads and OpenBLAS's threads fight for the cores (and
    # OpenMP workers spin for a while after the parallel call): hold BLAS to one
    # thread for the whole batch, the small products before and after included.
    with blas_controller().limit(limits=1, user_api="blas"):
        v, a = np.asfortranarray(S.dot(nus.T)), np.asfortranarray(S.dot(nu_dots.T))
        tau = pin.rneaInParallel(threads, pool, np.asfortranarray(qs.T), v, a)
        Q = tau.T.dot(S)
        if with_friction:
            Q = Q + friction_batch(robot, qs, nus)
    return Q


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
    M_pin = pin.crba(robot.model, robot.data, q)     # the planar block in full coordinates
    m = M_pin[0, 0]
    # planar-joint block in base axes: [[m, 0, −m y_c], [0, m, m x_c], [., ., I_P]]
    y_c, x_c = -M_pin[0, 2] / m, M_pin[1, 2] / m
    com_w = robot.com(q)
    I_P = M_pin[2, 2]
    M = mass_matrix(robot, q)
    M_w = M[:2, :2].copy()
    r, b = robot.wheel_radius, robot.half_track
    return DriveInertia(mass=float(m), com=np.array([x_c, y_c, com_w[2]]),
                        yaw_inertia=float(I_P), distribution=float(I_P / (m * b * b)),
                        M_w=M_w, wheel_mass=np.diag(M_w) / r**2,
                        reflected=float(robot.description.drive.reflected_inertia))
