"""The fixed-step loop: the NumPy plant (the reference of the compiled kernel),
RK4 and semi-implicit Euler, payload events, blow-up detection, the recorder
(see the package docstring for the model)."""

from __future__ import annotations

import contextlib
import dataclasses
import math

import numpy as np
import pinocchio as pin
from scipy.linalg import lapack

from ..dynamics import StickSlip, bias_forces, compiled_plant, mass_matrix, solve_spd
from ..errors import ModelError
from ._result import SimulationError, SimulationResult
from ._verdict import findings, verdict

__all__ = ["simulate"]


class _Plant:
    """Forward dynamics of the free coordinates, written for the inner loop; the
    stick-slip friction and the joint stops (`opspace.dynamics._stick_slip`)
    decide, at each step's start, which coordinates are held."""

    def __init__(self, robot, locked, friction, stops=True):
        self.robot, self.model, self.data = robot, robot.model, robot.model.createData()
        self.S, self.St = robot.S, robot.St
        self.nv = robot.nv
        self.ss = StickSlip(robot, locked, friction=friction, stops=stops)

    @property
    def free(self):
        return np.flatnonzero(self.ss.free)

    def begin(self, q, nu, Q, Mh=None):
        """Start a step: stops, impulses and the stuck set; ν̇ at the start."""
        return self.ss.begin(self, q, nu, Q, Mh)

    def mass(self, q):
        return mass_matrix(self.robot, q, self.data)

    def bias(self, q, nu):
        """h = c + g (nv,) at (q, ν)."""
        return bias_forces(self.robot, q, nu, self.data)

    def accel(self, q, nu, Q):
        """ν̇ (nv,) at (q, ν) under efforts Q inside a step (the held set and the
        friction directions of its start); ModelError if M is not PD."""
        rhs = Q - self.bias(q, nu) - self.ss.stage_friction(nu)
        M = self.mass(q)
        free = self.ss.free
        out = np.zeros(self.nv)
        if free.all():
            out[:] = solve_spd(M, rhs)
        elif free.any():
            out[free] = solve_spd(M[np.ix_(free, free)], rhs[free])
        return out


def _payload_point(robot, data, q, com):
    """J_p (3, nv): the reduced Jacobian of the tool-fixed point at `com` (tool
    frame, m), world-aligned: v_p = v + ω × r = (J_v − [r]× J_ω) S ν, r = R c."""
    J6 = pin.computeFrameJacobian(robot.model, data, q, robot.tool_frame_id,
                                  pin.LOCAL_WORLD_ALIGNED)
    r = data.oMf[robot.tool_frame_id].rotation.dot(np.asarray(com, float))
    return (J6[:3] - pin.skew(r).dot(J6[3:])).dot(robot.S)


