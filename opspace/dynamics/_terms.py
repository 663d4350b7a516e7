"""The reduced dynamics terms: the one place of opspace that forms them.

With v = S ν (S constant, `opspace.model`) and Pinocchio's M_pin, h_pin, g_pin:

    M_r = Sᵀ M_pin(q) S                     reduced mass matrix (crba, armature included)
    h_r = Sᵀ h_pin(q, S ν) = c + g          bias efforts (Coriolis, centrifugal, gravity)
    g_r = Sᵀ g_pin(q)                       gravity efforts (on the left-hand side)
    J_r = J_pin(q) S                        frame Jacobian, rows [linear; angular],
                                            world-aligned at the frame origin
    J̇ν                                      classical acceleration of the frame at ν̇ = 0
    f = f_C σ(ν) + f_v ν + f_rr(q, ν)       friction on the left-hand side, σ = sign
                                            or tanh(ν / v_s) (smoothed)
    N = W A⁺ [1, x_p, y_p]ᵀ                 static contact loads (for f_rr)

so that M_r ν̇ + h_r + f = Q (Kane & Levinson, Dynamics: Theory and
Applications, 1985, ch. 6: the projection on the admissible motions, Ṡ = 0).

Rolling resistance: each contact i carries the static normal load N_i of a
rigid chassis on contacts of equal vertical stiffness at the current centre of
mass, and resists with C_rr N_i: on a drive wheel a torque C_rr N_i r sign(φ̇_i),
on a caster a force C_rr N_i against the caster's ground velocity, mapped to ν
by the contact Jacobian.  Coulomb friction is zero at zero velocity here; the
simulation plant's stick-slip model (`_stick_slip`) takes its static and
kinetic levels and the joint stops from `FrictionLevels`.

Model and workspace (Pinocchio's Model / Data split): the robot is constant
during a computation; `Workspace` holds what is derived from it and the
buffers (the contact-load rows, the rolling loads of the last q, the batch
pool, the compiled inverse dynamics).  `workspace(robot)` gives the robot's
default one; nothing is attached to the robot.  The compiled kernel
(`opspace/_kernel.cpp`) implements the same named terms from the arrays given
here (`compiled_plant`).
"""

from __future__ import annotations

import functools
import math
import os
import weakref

import numpy as np
import pinocchio as pin
import threadpoolctl
from scipy.linalg import lapack

from .. import _compiled
from ..errors import ModelError

__all__ = [
    "RollingLoads",
    "Workspace",
    "batch_threads",
    "bias_forces",
    "caster_forces",
    "compiled_inverse_dynamics",
    "compiled_plant",
    "compiled_terms",
    "coulomb_viscous",
    "frame_terms",
    "friction_model",
    "friction_batch",
    "friction_forces",
    "gravity_forces",
    "mass_and_jacobian",
    "mass_matrix",
    "rolling_loads",
    "rolling_resistance",
    "rolling_resistance_batch",
    "set_batch_threads",
    "solve_spd",
    "static_contact_loads",
    "static_loads_batch",
    "wheel_rolling_torques",
    "workspace",
]

_LWA = pin.LOCAL_WORLD_ALIGNED
_WORLD = pin.Convention.WORLD


# --------------------------------------------------------------- workspace
class Workspace:
    """What the terms derive from one robot, and their buffers (like `pinocchio.Data`).

    A_pinv (k, 3): N = W A⁺ [1, x_p, y_p]ᵀ (A⁺ the pseudo-inverse of the
    equilibrium rows of `static_contact_loads`); per caster the rows J_x, J_y
    of its ground velocity in the base frame, v_c = (J_x ν, J_y ν); the rolling
    loads of the last configuration; the batch `ModelPool`; the compiled
    inverse dynamics.  Keyed on `robot.revision` where the inertias matter.
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
        self.loads = None          # (revision, q, RollingLoads) of the last q
        self.pool = None           # (revision, threads, pinocchio.ModelPool)
        self.inverse_dynamics = None


_WORKSPACES = weakref.WeakKeyDictionary()


def workspace(robot):
    """The robot's default `Workspace` (made on first use, dropped with the robot)."""
    ws = _WORKSPACES.get(robot)
    if ws is None:
        ws = _WORKSPACES[robot] = Workspace(robot)
    return ws


# ------------------------------------------------------------ rigid body
def mass_matrix(robot, q, data=None):
    """M_r = Sᵀ M_pin(q) S, (nv, nv) (no validation; `data` defaults to robot.data)."""
    data = robot.data if data is None else data
    return robot.St.dot(pin.crba(robot.model, data, q)).dot(robot.S)


