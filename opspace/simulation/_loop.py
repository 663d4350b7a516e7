"""The fixed-step loop: the NumPy plant (the reference of the compiled kernel),
RK4 and semi-implicit Euler, payload events, blow-up detection, the recorder
(see the package docstring for the model)."""

from __future__ import annotations

import contextlib
import math

import numpy as np
import pinocchio as pin
from scipy.linalg import lapack

from ..dynamics import bias_forces, compiled_plant, coulomb_viscous, mass_matrix, rolling_loads
from ..errors import ModelError
from ._result import SimulationError, SimulationResult

__all__ = ["simulate"]


class _Plant:
    """Forward dynamics of the free coordinates, written for the inner loop."""

    def __init__(self, robot, locked, friction):
        self.robot, self.model, self.data = robot, robot.model, robot.model.createData()
        self.S, self.St = robot.S, robot.St
        self.free = np.flatnonzero(~locked)
        self.all_free = bool(np.all(~locked))
        self.friction = friction
        self.rolling = friction and robot.rolling_resistance > 0.0
        self.nv = robot.nv
        self._loads = None

    def start_step(self, q):
        """Freeze the static contact loads of the rolling resistance for one step."""
        if self.rolling:
            self._rolling = rolling_loads(self.robot, q).wheel_efforts

    def mass(self, q):
        return mass_matrix(self.robot, q, self.data)

    def accel(self, q, nu, Q):
        """ν̇ (nv,) at (q, ν) under efforts Q; ModelError if M is not PD."""
        return self.accel_from(mass_matrix(self.robot, q, self.data),
                               bias_forces(self.robot, q, nu, self.data), nu, Q)

    def accel_from(self, M, h, nu, Q):
        """ν̇ from the reduced M and h = c + g already computed at (q, ν)."""
        rhs = Q - h
        if self.friction:
            rhs -= coulomb_viscous(self.robot, nu)
            if self.rolling:
                f0, f1 = self._rolling(nu)
                rhs[0] -= f0
                rhs[1] -= f1
        if self.all_free:
            _, x, info = lapack.dposv(M, rhs)
            if info:
                raise ModelError(f"mass matrix not positive definite (LAPACK info={info})")
            return x
        f = self.free
        _, x, info = lapack.dposv(M[np.ix_(f, f)], rhs[f])
        if info:
            raise ModelError(f"mass matrix not positive definite (LAPACK info={info})")
        out = np.zeros(self.nv)
        out[f] = x
        return out


def _apply_event(event, robot, plant, controller_robot, q, nu):
    """Change the payload; returns ν⁺ (module docstring: momentum kept on pick)."""
    if event.kind == "pick":
        M_old = plant.mass(q)
        robot.attach_payload(event.payload)
        M_new = plant.mass(q)
        f = plant.free
        nu = nu.copy()
        _, x, info = lapack.dposv(M_new[np.ix_(f, f)], M_old[np.ix_(f, f)].dot(nu[f]))
        if info:
            raise ModelError("mass matrix not positive definite after the pick")
        nu[f] = x
        if controller_robot is not None and controller_robot is not robot:
            controller_robot.attach_payload(event.estimate or event.payload)
    else:
        robot.detach_payload()
        if controller_robot is not None and controller_robot is not robot:
            controller_robot.detach_payload()
    return nu


