"""The operational-space controller (see the package docstring for the law)."""

from __future__ import annotations

import functools
import math

import numpy as np
import pinocchio as pin
from scipy.linalg import lapack

from .. import _compiled
from .._common import as_vector as _vec
from ..dynamics import DEFAULT_DAMPING
from ..dynamics import damping_threshold as _threshold
from ..dynamics import coulomb_viscous, frame_terms, rolling_loads
from ..dynamics import resolve_frame as _frame
from ..dynamics import solve_spd as _solve_spd
from ..dynamics import solve_task as _solve_task
from ..dynamics import task_rhs as _task_rhs
from ..dynamics import task_rows as _rows
from ..dynamics import friction_model, task_space
from ._targets import _STILL, BasePlan, CommandInfo, CommandSample, Gains, Target, _frozen

__all__ = ["OperationalSpaceController"]

#: the fields of the compiled command's target, each of its size in this order
#: when the kernel lays them out contiguously so (`_target_order` checks)
_TARGET_FIELDS = (("position", 3), ("rotation", 9), ("velocity", 6), ("acceleration", 6),
                  ("plan_v", 1), ("plan_omega", 1), ("plan_a", 1), ("plan_alpha", 1))
_EYE3 = np.eye(3)


def _concatenated(target, plan):
    """The command input in the order of `_TARGET_FIELDS` (one concatenation)."""
    R = _EYE3 if target.rotation is None else target.rotation
    return np.concatenate((target.position, R.ravel(), target.velocity, target.acceleration,
                           (plan.v, plan.omega, plan.a, plan.alpha)))


@functools.cache
def _target_order():
    """The kernel's target fields as ((name, size), ...) in the order of their
    offsets when they tile the vector without gaps; None without the kernel."""
    layout = _compiled.target_layout()
    if layout is None:
        return None
    order = tuple(sorted(layout.items(), key=lambda item: item[1][0]))
    at, fields = 0, []
    for name, (offset, size) in order:
        if offset != at:
            return ()
        fields.append((name, size))
        at += size
    return tuple(fields)

_LWA = pin.LOCAL_WORLD_ALIGNED
_WORLD = pin.Convention.WORLD
_MODES = ("whole_body", "arm_only")
_F64 = np.dtype(float)