def bias_forces(robot, q, nu, data=None):
    """h_r = Sᵀ h_pin(q, S ν) = c + g, (nv,) N·m or N (no validation)."""
    data = robot.data if data is None else data
    return robot.St.dot(pin.nonLinearEffects(robot.model, data, q, robot.S.dot(nu)))


def gravity_forces(robot, q, data=None):
    """g_r = Sᵀ g_pin(q), (nv,) N·m or N (no validation)."""
    data = robot.data if data is None else data
    return robot.St.dot(pin.computeGeneralizedGravity(robot.model, data, q))


def frame_terms(robot, data, q, v, fid, rows, *, gravity=False):
    """One pass of Pinocchio calls for a frame's task-space terms (no validation).

    Returns (M_r, J_pin[rows], h_pin, J̇ν[rows], g_pin or None): the reduced
    mass matrix, the frame Jacobian in full coordinates (J_r = J_pin S is left
    to the caller, who writes it where it needs it), Pinocchio's bias and
    gravity (unreduced) and the frame's classical acceleration at ν̇ = 0,
    with v = S ν.  crba in the WORLD convention fills data.J for the Jacobian.
    """
    model = robot.model
    g_pin = pin.computeGeneralizedGravity(model, data, q) if gravity else None
    M = robot.St.dot(pin.crba(model, data, q, _WORLD)).dot(robot.S)
    J6 = pin.getFrameJacobian(model, data, fid, _LWA)[rows]     # data.J from crba WORLD
    h_pin = pin.nonLinearEffects(model, data, q, v)
    pin.forwardKinematics(model, data, q, v, np.zeros(model.nv))
    Jdot_nu = pin.getFrameClassicalAcceleration(model, data, fid, _LWA).vector[rows]
    return M, J6, h_pin, Jdot_nu, g_pin


def mass_and_jacobian(robot, data, q, fid, rows):
    """(M_r, J_r[rows]) at q from one crba (WORLD convention, which fills data.J)."""
    M = robot.St.dot(pin.crba(robot.model, data, q, _WORLD)).dot(robot.S)
    return M, pin.getFrameJacobian(robot.model, data, fid, _LWA)[rows].dot(robot.S)


def solve_spd(M, rhs):
    """x = M⁻¹ rhs by one LAPACK dposv call (Cholesky factor and solve); ModelError
    if M is not positive definite."""
    _, x, info = lapack.dposv(M, rhs, lower=0, overwrite_a=0, overwrite_b=0)
    if info != 0:
        raise ModelError(f"mass matrix is not positive definite (LAPACK dposv info={info})")
    return x


# ----------------------------------------------------------------- friction
def coulomb_viscous(robot, nu, smoothing=0.0):
    """f_C σ(ν) + f_v ν per coordinate, (..., nv): σ = sign(ν), or tanh(ν / v_s)
    with v_s = `smoothing` > 0 (rad/s or m/s).  Zero at zero velocity."""
    if smoothing:
        return robot.coulomb * np.tanh(nu * (1.0 / smoothing)) + robot.viscous * nu
    return robot.coulomb * np.sign(nu) + robot.viscous * nu


class FrictionLevels:
    """The stick-slip friction levels and joint stops of a simulation plant
    (`opspace.dynamics._stick_slip`), per reduced coordinate.

    Fk, Fs, fv (nv,): kinetic (`coulomb`), static (`stiction`) and viscous
    friction, zeros with friction off; frictional (nv,) bool: can stick (a
    level or the wheels' rolling resistance); rolling: the wheels' rolling
    resistance C_rr N r adds to both levels; lo, hi (nv,): position stops of
    the arm joints (±inf: none) and qi (nv,) their index in q (-1: none).
    """

    def __init__(self, robot, *, friction, stops):
        nv = robot.nv
        z = np.zeros(nv)
        self.Fk = robot.coulomb.copy() if friction else z.copy()
        self.Fs = robot.stiction.copy() if friction else z.copy()
        self.fv = robot.viscous.copy() if friction else z.copy()
        self.rolling = bool(friction and robot.rolling_resistance > 0.0)
        self.frictional = (self.Fs > 0) | (self.Fk > 0)
        if self.rolling:
            self.frictional[:2] = True
        self.lo, self.hi = np.full(nv, -np.inf), np.full(nv, np.inf)
        self.qi = np.full(nv, -1)
        if stops:
            for k, j in enumerate(robot._arm_q_index):
                if np.isfinite(robot.lower[k]) or np.isfinite(robot.upper[k]):
                    self.lo[2 + k], self.hi[2 + k] = robot.lower[k], robot.upper[k]
                    self.qi[2 + k] = j


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


def _weight(robot):
    return robot.total_mass() * -robot.model.gravity.linear[2]


