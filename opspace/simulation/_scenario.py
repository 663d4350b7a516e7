"""Scenario runs: a scenario file made ready to run (robots, plans sampled at
the control rate, the controller, the events) and `run_scenario`."""

from __future__ import annotations

import numpy as np
import pinocchio as pin

from ._loop import simulate
from ._result import PayloadEvent

__all__ = ["ScenarioRun", "run_scenario"]


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
        from .. import trajectory as tr
        from ..control import BasePlan, Gains, OperationalSpaceController, Target
        from ..description import resolve_pose
        from ..description import Payload
        from ..description import check_scenario
        from ..model import load_robot

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
        self._packed = self.controller.pack_many(
            tool.p, tool.R, vel, acc, np.column_stack([b["v"], b["omega"], b["a"], b["alpha"]]))
        if self._packed is None:
            self._packed = [None] * len(self._targets)
        self.events = []
        if sc.pick is not None:
            payload = robot.description.payload if sc.payload == "rated" else sc.payload
            if payload is None:
                from ..errors import ConfigError
                raise ConfigError(f"{sc.path.name}: [payload] rated = true but "
                                  f"{robot.description.path.name} has no [payload]")
            estimate = Payload(payload.mass * (1.0 + self.payload_mass_error), payload.com,
                               payload.inertia)
            self.events.append(PayloadEvent(sc.pick, "pick", payload, estimate,
                                            transfer=sc.load_transfer,
                                            speed_limit=sc.pick_speed_limit))
            if sc.release is not None:
                self.events.append(PayloadEvent(sc.release, "release"))

    def control(self, t, q, nu):
        """The controller sampled at t: (Q, step info).  Targets and plans come
        from the precomputed, validated paths, so the unchecked fast paths are
        used (`OperationalSpaceController.fast_command`, on the targets packed
        once for the compiled command)."""
        i = min(int(t * self._rate + 0.5), self._last)
        s = self.controller.fast_command(q, nu, self._targets[i], self._plans[i], self._packed[i])
        # with a perfect model the NumPy plant's first RK4 stage reuses the controller's M, c + g
        Mh = (s.M, s.h) if self._same_robot else None
        # saturated: clipped, |Q_demand| > limit  (Q = clip(Q_demand) differs from it)
        return s.Q, _StepInfo(s.Q_demand, s.Q != s.Q_demand, s.error, s.target_position, Mh)

    def run(self, *, integrator=None, progress=None, stability=True, compiled=None, step=None):
        """SimulationResult of the scenario (`compiled`: see `simulate`; `step`: an
        integration step s other than the scenario's, a whole fraction of its
        control period, e.g. for a step-halving check; `stability`: the post-run
        analyses, the stability track and the contact pre-check)."""
        sc = self.scenario
        result = simulate(self.robot, self.control, duration=sc.duration, q0=self.q0,
                          dt=sc.step if step is None else step,
                          control_period=sc.control_period,
                          integrator=integrator or sc.integrator, friction=sc.friction,
                          events=self.events, stability=stability,
                          controller_robot=self.controller_robot, progress=progress,
                          compiled=self.compiled if compiled is None else compiled,
                          stops=sc.joint_stops)
        result.extra["feedforward"] = bool(self.controller.friction_feedforward)
        if stability and self.robot.description.contact_points:
            result.extra["contact"] = self.contact_check(result)
        return result

    def contact_check(self, result):
        """The contact pre-check along a run of this scenario (`opspace.contact`):
        each listed contact point's speed against its permissible speed, the
        picked payload counted from the pick on."""
        from ..contact import check_contacts

        payload = self.events[0].payload if self.events else None
        return check_contacts(self.robot, heaviest=False,
                              motion={"qs": result.q, "nu": result.nu, "t": result.t,
                                      "payload_flags": result.payload, "payload": payload})


def _fit(x, n, *, hold):
    """x cut or extended to n samples: by its last value (hold) or by zeros."""
    if len(x) >= n:
        return x[:n]
    return np.concatenate([x, np.full(n - len(x), x[-1] if hold else 0.0)])


def run_scenario(path_or_scenario, *, payload_mass_error=None, integrator=None, progress=None):
    """Load (if a path), prepare and run a simulation scenario: SimulationResult."""
    from ..description import Scenario, load_scenario
    sc = path_or_scenario if isinstance(path_or_scenario, Scenario) else load_scenario(path_or_scenario)
    return ScenarioRun(sc, payload_mass_error=payload_mass_error).run(integrator=integrator,
                                                                       progress=progress)