def simulate(robot, control=None, *, duration, q0, nu0=None, dt=1e-3, control_period=None,
             integrator="rk4", friction=True, locked=None, events=(), record_every=1,
             blowup=10.0, stability=True, controller_robot=None, progress=None,
             compiled=None):
    """Integrate the robot's reduced dynamics under a sampled controller.

    Parameters
    ----------
    robot : MobileManipulator            the plant (its payload changes with `events`)
    control : callable (t, q, ν) -> (Q, info) or None
        The controller, sampled every `control_period` (zero-order hold); `info`
        may be None or a `CommandInfo` (Q_demand, saturation, error, target).
        None: no input (Q = 0).  The usual one wraps
        `opspace.control.OperationalSpaceController.command` and returns its
        `info` (which carries the target position the run records).
    duration : s;  q0 : (nq,);  nu0 : (nv,) default zeros
    dt : integration step, s;  control_period : s, a multiple of dt (default dt)
    integrator : "rk4" | "euler"
    friction : include Coulomb, viscous friction and rolling resistance
    locked : (nv,) bool or None          coordinates held still (rate 0)
    events : sequence of PayloadEvent
    record_every : keep every k-th step
    blowup : stop when |Q_demand| > blowup × limit
    stability : compute the ZMP, loads and traction over the samples afterwards
    controller_robot : the controller's own MobileManipulator, if it has one
        (events give it the payload `estimate`)
    progress : callable(done_steps, total_steps) or None
    compiled : None (default) | True | False
        The step runs in the compiled kernel (`opspace._kernel`, one C++ call
        per step) when it is available (None) or must be (True: RuntimeError
        if it is not); False: the NumPy reference loop (same equations; the
        tests hold the two to round-off).

    Returns
    -------
    SimulationResult

    Raises
    ------
    SimulationError (with `.result`, the partial run) on a blow-up
    """
    if not (compiled is None or compiled is True or compiled is False):
        raise ValueError(f"`compiled` must be None, True or False, got {compiled!r}")
    if integrator not in ("rk4", "euler"):
        raise ValueError(f"`integrator` must be 'rk4' or 'euler', got {integrator!r}")
    if not (math.isfinite(dt) and dt > 0):
        raise ValueError(f"`dt` must be > 0 s, got {dt}")
    if not (math.isfinite(duration) and duration > 0):
        raise ValueError(f"`duration` must be > 0 s, got {duration}")
    control_period = dt if control_period is None else float(control_period)
    ratio = control_period / dt
    n_ctrl = int(round(ratio))
    if n_ctrl < 1 or abs(ratio - n_ctrl) > 1e-9 * ratio:
        raise ValueError(f"`control_period` {control_period} s must be a multiple of dt {dt} s")
    if isinstance(record_every, bool) or not isinstance(record_every, (int, np.integer)) \
            or record_every < 1:
        raise ValueError(f"`record_every` must be a whole number >= 1, got {record_every!r}")
    n_steps = int(round(duration / dt))
    q = np.array(q0, dtype=float)
    if q.shape != (robot.model.nq,):
        raise ValueError(f"`q0` must have shape ({robot.model.nq},), got {q.shape}")
    nu = np.zeros(robot.nv) if nu0 is None else np.array(nu0, dtype=float)
    if nu.shape != (robot.nv,):
        raise ValueError(f"`nu0` must have shape ({robot.nv},), got {nu.shape}")
    locked = np.zeros(robot.nv, bool) if locked is None else np.asarray(locked, bool)
    nu[locked] = 0.0
    any_locked = bool(locked.any())
    events = sorted(events, key=lambda e: e.t)
    plant = _Plant(robot, locked, friction)
    kernel = None
    if compiled is None or compiled:
        kernel = compiled_plant(robot, locked, friction)
        if kernel is None and compiled:
            raise RuntimeError("the compiled simulation kernel (opspace._kernel) is not "
                               "available (not built, or a joint mimics another): reinstall "
                               "opspace with a C++ compiler on PATH, or use compiled=None")
    scratch = np.zeros(robot.nv)
    model, S = robot.model, robot.S
    S_h = (S * (0.5 * dt), S * dt, S * (dt / 6.0))     # S pre-scaled for the RK4 stages
    limit = robot.effort_limit
    finite_limit = np.isfinite(limit)
    n_rec = n_steps // record_every + 1
    rec = _Recorder(robot, n_rec, compiled=compiled is not False)
    Q = np.zeros(robot.nv)
    info = None
    t = 0.0
    k_event = 0
    status, message = "completed", "completed"
    h = dt
    # the plant's payload (and the controller's own model's) are restored afterwards
    with contextlib.ExitStack() as kept:
        kept.enter_context(robot.kept())
        if controller_robot is not None and controller_robot is not robot:
            kept.enter_context(controller_robot.kept())
        try:
            t_event = events[0].t - 1e-12 if events else math.inf
            held = robot.payload is not None
            for step in range(n_steps + 1):
                t = step * dt
                while t >= t_event:
                    nu = _apply_event(events[k_event], robot, plant, controller_robot, q, nu)
                    k_event += 1
                    t_event = events[k_event].t - 1e-12 if k_event < len(events) else math.inf
                    held = robot.payload is not None
                if control is not None and step % n_ctrl == 0:
                    Q, info = control(t, q, nu)
                    if any_locked:
                        Q = np.where(locked, 0.0, Q)
                    # the blow-up test only when something may be over its limit
                    if info is None or info.saturated.any():
                        Qd = info.Q_demand if info is not None else Q
                        over = finite_limit & (np.abs(Qd) > blowup * limit)
                        if over.any():
                            i = int(np.argmax(over))
                            raise _Stop(f"effort of {robot.coordinate_names[i]} demanded "
                                        f"{Qd[i]:.4g}, more than {blowup:g} x its limit "
                                        f"{limit[i]:g}")
                # the state before the step is recorded; ν̇ at it lands in `out`
                out = rec.add(t, q, nu, Q, info, held) if step % record_every == 0 else scratch
                if kernel is not None:         # one compiled call: q, ν advance in place
                    if step == n_steps:
                        code = kernel.accel(model, plant.data, q, nu, Q, out)
                    elif integrator == "rk4":
                        code = kernel.rk4(model, plant.data, q, nu, Q, h, out)
                    else:
                        code = kernel.euler(model, plant.data, q, nu, Q, h, out)
                    if code == 1:
                        raise ModelError("mass matrix not positive definite")
                    if code == 2:
                        raise _Stop("the state became non-finite (NaN or inf)")
                    if step == n_steps:
                        break
                else:
                    plant.start_step(q)
                    Mh = getattr(info, "Mh", None) if step % n_ctrl == 0 else None
                    nu_dot = (plant.accel(q, nu, Q) if Mh is None
                              else plant.accel_from(*Mh, nu, Q))
                    out[:] = nu_dot
                    if step == n_steps:
                        break
                    if integrator == "rk4":
                        q, nu = _rk4(model, plant, S_h, q, nu, nu_dot, Q, h)
                    else:
                        nu = nu + h * nu_dot
                        q = pin.integrate(model, q, S.dot(nu) * h)
                    if not (math.isfinite(nu.dot(nu)) and math.isfinite(q.dot(q))):
                        raise _Stop("the state became non-finite (NaN or inf)")
                if progress and step % 500 == 0:
                    progress(step, n_steps)
        except (_Stop, ModelError) as exc:
            status, message = "stopped", f"stopped at t = {t:.4f} s: {exc}"
        robot_payload_end = robot.payload
    picked = next((e.payload for e in events if e.kind == "pick"), robot_payload_end)
    result = rec.result(robot, status, message, dt, control_period, integrator,
                        stability=stability, end_payload=picked,
                        loop="compiled" if kernel is not None else "numpy")
    if status != "completed":
        raise SimulationError(message, time=t, cause=message, result=result)
    if progress:
        progress(n_steps, n_steps)
    return result