# -------------------------------------------------------------- the controller
class OperationalSpaceController:
    """Task-space computed-torque controller of one frame (see the module docstring).

    Parameters
    ----------
    robot : MobileManipulator
    frame : str or None              None = the robot's tool frame
    axes : "linear" | "angular" | "full" | selection (see `task_space`)
    mode : "whole_body" | "arm_only"
    gains : Gains (k × k) or None    default: stiffness 400 1/s², ζ = 1 on every row
    posture : (n_arm,) or pose name or None   q₀ of the null-space posture; None:
                                     null-space joint damping only
    posture_gains : Gains (n_arm × n_arm) or None   default stiffness 25 1/s², ζ = 1
    wheel_gain : float >= 0          K_w of the wheel-rate servo, 1/s
    friction_feedforward : bool      add f(q, ν) (the model's friction) to Q
    friction_velocity : float >= 0   v_s, rad/s or m/s: feed the Coulomb part forward as
                                     f_C tanh(ν / v_s) instead of f_C sign(ν); 0 = exact
                                     model.  A sampled controller needs v_s > 0: with the
                                     sign of a velocity sampled near zero the feed-forward
                                     pushes the wrong way half the time (a limit cycle)
    effort_limit : (nv,) or None     |Q_i| limits, N·m or N (inf: none); None = robot's
    damping : float or None          singularity threshold ε (see `task_space`)
    compiled : None | True | False   the command runs in the compiled kernel
                                     (`opspace._kernel`) when available (None), must
                                     (True: RuntimeError if not), or never (False: the
                                     NumPy path); the two agree to round-off (tested)

    Raises ConfigError (unknown frame or pose) and ValueError (anything else).

    Attributes
    ----------
    info : CommandInfo or None   what the last `command` did (saturation per coordinate)
    k : int, axes : tuple[str], frame : str, mode : str, effort_limit : ndarray (nv,)

    The parameters are fixed at construction (the compiled command holds a
    copy): make a new controller to change gains, limits or options.
    `command` validates its inputs; a simulation's inner loop that has already
    checked them calls `fast_command` (a `CommandSample` back).  One
    controller owns a Pinocchio Data and work buffers: do not share it between
    threads.
    """

    def __init__(self, robot, frame=None, axes="full", *, mode="whole_body", gains=None,
                 posture=None, posture_gains=None, wheel_gain=10.0, friction_feedforward=False,
                 friction_velocity=0.0, effort_limit=None, damping=DEFAULT_DAMPING,
                 compiled=None):
        if mode not in _MODES:
            raise ValueError(f"`mode` must be 'whole_body' or 'arm_only', got {mode!r}")
        self.robot, self.mode = robot, mode
        self._fid, self.frame = _frame(robot, frame)
        self._rows, self.axes = _rows(axes)
        k = self.k = len(self.axes)
        self._angular = any(a.startswith("r") for a in self.axes)
        self.gains = self._gains("gains", gains, k, 400.0)
        self.posture_gains = self._gains("posture_gains", posture_gains, robot.n_arm, 25.0)
        if posture is None:
            self.posture = None
        else:
            q0 = robot.pose(posture) if isinstance(posture, str) else posture
            self.posture = _frozen("posture", robot.arm_vector("posture", q0), (robot.n_arm,))
        self.wheel_gain = float(wheel_gain)
        if not (math.isfinite(self.wheel_gain) and self.wheel_gain >= 0.0):
            raise ValueError(f"`wheel_gain` must be finite and >= 0 (1/s), got {wheel_gain!r}")
        self.friction_feedforward = bool(friction_feedforward)
        self.friction_velocity = float(friction_velocity)
        if not (math.isfinite(self.friction_velocity) and self.friction_velocity >= 0.0):
            raise ValueError(f"`friction_velocity` must be finite and >= 0 (rad/s or m/s), "
                             f"got {friction_velocity!r}")
        limit = robot.effort_limit if effort_limit is None else effort_limit
        limit = np.array(limit, dtype=float)
        if limit.shape != (robot.nv,) or np.any(np.isnan(limit)) or np.any(limit <= 0.0):
            raise ValueError(f"`effort_limit` must have shape ({robot.nv},) with entries > 0 "
                             f"(inf for none), got {limit}")
        limit.setflags(write=False)
        self.effort_limit = limit
        self.damping = _threshold(damping)
        self._data = robot.model.createData()
        self._zero_v = np.zeros(robot.model.nv)
        self._neg_limit = -limit
        self._whole_body = mode == "whole_body"
        # a* − J̇ν = G z, z = [e₆; ẋ_d − ẋ; ẍ_d − J̇ν] (6 + 2k,),
        # G = [K_p on the selected rows of e₆ | K_d | I]
        G = np.zeros((k, 6 + 2 * k))
        G[:, np.arange(6)[self._rows]] = self.gains.Kp
        G[:, 6:6 + k] = self.gains.Kd
        G[:, 6 + k:] = np.eye(k)
        self._G = G
        # ν̇₀ = G₀ [ν; q₀ − q_arm]: −K_w on the wheel rates (the wheel-rate servo),
        # −K_d0 on the arm rates, K_p0 on the posture error (+ the base plan's terms)
        nv = robot.nv
        G0 = np.zeros((nv, nv + robot.n_arm))
        G0[:2, :2] = -self.wheel_gain * np.eye(2)
        G0[2:, 2:nv] = -self.posture_gains.Kd
        G0[2:, nv:] = self.posture_gains.Kp
        if mode == "arm_only":
            G0[2:] *= -1.0   # the arm-only path uses u = [ν̇_w*; −ν̇₀,a]
        if self.posture is None:   # no posture target: null-space damping only
            G0[:, nv:] = 0.0
        self._G0 = G0
        self._q0 = np.zeros(robot.n_arm) if self.posture is None else self.posture
        self._fe = np.full(k + 1, -1.0)
        # one product GG w = [a* − J̇ν; ν̇₀], GG = diag(G, G₀), w = [z; ν; q₀ − q_arm]
        nz = 6 + 2 * k
        GG = np.zeros((k + nv, nz + nv + robot.n_arm))
        GG[:k, :nz], GG[k:, nz:] = G, G0
        self._GG, self._w = GG, np.zeros(nz + nv + robot.n_arm)
        self._z, self._s0 = self._w[:nz], self._w[nz:]
        # M⁻¹'s right-hand sides [Jᵀ | h'] (Fortran order, for LAPACK); J (k, nv) is
        # a C-order view of the same memory, written in place each call
        n = robot.nv if self._whole_body else robot.n_arm
        self._rhs1 = np.empty((n, k + 1), order="F")
        self._rhs2 = _task_rhs(k, 1)
        self._Jt = self._rhs1[:, :k]
        self._J = self._Jt.T if self._whole_body else np.empty((k, robot.nv))
        eps = self.damping
        self._hot = (robot, robot.model, self._data, self._fid, self._rows, k, robot.S, robot.St,
                     self._J, self._Jt, self._rhs1[:, k], self._rhs2[:, k], self._rhs1,
                     self._rhs2, self._GG, self._w, self._s0, robot.nv, self._zero_v, eps * eps,
                     range(k), self._z, self._z[:3], self._z[6:6 + k], self._z[6 + k:])
        # the arm positions are q[6:] unless an arm joint is continuous (cos, sin)
        # and no joint mimics another (q[6:] would hold the followers too)
        self._arm_slice = robot.model.nq == robot.model.nv + 1 and not robot.mimic
        self._q_shape, self._nu_shape = (robot.model.nq,), (robot.nv,)
        self._info = None
        self._kernel = self._make_kernel(compiled)
        # the packing `command` uses: the concatenation when the kernel's layout is its order
        self._pack = _concatenated if _target_order() == _TARGET_FIELDS else self.pack

    def _make_kernel(self, compiled):
        """The compiled command (`_kernel.Controller`) and its output views, or None."""
        if not (compiled is None or compiled is True or compiled is False):
            raise ValueError(f"`compiled` must be None, True or False, got {compiled!r}")
        robot = self.robot
        # the kernel's posture error is q₀ − q[6:] (no continuous arm joint)
        usable = (_compiled.available() and not robot.mimic
                  and (self.posture is None or self._arm_slice))
        if compiled and not usable:
            raise RuntimeError("the compiled command is not available (opspace._kernel not "
                               "built, an arm joint is continuous, or a joint mimics "
                               "another): use compiled=None")
        if compiled is False or not usable:
            return None
        options = {"frame_id": int(self._fid), "whole_body": self._whole_body,
                   "angular": self._angular, "posture": self.posture is not None,
                   "friction_feedforward": self.friction_feedforward,
                   "wheel_radius": robot.wheel_radius, "half_track": robot.half_track,
                   "wheel_gain": self.wheel_gain, "friction_velocity": self.friction_velocity,
                   "damping2": self.damping ** 2}
        rows = np.arange(6)[self._rows]
        ctrl = _compiled.kernel_controller(robot.S, self._GG, self._q0, self.effort_limit, rows,
                                           options, friction_model(robot))
        # the output buffer and its named views, laid out as the kernel says
        nv, k = robot.nv, self.k
        layout = _compiled.output_layout(nv, k)
        out = np.zeros(sum(r * c for _, _, r, c in layout))
        views = {name: (out[o:o + r] if c == 1 else out[o:o + r * c].reshape(r, c))
                 for name, o, r, c in layout}
        g = views["g"]
        info = (views["Q_sent"], views["Q"], views["LB"], views["Jdot_nu"], g[:k], g[k:], False,
                views["J"], views["z"])
        # the task error: a view of z when the rows are contiguous, else taken per call
        error = views["z"][:6][self._rows] if isinstance(self._rows, slice) else None
        return (ctrl.command, robot.model, self._data, out, info, (views["M"], views["h"]),
                error)

    @staticmethod
    def pack(target, plan=None):
        """The target and base plan as the compiled command reads them (one
        vector laid out as the kernel says, `pack_many`); None without the kernel."""
        plan = _STILL if plan is None else plan
        if _target_order() == _TARGET_FIELDS:      # the kernel's order: one concatenation
            return _concatenated(target, plan)
        R = _EYE3 if target.rotation is None else target.rotation
        x = OperationalSpaceController.pack_many(
            target.position[None], R[None], target.velocity[None], target.acceleration[None],
            np.array([[plan.v, plan.omega, plan.a, plan.alpha]]))
        return None if x is None else x[0]

    @staticmethod
    def pack_many(positions, rotations, velocities, accelerations, plans):
        """n targets and base plans as rows (n, ·) of the compiled command's input,
        each field where the kernel's layout puts it (`_compiled.target_layout`):
        positions (n, 3) m, rotations (n, 3, 3), velocities and accelerations
        (n, 6) [linear; angular], plans (n, 4) = (v, ω, a, α) of the base.
        None without the kernel."""
        layout = _compiled.target_layout()
        if layout is None:
            return None
        n = len(positions)
        x = np.empty((n, sum(size for _, size in layout.values())))
        fields = {"position": positions, "rotation": np.reshape(rotations, (n, 9)),
                  "velocity": velocities, "acceleration": accelerations,
                  "plan_v": plans[:, 0:1], "plan_omega": plans[:, 1:2], "plan_a": plans[:, 2:3],
                  "plan_alpha": plans[:, 3:4]}
        for name, (offset, size) in layout.items():
            x[:, offset:offset + size] = fields[name]
        return x

    @staticmethod
    def _gains(name, gains, size, stiffness):
        if gains is None:
            return Gains.from_stiffness(stiffness, 1.0, size=size)
        if not isinstance(gains, Gains):
            raise ValueError(f"`{name}` must be a Gains (Gains(Kp, Kd) or "
                             f"Gains.from_stiffness(...)), got {type(gains).__name__}")
        if gains.size != size:
            raise ValueError(f"`{name}` must be {size} x {size}, got {gains.size} x {gains.size}")
        return gains

    # ---------------------------------------------------------------- command
    def command(self, q, nu, target, *, base=None):
        """Efforts Q (nv,), N·m at the wheels and the arm joints (N for prismatic).

        Parameters
        ----------
        q : ndarray (robot.model.nq,)   full configuration
        nu : ndarray (robot.nv,)        reduced velocity
        target : Target                 world-frame target of the task frame
        base : BasePlan or None         planned base motion (None: stand still)

        The call's details (saturation per coordinate, errors, damping) are in
        `info` afterwards.
        """
        # the common case (float arrays of the right shape) checked inline: x·x is
        # finite iff every entry is (see `opspace._common.as_vector`)
        if (type(q) is not np.ndarray or q.shape != self._q_shape or q.dtype is not _F64
                or not math.isfinite(q.dot(q))):
            q = _vec("q", q, self.robot.model.nq)
        if (type(nu) is not np.ndarray or nu.shape != self._nu_shape or nu.dtype is not _F64
                or not math.isfinite(nu.dot(nu))):
            nu = _vec("nu", nu, self.robot.nv)
        if type(target) is not Target and not isinstance(target, Target):
            raise ValueError(f"`target` must be a Target, got {type(target).__name__}")
        if self._angular and target.rotation is None:
            raise ValueError(f"the task has angular rows {self.axes}: the target needs a "
                             "`rotation`")
        if base is None:
            base = _STILL
        elif not isinstance(base, BasePlan):
            raise ValueError(f"`base` must be a BasePlan or None, got {type(base).__name__}")
        return self._command(q, nu, target, base).copy()

    def _command(self, q, nu, target, plan):
        """The unvalidated fast path of `command`: compiled when available."""
        if self._kernel is not None:
            return self._command_packed(q, nu, self._pack(target, plan), target, plan)
        return self._command_numpy(q, nu, target, plan)

    def _command_packed(self, q, nu, x, target, plan):
        """The compiled command at (q, ν) for the target and plan packed in x
        (`pack`).  The returned Q is a view of a buffer that the next call
        overwrites.  Near a singularity the NumPy path runs instead."""
        kernel = self._kernel
        if kernel[0](kernel[1], kernel[2], q, nu, x, kernel[3]):
            return self._command_numpy(q, nu, target, plan)
        self._info, self._Mh, self._error = kernel[4], kernel[5], kernel[6]
        self._target_position = target.position
        if self._error is None:
            self._error = kernel[4][8][:6][self._rows]
        return kernel[4][0]

    def fast_command(self, q, nu, target, plan, packed=None):
        """The command without validation, as a named record (a simulator's inner
        loop, whose inputs are checked once beforehand).

        q (nq,), ν (nv,) float arrays; target a `Target` (with a rotation when
        the task has angular rows); plan a `BasePlan`; packed: the same target
        and plan from `pack` / `pack_many` (the compiled command reads it; None:
        packed here when the kernel runs).  Returns a `CommandSample` whose
        arrays the next call overwrites.
        """
        if self._kernel is not None:
            Q = self._command_packed(q, nu, self._pack(target, plan) if packed is None else packed,
                                     target, plan)
        else:
            Q = self._command_numpy(q, nu, target, plan)
        M, h = self._Mh
        return CommandSample(Q, self._info[1], self._error, self._target_position, M, h)

    def _command_numpy(self, q, nu, target, plan):
        """The command in NumPy (the reference of the compiled path).

        With h' = h − M ν̇₀ (whole body; arm only: h_a + M_aw ν̇_w* − M_a ν̇₀), two
        dposv calls give Y = M⁻¹ [Jᵀ | h'] and Λ [I | b'] (`_solve_task`), b' =
        a* − J̇ν + J M⁻¹ h' (− J_base ν̇_w*) = b − J ν̇₀.  Then F = Λ b = Λ a* + μ + p
        (+ Γ ν̇_w*) and, as Nᵀ M ν̇₀ = M ν̇₀ − Jᵀ Λ J ν̇₀,  Q = Jᵀ Λ b' + M ν̇₀.
        The vector z = [e₆; ẋ_d − ẋ; ẍ_d − J̇ν] is multiplied once by
        G = [K_p | K_d | I], giving a* − J̇ν.  J, h' and z live in buffers that the
        next call overwrites (`info` reads them back for the last call only).
        """
        (robot, model, data, fid, rows, k, S, St, J, Jt, h_col, b, rhs1, rhs2, GG, w, s0,
         nv, zero_v, eps2, diag, z, z_e, z_v, z_a) = self._hot
        self._info = None                              # the buffers are about to change
        M, J6, h_pin, Jdot_nu, _ = frame_terms(robot, data, q, S.dot(nu), fid, rows)
        np.dot(J6, S, out=J)
        h = St.dot(h_pin)
        H = pin.updateFramePlacement(model, data, fid).homogeneous   # one copy: [R p; 0 1]

        np.subtract(target.position, H[:3, 3], out=z_e)
        if self._angular:
            z[3:6] = pin.log3(target.rotation.dot(H[:3, :3].T))
        np.subtract(target.velocity[rows], J.dot(nu), out=z_v)
        np.subtract(target.acceleration[rows], Jdot_nu, out=z_a)

        # posture accelerations ν̇₀ = G₀ [ν; q₀ − q_arm] (+ the base plan's wheel terms)
        s0[:nv] = nu
        if self.posture is None:
            pass                                       # G₀'s posture columns are zero
        elif self._arm_slice:
            np.subtract(self._q0, q[6:], out=s0[nv:])
        else:
            s0[nv:] = self._posture_error(q)
        g = GG.dot(w)                                 # [a* − J̇ν; ν̇₀] in one product
        ga, nd0 = g[:k], g[k:]
        if plan is not _STILL:
            nd0[:2] += self._plan_rates(plan)
        if self._whole_body:
            M_nd0 = M.dot(nd0)
            np.subtract(h, M_nd0, out=h_col)
            _, Y, info = lapack.dposv(M, rhs1)         # [M⁻¹Jᵀ | M⁻¹h']
            if info:
                _solve_spd(M, rhs1)                   # raises the ModelError
            JY = J.dot(Y)
            np.add(JY[:, k], ga, out=b)               # b' = J M⁻¹h' + a* − J̇ν
        else:
            # here nd0 = u = [ν̇_w*; −ν̇₀,a] (G₀'s arm rows negated): h' = h_a + M[2:] u
            Jt[:] = J[:, 2:].T
            np.dot(M[2:], nd0, out=h_col)
            h_col += h[2:]
            M_a = M[2:, 2:]
            _, Y, info = lapack.dposv(M_a, rhs1)       # [M_a⁻¹J_aᵀ | M_a⁻¹h']
            if info:
                _solve_spd(M_a, rhs1)
            JY = J[:, 2:].dot(Y)
            np.add(JY[:, k], ga, out=b)
            b -= J[:, :2].dot(nd0[:2])                # − J_base ν̇_w*
        Linv = JY[:, :k]
        _, LB, info = lapack.dposv(Linv, rhs2)         # Λ [I | b']
        damped = False
        if info or (eps2 and sum(map(LB.item, diag, diag)) * eps2 > 1.0):
            LB, damped = _solve_task(Linv, rhs2, self.damping)   # the exact / damped path
        if self._whole_body:
            Q = LB[:, k].dot(J)                        # Jᵀ F_net (J is C-order)
            Q += M_nd0
        else:
            # ν̇ = [ν̇_w*; M_a⁻¹(Q_a − h_a − M_aw ν̇_w*)] = [ν̇_w*; Y [F_net; −1]], then the
            # wheels' and the arm's efforts at once: Q = M ν̇ + h (Q_a = J_aᵀ F_net + M_a ν̇₀)
            fe = self._fe
            fe[:k] = LB[:, k]
            nu_dot = np.empty(nv)
            nu_dot[:2] = nd0[:2]
            np.dot(Y, fe, out=nu_dot[2:])
            Q = M.dot(nu_dot)
            Q += h
        if self.friction_feedforward:
            # f = f_C sign(ν) (or f_C tanh(ν/v_s), smoothed) + f_v ν + rolling resistance
            Q += coulomb_viscous(robot, nu, self.friction_velocity)
            if robot.rolling_resistance:
                f0, f1 = rolling_loads(robot, q).wheel_efforts(nu)
                Q[0] += f0
                Q[1] += f1
        Q_sent = np.minimum(Q, self.effort_limit)
        np.maximum(Q_sent, self._neg_limit, out=Q_sent)
        self._info = (Q_sent, Q, LB, Jdot_nu, ga, nd0, damped, J, z)
        self._Mh = (M, h)      # the reduced M and c + g at this (q, ν), for a simulator to reuse
        self._error = z[:6][self._rows]
        self._target_position = target.position
        return Q_sent

    def _posture_error(self, q):
        """q₀ − q_arm; continuous joints the shortest way round."""
        err = self._q0 - self.robot.arm_positions(q)
        cont = ~np.isfinite(self.robot.lower)
        err[cont] = np.angle(np.exp(1j * err[cont]))
        return err

    def _plan_rates(self, plan):
        """ν̇_w,plan + K_w ν_w,plan for a base plan (the −K_w ν_w part is in K_d0)."""
        r, b, kw = self.robot.wheel_radius, self.robot.half_track, self.wheel_gain
        v, w = plan.a + kw * plan.v, plan.alpha + kw * plan.omega
        return np.array(((v + b * w) / r, (v - b * w) / r))

    def last_demand(self):
        """(Q_demand, task error) of the last call, cheaply (arrays owned by the
        controller until the next call); see `info` for everything."""
        return self._info[1], self._error

    @property
    def info(self):
        """`CommandInfo` of the last `command` call (None before the first)."""
        if self._info is None:
            return None
        Q, Q_demand, LB, Jdot_nu, ga, nd0, damped, J, z = self._info
        k = self.k                              # the buffers hold the last call's values
        a_star = ga + Jdot_nu
        J_nd0 = J.dot(nd0) if self._whole_body else -J[:, 2:].dot(nd0[2:])
        F = LB[:, k] + LB[:, :k].dot(J_nd0)       # Λ b' + Λ J ν̇₀
        return CommandInfo(Q=Q.copy(), Q_demand=Q_demand.copy(),
                           saturated=np.abs(Q_demand) > self.effort_limit,
                           error=z[:6][self._rows].copy(), velocity_error=z[6:6 + k].copy(),
                           a_star=a_star, F=F, damped=bool(damped),
                           target_position=np.array(self._target_position, dtype=float))

    # ------------------------------------------------------------- inspection
    def task_space(self, q, nu):
        """The task-space terms this controller uses at (q, ν) (`TaskSpaceTerms`)."""
        base = "whole_body" if self.mode == "whole_body" else "locked"
        return task_space(self.robot, q, nu, self.frame, self.axes, base=base,
                          damping=self.damping or None)

    def __repr__(self):
        return (f"OperationalSpaceController(frame={self.frame!r}, axes={self.axes}, "
                f"mode={self.mode!r})")