class RollingLoads:
    """Rolling resistance at one set of static loads, in scalars (the inner-loop
    form of `rolling_resistance_batch`): wheel torques k_i sign(φ̇_i) with
    k_i = C_rr N_i r, and each caster's force C_rr N_c against its ground
    velocity (J_x ν, J_y ν), which only the wheel rates move."""

    def __init__(self, robot, q, ws=None):
        ws = workspace(robot) if ws is None else ws
        cx, cy, _ = pin.centerOfMass(robot.model, robot.data, q, False).tolist()
        x, y, c, s = q[:4].tolist()
        dx, dy = cx - x, cy - y
        xp, yp = c * dx + s * dy, c * dy - s * dx
        W = _weight(robot)
        #: static contact loads (k,) N: W (a_i0 + a_i1 x_p + a_i2 y_p), none below 0
        self.N = [max(W * (a0 + a1 * xp + a2 * yp), 0.0) for a0, a1, a2 in ws.A_rows]
        c_rr, r = ws.c_rr, ws.r
        self.k = (c_rr * r * self.N[0], c_rr * r * self.N[1])
        self.casters = [(*rows, c_rr * n) for rows, n in zip(ws.caster_rows, self.N[2:])
                        if n > 0.0]

    def wheel_efforts(self, nu):
        """(f_r, f_l), N·m on the wheel coordinates (left-hand side)."""
        w0, w1 = float(nu[0]), float(nu[1])
        k0, k1 = self.k
        f0, f1 = self.caster_efforts(nu)
        f0 += k0 if w0 > 0 else (-k0 if w0 < 0 else 0.0)
        f1 += k1 if w1 > 0 else (-k1 if w1 < 0 else 0.0)
        return f0, f1

    def caster_efforts(self, nu):
        """The casters' share of `wheel_efforts` alone, (f_r, f_l) N·m."""
        w0, w1 = float(nu[0]), float(nu[1])
        f0 = f1 = 0.0
        for jx0, jx1, jy0, jy1, cN in self.casters:
            vx, vy = jx0 * w0 + jx1 * w1, jy0 * w0 + jy1 * w1
            speed = math.hypot(vx, vy)
            if speed > 0.0:
                k = cN / speed
                f0 += k * (vx * jx0 + vy * jy0)
                f1 += k * (vx * jx1 + vy * jy1)
        return f0, f1


def rolling_loads(robot, q, ws=None):
    """`RollingLoads` at q, reused while q and the robot's revision stay the
    same (a controller and a simulator ask for the same q in one step)."""
    ws = workspace(robot) if ws is None else ws
    cached = ws.loads
    if cached is not None and cached[0] == robot.revision and np.array_equal(cached[1], q):
        return cached[2]
    loads = RollingLoads(robot, q, ws)
    ws.loads = (robot.revision, q.copy(), loads)
    return loads


def rolling_resistance(robot, q, nu):
    """Rolling-resistance efforts f_rr (nv,), on the left-hand side (one state)."""
    f = np.zeros(robot.nv)
    if robot.rolling_resistance != 0.0:
        f[0], f[1] = rolling_loads(robot, q).wheel_efforts(nu)
    return f


def friction_forces(robot, q, nu, smoothing=0.0):
    """f = f_C σ(ν) + f_v ν + f_rr(q, ν), (nv,) (no validation; see `coulomb_viscous`)."""
    f = coulomb_viscous(robot, nu, smoothing)
    if robot.rolling_resistance != 0.0:
        f0, f1 = rolling_loads(robot, q).wheel_efforts(nu)
        f[0] += f0
        f[1] += f1
    return f


def _cop_in_base(q, com_w):
    """Ground projection of the COM in base coordinates, (..., 2)."""
    dx, dy = com_w[..., 0] - q[..., 0], com_w[..., 1] - q[..., 1]
    c, s = q[..., 2], q[..., 3]
    return np.stack([c * dx + s * dy, -s * dx + c * dy], axis=-1)


def static_loads_batch(robot, qs):
    """Static contact loads N (n, k) N at each configuration qs (n, nq): the
    rows of `Workspace.A_pinv` at each COM's ground projection, none below 0
    (no validation)."""
    ws = workspace(robot)
    model, data = robot.model, robot.data
    coms = np.array([pin.centerOfMass(model, data, q, False) for q in qs])
    rhs = np.column_stack([np.ones(len(qs)), _cop_in_base(qs, coms)])      # (n, 3)
    return np.maximum(_weight(robot) * rhs.dot(ws.A_pinv.T), 0.0)          # (n, k)


