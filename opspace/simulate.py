"""Fixed-step simulation of the reduced dynamics with a sampled controller.

State (q, ν): q the full Pinocchio configuration, ν the reduced velocity.  The
plant is

    M(q) ν̇ = Q − c(q, ν) − g(q) − f(q, ν)          (see `opspace.dynamics`)

with Q held constant between controller samples (zero-order hold at the
control period, a multiple of the step).  Coordinates can be held still
(`locked`): their rates stay zero and the others obey the free block
M_ff ν̇_f = (Q − c − g − f)_f.

Integrators (the configuration always advances on the manifold with
`pinocchio.integrate`, never q + v dt):

- ``"rk4"`` (default): the classical fourth-order Runge–Kutta scheme on
  (q, ν), stage configurations q_i = q ⊕ c_i h S ν_{i−1}, and
  q⁺ = q ⊕ h S (ν₁ + 2ν₂ + 2ν₃ + ν₄)/6.  Global error O(h⁴) on the arm and
  wheel coordinates (Hairer, Nørsett & Wanner, Solving ODEs I, 1993, II.1);
  the base pose enters no dynamic term (the dynamics are invariant to it),
  so its lower-order composition error cannot feed back.
- ``"euler"``: semi-implicit (symplectic) Euler, ν⁺ = ν + h ν̇(q, ν),
  q⁺ = q ⊕ h S ν⁺ (first order).

Rolling resistance uses the static contact loads at the start of each step
(the centre of mass moves negligibly within one step).

Payload events change the tool body's inertia at an instant.  Pick: a soft,
perfectly plastic catch of a payload at rest in the world: the generalized
momentum of robot and payload is kept, M⁺ ν⁺ = M⁻ ν⁻ (the payload brings no
momentum), so the robot slows slightly.  Release: the payload leaves with the
tool's velocity, ν⁺ = ν⁻ (the remaining system keeps its own momentum).

Blow-up detection stops the run with a `SimulationError` that names the time
and the cause and carries the partial result: a non-finite state, a demanded
effort beyond `blowup` times its limit, or a mass matrix that is not positive
definite.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass, field

import numpy as np
import pinocchio as pin
from scipy.linalg import lapack

from .dynamics.joint_space import rolling_loads
from .errors import ModelError

__all__ = ["PayloadEvent", "SimulationError", "SimulationResult", "simulate"]


class SimulationError(ModelError):
    """A run stopped early; `.time` s, `.cause` text, `.result` the partial result."""

    def __init__(self, message, *, time, cause, result=None):
        super().__init__(message)
        self.time, self.cause, self.result = time, cause, result


@dataclass(frozen=True)
class PayloadEvent:
    """At time t (s): "pick" attaches `payload` (a `Payload`) to the plant at
    its tool frame, "release" detaches it.  `estimate` is the payload the
    controller's own model is given at the same instant (None: the same; only
    used when the controller has a robot model of its own)."""

    t: float
    kind: str
    payload: object = None
    estimate: object = None

    def __post_init__(self):
        if self.kind not in ("pick", "release"):
            raise ValueError(f"`kind` must be 'pick' or 'release', got {self.kind!r}")
        if not math.isfinite(self.t) or self.t < 0:
            raise ValueError(f"event time must be finite and >= 0 s, got {self.t}")
        if self.kind == "pick" and self.payload is None:
            raise ValueError("a pick event needs a `payload`")


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """A simulated run, sampled every `record_every` steps (n samples).

    t (n,) s; q (n, nq); nu, nu_dot (n, nv); Q (n, nv) efforts applied, N·m or N;
    Q_demand (n, nv) before the limits; saturated (n, nv) bool; payload (n,)
    bool (held); tool_position (n, 3) m and tool_rotation (n, 3, 3) in the
    world; target_position (n, 3) m (nan without a target); error (n, k) task
    error m / rad (nan without a controller); status "completed" or "stopped";
    message; dt s; control_period s; integrator; coordinate_names;
    effort_limit (nv,); stability: a `StabilityTrack` over the samples, or None.
    """

    t: np.ndarray
    q: np.ndarray
    nu: np.ndarray
    nu_dot: np.ndarray
    Q: np.ndarray
    Q_demand: np.ndarray
    saturated: np.ndarray
    payload: np.ndarray
    tool_position: np.ndarray
    tool_rotation: np.ndarray
    target_position: np.ndarray
    error: np.ndarray
    status: str
    message: str
    dt: float
    control_period: float
    integrator: str
    coordinate_names: tuple
    effort_limit: np.ndarray
    stability: object = None
    extra: dict = field(default_factory=dict)

    @property
    def position_error(self):
        """|p_d − p| of the tool, m, (n,)."""
        return np.linalg.norm(self.target_position - self.tool_position, axis=1)

    def summary(self):
        """Figures of the run, each {"value", "unit"}: peak and RMS effort per
        coordinate, tool position error RMS and peak, wheel energy drawn."""
        from .report.sizing import _q
        t = self.t
        w = _trapezoid_weights(t)
        T = max(t[-1] - t[0], 1e-300)
        out = {"status": self.status, "message": self.message,
               "duration": _q(float(t[-1] - t[0]), "s"), "samples": _q(len(t), "1"),
               "step": _q(self.dt, "s"), "control_period": _q(self.control_period, "s"),
               "integrator": self.integrator, "loop": self.extra.get("loop", "numpy"),
               "efforts": {}}
        for i, name in enumerate(self.coordinate_names):
            unit = "N·m" if i < 2 or not self.extra.get("prismatic", {}).get(name) else "N"
            out["efforts"][name] = {
                "peak": _q(float(np.max(np.abs(self.Q[:, i]))), unit),
                "rms": _q(float(math.sqrt(w.dot(self.Q[:, i] ** 2) / T)), unit),
                "limit": _q(float(self.effort_limit[i]) if np.isfinite(self.effort_limit[i])
                            else None, unit),
                "saturated_share": _q(float(self.saturated[:, i].mean()), "1")}
        e = self.position_error
        if np.any(np.isfinite(e)):
            ok = np.isfinite(e)
            out["tool_position_error"] = {
                "rms": _q(float(math.sqrt(w[ok].dot(e[ok] ** 2) / T)), "m"),
                "peak": _q(float(np.max(e[ok])), "m")}
        P = self.Q[:, :2] * self.nu[:, :2]
        out["wheel_energy_drawn"] = {name: _q(float(w.dot(np.maximum(P[:, i], 0.0))), "J")
                                     for i, name in enumerate(self.coordinate_names[:2])}
        if self.stability is not None:
            out["min_tip_over_margin"] = _q(float(np.nanmin(self.stability.margin)), "m")
            out["max_traction_use"] = _q(float(np.nanmax(self.stability.traction)), "1")
        return out

    def to_npz(self, path):
        """All arrays in one NumPy archive."""
        arrays = {k: getattr(self, k) for k in ("t", "q", "nu", "nu_dot", "Q", "Q_demand",
                                                "saturated", "payload", "tool_position",
                                                "tool_rotation", "target_position", "error",
                                                "effort_limit")}
        if self.stability is not None:
            arrays.update(zmp=self.stability.zmp, tip_margin=self.stability.margin,
                          normal_loads=self.stability.loads.N, traction=self.stability.traction)
        np.savez_compressed(path, coordinate_names=np.array(self.coordinate_names), **arrays)

    def to_csv(self, path):
        """One row per sample: time, ν, Q, tool and target position, error, ZMP."""
        cols = {"t [s]": self.t}
        for i, n in enumerate(self.coordinate_names):
            cols[f"{n} rate"] = self.nu[:, i]
        for i, n in enumerate(self.coordinate_names):
            cols[f"{n} effort"] = self.Q[:, i]
        for j, a in enumerate("xyz"):
            cols[f"tool {a} [m]"] = self.tool_position[:, j]
            cols[f"target {a} [m]"] = self.target_position[:, j]
        cols["tool position error [m]"] = self.position_error
        cols["payload"] = self.payload.astype(float)
        cols["any saturated"] = self.saturated.any(axis=1).astype(float)
        if self.stability is not None:
            cols["zmp x [m]"], cols["zmp y [m]"] = self.stability.zmp[:, 0], self.stability.zmp[:, 1]
            cols["tip-over margin [m]"] = self.stability.margin
        data = np.column_stack(list(cols.values()))
        np.savetxt(path, data, delimiter=",", header=",".join(cols), comments="", fmt="%.7g")


def _trapezoid_weights(t):
    w = np.zeros_like(t)
    if len(t) > 1:
        dt = np.diff(t)
        w[:-1] += dt / 2
        w[1:] += dt / 2
    return w


class _Plant:
    """Forward dynamics of the free coordinates, written for the inner loop."""

    def __init__(self, robot, locked, friction):
        self.robot, self.model, self.data = robot, robot.model, robot.model.createData()
        self.S, self.St = robot.S, robot.St
        self.free = np.flatnonzero(~locked)
        self.all_free = bool(np.all(~locked))
        self.friction = friction
        self.coulomb, self.viscous = robot.coulomb, robot.viscous
        self.rolling = friction and robot.rolling_resistance > 0.0
        self.nv = robot.nv
        self._loads = None

    def start_step(self, q):
        """Freeze the static contact loads of the rolling resistance for one step."""
        if self.rolling:
            self._rolling = rolling_loads(self.robot, q).wheel_efforts

    def mass(self, q):
        return self.St.dot(pin.crba(self.model, self.data, q)).dot(self.S)

    def accel(self, q, nu, Q):
        """ν̇ (nv,) at (q, ν) under efforts Q; ModelError if M is not PD."""
        M = self.St.dot(pin.crba(self.model, self.data, q)).dot(self.S)
        h = self.St.dot(pin.nonLinearEffects(self.model, self.data, q, self.S.dot(nu)))
        return self.accel_from(M, h, nu, Q)

    def accel_from(self, M, h, nu, Q):
        """ν̇ from the reduced M and h = c + g already computed at (q, ν)."""
        rhs = Q - h
        if self.friction:
            rhs -= self.coulomb * np.sign(nu) + self.viscous * nu
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
        from ._compiled import kernel_plant
        kernel = kernel_plant(robot, locked, friction)
        if kernel is None and compiled:
            raise RuntimeError("the compiled simulation kernel (opspace._kernel) is not "
                               "available: reinstall opspace with a C++ compiler on PATH")
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
        from ._compiled import frame_placements
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
    from .sizing.cycle import _merge_tracks
    from .stability import stability_track, tyre_forces

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
    return _merge_tracks(pieces, len(qs))


# ------------------------------------------------------------------ scenarios
class _StepInfo:
    """What a scenario's controller did at one sample (a plain slotted record:
    one is made per control step).  Mh: (M, c + g) it computed at this (q, ν)."""

    __slots__ = ("Q_demand", "saturated", "error", "target_position", "Mh")

    def __init__(self, Q_demand, saturated, error, target_position, Mh=None):
        self.Q_demand, self.saturated, self.error = Q_demand, saturated, error
        self.target_position, self.Mh = target_position, Mh


class ScenarioRun:
    """A scenario made ready to run: robots, plans sampled at the control rate,
    controller, events.  `run()` integrates it; `plans` are kept for figures.
    `compiled` (None, True, False): the compiled kernel for the controller and
    the plant, as in `simulate`."""

    def __init__(self, scenario, *, payload_mass_error=None, compiled=None):
        from . import trajectory as tr
        from .control import BasePlan, Gains, OperationalSpaceController, Target
        from .description.duty import resolve_pose
        from .description.robot import Payload
        from .description.scenario import check_scenario
        from .model import load_robot

        sc = self.scenario = scenario
        robot = self.robot = load_robot(sc.robot_path)
        err = sc.controller["payload_mass_error"] if payload_mass_error is None else payload_mass_error
        self.payload_mass_error = float(err)
        self.controller_robot = load_robot(sc.robot_path) if err else robot
        arm0 = np.zeros(robot.n_arm) if sc.arm_start is None else resolve_pose(
            sc, robot, sc.arm_start, "[simulation] arm_start")
        self.q0 = robot.configuration(arm=arm0)
        # base plan on the control grid
        pieces = [tr.base_piece(seg.kind, seg.values) for seg in sc.base]
        self.timeline = tr.Timeline(pieces) if pieces else None
        h = sc.control_period
        self.t_ctrl = np.arange(int(round(sc.duration / h)) + 1) * h
        if self.timeline is not None:
            # the plan ends at rest: afterwards the pose holds, the rates are zero
            b = self.timeline.sample(h)
            n = len(self.t_ctrl)
            self.base = {k: _fit(getattr(b, k), n, hold=True) for k in ("x", "y", "theta")}
            self.base.update({k: _fit(getattr(b, k), n, hold=False)
                              for k in ("v", "a", "omega", "alpha")})
        else:
            z = np.zeros(len(self.t_ctrl))
            self.base = {k: z for k in ("x", "y", "theta", "v", "a", "omega", "alpha")}
        # tool path: from the tool's start pose through the waypoints
        X0 = robot.frame_placement(self.q0, robot.tool_frame_id)
        times, pos, rots, stops = [], [], [], []
        if sc.waypoints[0].t > 0:
            times.append(0.0), pos.append(X0.translation), rots.append(X0.rotation)
            stops.append(True)
        R_prev = X0.rotation
        for w in sc.waypoints:
            R = R_prev if w.rpy is None else pin.rpy.rpyToMatrix(np.array(w.rpy))
            times.append(w.t), pos.append(np.array(w.position)), rots.append(R)
            stops.append(w.stop)
            R_prev = R
        self.tool_path = tr.ToolPath(times, pos, np.array(rots), stops)
        self.tool = self.tool_path.sample(self.t_ctrl)

        def base_pose_at(t):
            i = min(int(round(t / h)), len(self.t_ctrl) - 1)
            return self.base["x"][i], self.base["y"][i], self.base["theta"][i]

        check_scenario(sc, robot, base_pose_at,
                       lambda t: self.tool_path.sample(np.array([t])).p[0])
        c = sc.controller
        gains = Gains.from_stiffness(c["stiffness"], c["damping_ratio"])
        self.controller = OperationalSpaceController(
            self.controller_robot, axes=c["axes"], mode=c["mode"], gains=gains,
            posture=c["posture"] if c["posture"] is not None else arm0,
            posture_gains=Gains.from_stiffness(c["posture_stiffness"], 1.0, size=robot.n_arm),
            wheel_gain=c["wheel_gain"], friction_feedforward=c["friction_feedforward"],
            friction_velocity=c["friction_velocity"], compiled=compiled)
        self.compiled = compiled
        # every control sample's target and plan, built once (validated paths)
        tool, b = self.tool, self.base
        vel = np.concatenate([tool.v, tool.w], axis=1)
        acc = np.concatenate([tool.a, tool.dw], axis=1)
        self._targets = [Target.trusted(tool.p[i], tool.R[i], vel[i], acc[i])
                         for i in range(len(self.t_ctrl))]
        self._plans = [BasePlan(*vals) for vals in zip(b["v"].tolist(), b["omega"].tolist(),
                                                       b["a"].tolist(), b["alpha"].tolist())]
        # the same, packed for the compiled command (`OperationalSpaceController.pack`)
        self._rate, self._last = 1.0 / sc.control_period, len(self.t_ctrl) - 1
        self._same_robot = self.controller_robot is self.robot
        self._packed = np.column_stack([tool.p, tool.R.reshape(-1, 9), vel, acc, b["v"],
                                        b["omega"], b["a"], b["alpha"]])
        self.events = []
        if sc.pick is not None:
            payload = robot.description.payload if sc.payload == "rated" else sc.payload
            if payload is None:
                from .errors import ConfigError
                raise ConfigError(f"{sc.path.name}: [payload] rated = true but "
                                  f"{robot.description.path.name} has no [payload]")
            estimate = Payload(payload.mass * (1.0 + self.payload_mass_error), payload.com,
                               payload.inertia)
            self.events.append(PayloadEvent(sc.pick, "pick", payload, estimate))
            if sc.release is not None:
                self.events.append(PayloadEvent(sc.release, "release"))

    def control(self, t, q, nu):
        """The controller sampled at t: (Q, step info).  Targets and plans come
        from the precomputed, validated paths, so the unchecked fast paths are
        used (`Target.trusted`, `OperationalSpaceController._command`)."""
        i = min(int(t * self._rate + 0.5), self._last)
        c = self.controller
        if c._kernel is not None:
            Q = c._command_packed(q, nu, self._packed[i])
        else:
            Q = c._command_numpy(q, nu, self._targets[i], self._plans[i])
        Q_demand = c._info[1]
        # with a perfect model the NumPy plant's first RK4 stage reuses the controller's M, c + g
        Mh = c._Mh if self._same_robot else None
        # saturated: clipped, |Q_demand| > limit  (Q = clip(Q_demand) differs from it)
        return Q, _StepInfo(Q_demand, Q != Q_demand, c._error, self._packed[i, :3], Mh)

    def run(self, *, integrator=None, progress=None, stability=True, compiled=None):
        """SimulationResult of the scenario (`compiled`: see `simulate`)."""
        sc = self.scenario
        return simulate(self.robot, self.control, duration=sc.duration, q0=self.q0, dt=sc.step,
                        control_period=sc.control_period, integrator=integrator or sc.integrator,
                        friction=sc.friction, events=self.events, stability=stability,
                        controller_robot=self.controller_robot, progress=progress,
                        compiled=self.compiled if compiled is None else compiled)


def _fit(x, n, *, hold):
    """x cut or extended to n samples: by its last value (hold) or by zeros."""
    if len(x) >= n:
        return x[:n]
    return np.concatenate([x, np.full(n - len(x), x[-1] if hold else 0.0)])


def run_scenario(path_or_scenario, *, payload_mass_error=None, integrator=None, progress=None):
    """Load (if a path), prepare and run a simulation scenario: SimulationResult."""
    from .description.scenario import Scenario, load_scenario
    sc = path_or_scenario if isinstance(path_or_scenario, Scenario) else load_scenario(path_or_scenario)
    return ScenarioRun(sc, payload_mass_error=payload_mass_error).run(integrator=integrator,
                                                                       progress=progress)