def _apply_event(event, robot, plant, controller_robot, q, nu, free):
    """Change the payload; returns ν⁺ (module docstring: momentum kept on pick).
    free: indices of the coordinates that may move (not locked, stuck or at a stop)."""
    if event.kind == "pick":
        M_old = plant.mass(q)
        robot.attach_payload(event.payload)
        M_new = plant.mass(q)
        f = free
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
             compiled=None, stops=True):
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
    friction : include the stick-slip (static and kinetic), viscous friction and
        rolling resistance (`opspace.dynamics._stick_slip`)
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
    stops : the arm joints stop at their position limits (inelastic hard stops,
        `opspace.dynamics._stick_slip`); False lets them pass

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
    plant = _Plant(robot, locked, friction, stops)
    kernel = None
    if compiled is None or compiled:
        kernel = compiled_plant(robot, locked, friction, stops)
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
            pick = transfer = None
            held = robot.payload is not None
            for step in range(n_steps + 1):
                t = step * dt
                while t >= t_event:
                    ev = events[k_event]
                    if ev.kind == "pick":
                        J_p = _payload_point(robot, plant.data, q, ev.payload.com)
                        pick = (ev.t, float(np.linalg.norm(J_p.dot(nu))), ev.speed_limit)
                        transfer = (ev.t, ev.transfer, ev.payload) if ev.transfer > 0 else None
                    else:
                        transfer = None
                    stuck = (plant.ss.held if kernel is None
                             else _kernel_state(kernel, robot.nv)[0] != 0)
                    free = np.flatnonzero(~(stuck | locked))
                    nu = _apply_event(events[k_event], robot, plant, controller_robot, q, nu,
                                      free)
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
                out = (rec.add(t, q, nu, Q, info, held, step % n_ctrl == 0)
                       if step % record_every == 0 else scratch)
                Qp = Q if transfer is None else Q + _support(robot, plant.data, q, t, transfer)
                if kernel is not None:         # one compiled call: q, ν advance in place
                    if step == n_steps:
                        code = kernel.accel(model, plant.data, q, nu, Qp, out)
                    elif integrator == "rk4":
                        code = kernel.rk4(model, plant.data, q, nu, Qp, h, out)
                    else:
                        code = kernel.euler(model, plant.data, q, nu, Qp, h, out)
                    if code == 1:
                        raise ModelError("mass matrix not positive definite")
                    if code == 2:
                        raise _Stop("the state became non-finite (NaN or inf)")
                    if step == n_steps:
                        break
                else:
                    Mh = getattr(info, "Mh", None) if step % n_ctrl == 0 else None
                    nu_dot = plant.begin(q, nu, Qp, Mh)
                    out[:] = nu_dot
                    if step == n_steps:
                        break
                    if integrator == "rk4":
                        q, nu = _rk4(model, plant, S_h, q, nu, nu_dot, Qp, h)
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
    if kernel is not None:
        _, first_stop, stop_side, loss = _kernel_state(kernel, robot.nv)
    else:
        first_stop, stop_side, loss = plant.ss.first_stop, plant.ss.stop_side, plant.ss.loss
    stops_hit = [(robot.coordinate_names[i], float(first_stop[i] * dt),
                  "upper" if stop_side[i] > 0 else "lower")
                 for i in np.argsort(first_stop, kind="stable") if first_stop[i] >= 0]
    picked = next((e.payload for e in events if e.kind == "pick"), robot_payload_end)
    result = rec.result(robot, status, message, dt, control_period, integrator,
                        stability=stability, end_payload=picked,
                        loop="compiled" if kernel is not None else "numpy",
                        plant={"friction": bool(friction), "stops": bool(stops),
                               "impulse_loss": float(loss), "stops_hit": stops_hit,
                               **({"pick": pick} if pick is not None else {})})
    if status != "completed":
        raise SimulationError(message, time=t, cause=message, result=result)
    found = findings(result, robot, pick=pick)
    if found:
        status, message = verdict(found)
        result = dataclasses.replace(result, status=status, message=message)
        result.extra["findings"] = [f.to_dict() for f in found]
    if progress:
        progress(n_steps, n_steps)
    return result


class _Stop(Exception):
    pass


def _support(robot, data, q, t, transfer):
    """Q (nv,) of the support still under the payload during a load transfer:
    the upward force (1 − (t − t₀)/T) m g at its centre of mass, J_pᵀ F."""
    t0, T, payload = transfer
    share = 1.0 - (t - t0) / T
    if share <= 0.0:
        return np.zeros(robot.nv)
    F = np.array([0.0, 0.0, share * payload.mass * -robot.model.gravity.linear[2]])
    return _payload_point(robot, data, q, payload.com).T.dot(F)


def _kernel_state(kernel, nv):
    """(held (nv,), first stop step (nv,), its side (nv,), impulse loss J) of a
    compiled plant."""
    out = np.empty(3 * nv + 1)
    kernel.state(out)
    return out[:nv], out[nv:2 * nv].astype(int), out[2 * nv:3 * nv].astype(int), out[-1]


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
        self.fresh = np.zeros(n, bool)
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

    def add(self, t, q, nu, Q, info, has_payload, fresh=True):
        """Record a sample (fresh: the controller ran at it, so its target is the
        one of this instant); returns its ν̇ row, for the caller to fill."""
        i = self.i
        self.fresh[i] = fresh
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
               end_payload, loop, plant=None):
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
            stability=track, extra={"prismatic": prismatic, "loop": loop, "plant": plant or {},
                                    "control_sample": self.fresh[sl].copy(),
                                    "velocity_limit": robot.velocity_limit.copy()})


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