class _Stop(Exception):
    pass


def _rk4(model, plant, S_h, q, nu, a1, Q, h):
    """One classical RK4 step on (q, ν); S_h = (S h/2, S h, S h/6)."""
    S2, S1, S6 = S_h
    h2 = 0.5 * h
    nu2 = a1 * h2
    nu2 += nu
    a2 = plant.accel(pin.integrate(model, q, S2.dot(nu)), nu2, Q)
    nu3 = a2 * h2
    nu3 += nu
    a3 = plant.accel(pin.integrate(model, q, S2.dot(nu2)), nu3, Q)
    nu4 = a3 * h
    nu4 += nu
    a4 = plant.accel(pin.integrate(model, q, S1.dot(nu3)), nu4, Q)
    nu2 += nu3
    nu2 *= 2.0
    nu2 += nu
    nu2 += nu4                              # ν₁ + 2ν₂ + 2ν₃ + ν₄
    a2 += a3
    a2 *= 2.0
    a2 += a1
    a2 += a4                                # ν̇₁ + 2ν̇₂ + 2ν̇₃ + ν̇₄
    a2 *= h / 6.0
    a2 += nu
    return pin.integrate(model, q, S6.dot(nu2)), a2


class _Recorder:
    """The samples of a run: one row of [q | ν | Q | Q_demand | e | p_d] per sample
    (written by one call), with t, ν̇, the saturation and payload flags beside it."""

    def __init__(self, robot, n, compiled):
        self.nq, self.nv, self.n, self.compiled = robot.model.nq, robot.nv, n, compiled
        self.t = np.empty(n)
        self.nu_dot = np.empty((n, self.nv))
        self.sat = np.zeros((n, self.nv), bool)
        self.payload = np.zeros(n, bool)
        self.table = None
        self.i = 0

    def _columns(self, k):
        """The table for a task error of width k (the rows so far are kept)."""
        nq, nv = self.nq, self.nv
        old = self.table
        self.table = np.full((self.n, nq + 3 * nv + k + 3), np.nan)
        cut = np.cumsum([0, nq, nv, nv, nv, k, 3])
        cols = [self.table[:, a:b] for a, b in zip(cut[:-1], cut[1:])]
        if old is not None:
            for new, prev in zip(cols, (self.q, self.nu, self.Q, self.Qd, None, self.target)):
                if prev is not None:
                    new[:self.i] = prev[:self.i]
        self.q, self.nu, self.Q, self.Qd, self.error, self.target = cols
        self._no_target, self._no_error, self.k = np.full(3, np.nan), np.full(k, np.nan), k

    def add(self, t, q, nu, Q, info, has_payload):
        """Record a sample; returns its ν̇ row, for the caller to fill."""
        i = self.i
        if self.table is None or (info is not None and len(info.error) != self.k):
            self._columns(0 if info is None else len(info.error))
        self.t[i] = t
        self.payload[i] = has_payload
        if info is None:
            np.concatenate((q, nu, Q, Q, self._no_error, self._no_target), out=self.table[i])
        else:
            tgt = getattr(info, "target_position", None)
            np.concatenate((q, nu, Q, info.Q_demand, info.error,
                            self._no_target if tgt is None else tgt), out=self.table[i])
            self.sat[i] = info.saturated
        self.i += 1
        return self.nu_dot[i]

    def result(self, robot, status, message, dt, control_period, integrator, *, stability,
               end_payload, loop):
        n = self.i
        sl = slice(0, n)
        if self.table is None:
            self._columns(0)
        fid = robot.tool_frame_id
        from .._compiled import frame_placements
        poses = frame_placements(robot, self.q[sl], fid) if self.compiled else None
        if poses is None:
            data = robot.model.createData()
            pos, rot = np.empty((n, 3)), np.empty((n, 3, 3))
            for i in range(n):
                pin.framesForwardKinematics(robot.model, data, self.q[i])
                pos[i], rot[i] = data.oMf[fid].translation, data.oMf[fid].rotation
        else:
            pos, rot = poses
        err = self.error[sl].copy()
        track = None
        if stability and n > 0:
            track = _stability(robot, self.q[sl], self.nu[sl], self.nu_dot[sl], self.Q[sl],
                               self.payload[sl], end_payload)
        prismatic = {name: unit == "m" for name, unit in zip(robot.arm_joint_names, robot.arm_units)}
        return SimulationResult(
            t=self.t[sl].copy(), q=self.q[sl].copy(), nu=self.nu[sl].copy(),
            nu_dot=self.nu_dot[sl].copy(), Q=self.Q[sl].copy(), Q_demand=self.Qd[sl].copy(),
            saturated=self.sat[sl].copy(), payload=self.payload[sl].copy(), tool_position=pos,
            tool_rotation=rot, target_position=self.target[sl].copy(), error=err, status=status,
            message=message, dt=dt, control_period=control_period, integrator=integrator,
            coordinate_names=tuple(robot.coordinate_names), effort_limit=robot.effort_limit.copy(),
            stability=track, extra={"prismatic": prismatic, "loop": loop})


def _stability(robot, qs, nus, nu_dots, Qs, payload, end_payload):
    """ZMP, loads and traction over the samples, grouped by payload state."""
    from ..stability import merge_tracks
    from ..stability import stability_track, tyre_forces

    pieces = []
    with robot.kept():
        for held in (False, True):
            m = payload == held
            if not m.any():
                continue
            if held:
                robot.attach_payload(end_payload or robot.description.payload)
            else:
                robot.detach_payload()
            F = tyre_forces(robot, qs[m], nus[m], nu_dots[m], Qs[m])
            try:
                pieces.append((m, stability_track(robot, qs[m], nus[m], nu_dots[m], F)))
            except ValueError:      # airborne at some sample: no track
                return None
    return merge_tracks(pieces, len(qs))