def caster_forces(robot, nus, N):
    """Each caster's rolling-resistance force F_c = −C_rr N_c v̂_c in base axes,
    (n, n_casters, 2) N, from the rates nus (n, nv) and the loads N (n, k)
    (v_c = (J_x ν, J_y ν) the caster's ground velocity; zero at rest)."""
    ws = workspace(robot)
    vx, vy = nus.dot(ws.Jx.T), nus.dot(ws.Jy.T)                 # (n, n_casters)
    speed = np.hypot(vx, vy)
    k = np.divide(ws.c_rr * N[:, 2:], speed, out=np.zeros_like(speed), where=speed > 0)
    return np.stack([-k * vx, -k * vy], axis=-1)


def wheel_rolling_torques(robot, N, nus):
    """Each drive wheel's own rolling-resistance torque C_rr N_i r sign(φ̇_i),
    (n, 2) N·m, from the loads N (n, k) and the rates nus (n, nv)."""
    return robot.rolling_resistance * robot.wheel_radius * N[:, :2] * np.sign(nus[:, :2])


def rolling_resistance_batch(robot, qs, nus):
    """f_rr (n, nv) for many states (no validation): the loads N (n, k) at each
    q, the wheel torques and the casters' forces mapped by their Jacobians."""
    ws = workspace(robot)
    N = static_loads_batch(robot, qs)
    f = np.zeros_like(nus)
    f[:, :2] = wheel_rolling_torques(robot, N, nus)
    if ws.Jx.shape[0]:
        F = caster_forces(robot, nus, N)
        f -= F[:, :, 0].dot(ws.Jx) + F[:, :, 1].dot(ws.Jy)     # f = −J_cᵀ F
    return f


def friction_batch(robot, qs, nus):
    """Friction efforts f (n, nv) for many states (no validation)."""
    f = coulomb_viscous(robot, nus)
    if robot.rolling_resistance:
        f += rolling_resistance_batch(robot, qs, nus)
    return f


# -------------------------------------------------------------- batches
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


def model_pool(robot, threads):
    """A Pinocchio `ModelPool` of the robot, rebuilt when its inertias change."""
    ws = workspace(robot)
    if ws.pool is None or ws.pool[0] != robot.revision or ws.pool[1] != threads:
        ws.pool = (robot.revision, threads, pin.ModelPool(robot.model, threads))
    return ws.pool[2]


@functools.lru_cache(maxsize=1)
def blas_controller():
    return threadpoolctl.ThreadpoolController()


# ------------------------------------------------------------- compiled
def compiled_inverse_dynamics(robot):
    """The compiled Q = Sᵀ RNEA(q, S ν, S ν̇) of the robot, or None."""
    if robot.mimic:   # the kernel's S is [A 0; I]: no mimic rows
        return None
    ws = workspace(robot)
    if ws.inverse_dynamics is None:
        ws.inverse_dynamics = _compiled.inverse_dynamics_kernel(robot.S)
    return ws.inverse_dynamics


def friction_model(robot):
    """The friction model's named arrays, as the compiled kernel takes them:
    coulomb, viscous (nv,); contact_rows A⁺ (k, 3); caster_rows (k − 2, 4);
    rolling_resistance C_rr; wheel_radius r, m."""
    ws = workspace(robot)
    return {"coulomb": robot.coulomb, "viscous": robot.viscous, "contact_rows": ws.A_pinv,
            "caster_rows": np.array(ws.caster_rows, dtype=float).reshape(-1, 4),
            "rolling_resistance": robot.rolling_resistance, "wheel_radius": robot.wheel_radius}


def compiled_terms(robot):
    """The compiled twin of this module's terms (`opspace._compiled.kernel_terms`):
    methods mass, bias, gravity, jacobian, jdot_nu, friction, rolling,
    contact_loads taking (model, data, q, ...); None if unavailable."""
    if robot.mimic:   # the kernel's S is [A 0; I]: no mimic rows
        return None
    return _compiled.kernel_terms(robot.S, friction_model(robot))


def compiled_plant(robot, locked, friction, stops=True):
    """The compiled plant of the robot (`opspace._compiled.kernel_plant`), or None.

    locked (nv,) bool: coordinates held still; friction: the stick-slip,
    viscous friction and rolling resistance on/off; stops: arm joints stop at
    their position limits (`FrictionLevels`; `opspace.dynamics._stick_slip` is
    the NumPy reference of the plant).
    """
    if robot.mimic:   # the kernel's S is [A 0; I]: no mimic rows (the NumPy loop runs)
        return None
    ws = workspace(robot)
    lv = FrictionLevels(robot, friction=friction, stops=stops)
    return _compiled.kernel_plant(robot.S, np.asarray(locked, bool), lv.Fk, lv.Fs, lv.fv,
                                  lv.frictional, lv.lo, lv.hi, lv.qi, ws.A_pinv,
                                  ws.caster_rows,
                                  robot.rolling_resistance if lv.rolling else 0.0,
                                  robot.wheel_radius)
