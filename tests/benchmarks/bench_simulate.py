"""Speed of the simulation loop on the demo pick, and MuJoCo's RK4 as the peer.

Prints, all measured in one run (issue 6, "Speed"):

1. the real-time factor of the bundled demo pick (models/marmot/pick.toml: 9
   reduced coordinates, 1 kHz control, RK4, 9 s, a 3 kg tote picked at 4.05 s)
   run by ``ScenarioRun(...).run(stability=False)`` with the compiled kernel
   (opspace/_kernel.cpp: the controller's command and the plant's RK4 step,
   one C++ call each per step); only `run.run` is timed (the set-up, robots,
   plans and controller, is not);
2. the same run with semi-implicit Euler, and the RK4 run on the NumPy
   reference loop (``compiled=False``: controller and plant in NumPy);
3. the peer: the SAME controller callable (`run.control`, on our own model,
   compiled command) driving MuJoCo's own RK4 integrator (mjINT_RK4, 1 ms) on
   an equivalent model written below as MJCF: the chassis on a free joint on a
   ground plane, two wheel cylinders on hinges rolling by frictional contact,
   four frictionless caster spheres, the arm's bodies written out from the
   Pinocchio model (joint placements, inertias, armature, joint damping and
   dry friction), the tote's inertia added to the flange body at the pick.
   Each control step maps MuJoCo's state to our (q, ν) and applies Q through
   `qfrc_applied`;
4. the ratios (ours RK4 vs the peer, compiled vs NumPy, Euler vs RK4) and
   what a step is made of: (a) timers inside runs of ours around the
   controller callable, the compiled plant step and the recorder, the rest
   being the loop's own bookkeeping; (b) pieces timed alone over the
   reference run's states (the controller callable, the compiled command
   call, the Pinocchio calls it makes when made from Python; the compiled RK4
   step and the Pinocchio calls of its four stages made from Python; the
   NumPy reference pieces for scale); (c) timers inside the peer's loop
   (mj_step, the state mapping, the controller), its runs alternating with
   those of (a); (d) what dominates.

Timing: the five runs of items 1–3 alternate within every repeat, with the
garbage collector paused; the figures are medians over repeats and every ratio
is the median of the per-repeat ratios (the machine is noisy: compare ratios,
never absolute times).  RTF is on wall time, as the issue asks; the CPU time of
this process is printed beside it (time spent descheduled is not charged).
The pieces of (b) are CPU time, interleaved within each repeat, each given as
its median share of its parent piece.  The private pieces timed in item 4
(`opspace._compiled.kernel_plant`, `opspace.simulation._loop._Recorder`, `_Plant`,
`_rk4`, the controller's `_kernel` and `_command_numpy`) are the ones
`simulate` calls; if they are renamed, update this script.

Targets (issue 6): RK4 at least 20x real time, and at least 1.25x faster than
the MuJoCo RK4 peer.

    python tests/benchmarks/bench_simulate.py [repeats]      # default 5
"""

from __future__ import annotations

import gc
import math
import sys
import time
from pathlib import Path

import mujoco
import numpy as np
import pinocchio as pin

from opspace.description import inertia_matrix
from opspace.description import load_scenario
from opspace.model import GRAVITY, load_robot
from opspace import _compiled
from opspace.simulation import ScenarioRun
from opspace.dynamics import compiled_plant
from opspace.simulation._loop import _Plant, _rk4

PICK = Path(__file__).resolve().parents[2] / "models" / "marmot" / "pick.toml"
LWA = pin.LOCAL_WORLD_ALIGNED

#: caster sphere radius, m (the description gives caster positions only; the
#: radius only sets where the sphere touches the floor: at the caster position)
CASTER_RADIUS = 0.03
#: wheel width, m, for the contact cylinder only (the inertias are the
#: description's; 45 mm is the tread width quoted in robot.toml's comments)
WHEEL_WIDTH = 0.045


# ------------------------------------------------------------------ timing
def per_call(fn, args_list, clock=time.perf_counter):
    """Seconds per call of fn(*args) over a list of argument tuples (GC paused)."""
    gc.disable()
    try:
        t0 = clock()
        for args in args_list:
            fn(*args)
        return (clock() - t0) / len(args_list)
    finally:
        gc.enable()


def wall(fn):
    """(seconds, result) of one call (GC paused)."""
    gc.disable()
    try:
        t0 = time.perf_counter()
        out = fn()
        return time.perf_counter() - t0, out
    finally:
        gc.enable()


# ------------------------------------------------------------- MuJoCo model
def _fmt(x):
    return " ".join(f"{float(v):.17g}" for v in np.ravel(x))


def _quat(R):
    qt = pin.Quaternion(np.asarray(R))
    return _fmt([qt.w, qt.x, qt.y, qt.z])


def _inertial(mass, com, I):
    """<inertial> of a body: mass kg, com (3,) m, I (3, 3) kg m² about the COM."""
    return (f'<inertial pos="{_fmt(com)}" mass="{float(mass):.17g}" fullinertia="'
            f'{_fmt([I[0, 0], I[1, 1], I[2, 2], I[0, 1], I[0, 2], I[1, 2]])}"/>')


def peer_mjcf(robot):
    """MJCF of the robot with its current payload (if any) on the tool body.

    Chassis: the description's [base] mass, COM and inertia, on a free joint
    (body origin = the base frame: on the ground below the axle midpoint); the
    arm's root link (the column housing, fixed to the chassis) as a welded body
    at the mount; wheels: cylinders of the wheel radius on hinges (axis y) at
    (0, ∓half_track, wheel_radius) with the wheel's mass and inertias and the
    drive's reflected inertia as armature; casters: spheres touching the floor
    at the caster positions, condim 1 (frictionless); the arm: one body per
    Pinocchio joint with its placement, inertia (with the payload when one is
    attached), armature, viscous damping and Coulomb friction (MuJoCo's
    `damping` and `frictionloss`).  Floor friction: the description's tyre-floor
    coefficient.  Rolling resistance has no MuJoCo counterpart here (the peer
    is a little lighter to drive; it does not change the cost per step).
    """
    d, model = robot.description, robot.model
    r, mu = robot.wheel_radius, robot.ground_friction
    children = {i: [] for i in range(model.njoints)}
    for i in range(1, model.njoints):
        children[model.parents[i]].append(i)
    tool = model.frames[robot.tool_frame_id]

    def joint(i):
        jm, name = model.joints[i], model.names[i]
        kind = jm.shortname()
        if kind[:-2] != "JointModel" or kind[-2] not in "RP" or kind[-1] not in "XYZ":
            raise NotImplementedError(f"joint {name}: {kind} (only axis-aligned R/P here)")
        axis = {"X": "1 0 0", "Y": "0 1 0", "Z": "0 0 1"}[kind[-1]]
        c = jm.idx_v - 3                      # reduced coordinate (after vx, vy, ωz)
        return (f'<joint name="{name}" type="{"hinge" if kind[-2] == "R" else "slide"}" '
                f'axis="{axis}" armature="{model.armature[jm.idx_v]:.17g}" '
                f'damping="{robot.viscous[c]:.17g}" frictionloss="{robot.coulomb[c]:.17g}"/>')

    def body(i):
        X, Y = model.jointPlacements[i], model.inertias[i]
        s = (f'<body name="{model.names[i]}" pos="{_fmt(X.translation)}" '
             f'quat="{_quat(X.rotation)}">{_inertial(Y.mass, Y.lever, Y.inertia)}{joint(i)}')
        if model.names[i] in ("wheel_right", "wheel_left"):
            s += (f'<geom type="cylinder" size="{r:.17g} {WHEEL_WIDTH / 2:.17g}" '
                  f'euler="1.5707963267948966 0 0" condim="3" friction="{mu:.17g} 0.005 0.0001"/>')
        if i == tool.parentJoint:
            s += (f'<site name="{robot.tool_frame}" pos="{_fmt(tool.placement.translation)}" '
                  f'quat="{_quat(tool.placement.rotation)}"/>')
        return s + "".join(body(c) for c in children[i]) + "</body>"

    base, root = d.base, d.arm_model.inertias[0]           # chassis; column housing
    X_mount = pin.SE3(pin.rpy.rpyToMatrix(np.array(d.mount_rpy)), np.array(d.mount_xyz))
    casters = "".join(
        f'<geom type="sphere" size="{CASTER_RADIUS}" pos="{x:.17g} {y:.17g} {CASTER_RADIUS}" '
        f'condim="1"/>' for x, y in d.casters)
    chassis = (
        f'<body name="chassis" pos="0 0 0"><freejoint name="base"/>'
        f'{_inertial(base.mass, base.com, inertia_matrix(base.inertia))}{casters}'
        f'<body name="column_base" pos="{_fmt(X_mount.translation)}" '
        f'quat="{_quat(X_mount.rotation)}">{_inertial(root.mass, root.lever, root.inertia)}'
        f'</body>' + "".join(body(c) for c in children[1]) + "</body>")
    return (f'<mujoco model="marmot peer"><compiler angle="radian" autolimits="true"/>'
            f'<option timestep="0.001" integrator="RK4" gravity="0 0 {-GRAVITY:.17g}"/>'
            f'<worldbody><geom name="floor" type="plane" size="0 0 1" condim="1" '
            f'friction="{mu:.17g} 0.005 0.0001"/>{chassis}</worldbody></mujoco>')


#: mass-dependent model fields copied from the loaded model at the pick
_INERTIAL_FIELDS = ("body_mass", "body_ipos", "body_iquat", "body_inertia", "body_subtreemass",
                    "body_invweight0", "dof_invweight0", "dof_M0")


class MujocoPeer:
    """`run.control` driving MuJoCo's integrator on the equivalent model."""

    def __init__(self, run):
        self.run = run
        robot = run.robot
        self.m = mujoco.MjModel.from_xml_string(peer_mjcf(robot))
        self.m.opt.timestep = run.scenario.step
        self.d = mujoco.MjData(self.m)
        # the same model with the tote on the tool body (copied in at the pick)
        self.loaded = {}
        for ev in run.events:
            if ev.kind == "pick":
                other = load_robot(run.scenario.robot_path)
                other.attach_payload(ev.payload)
                m2 = mujoco.MjModel.from_xml_string(peer_mjcf(other))
                self.loaded[id(ev)] = {f: getattr(m2, f).copy()
                                       for f in _INERTIAL_FIELDS if hasattr(m2, f)}
        self.bare = {f: getattr(self.m, f).copy() for f in _INERTIAL_FIELDS if hasattr(self.m, f)}
        self.site = mujoco.mj_name2id(self.m, mujoco.mjtObj.mjOBJ_SITE, robot.tool_frame)
        # layout: free joint (qpos 7, qvel 6), then wheels and arm in our ν order
        names = [mujoco.mj_id2name(self.m, mujoco.mjtObj.mjOBJ_JOINT, j)
                 for j in range(1, self.m.njnt)]
        if names != list(robot.coordinate_names) or self.m.nq != 7 + robot.nv:
            raise RuntimeError(f"unexpected MuJoCo joint layout {names}")
        if robot.model.nq != 4 + robot.nv:
            raise RuntimeError("a continuous arm joint: the (q, ν) mapping below assumes none")
        self.n_steps = int(round(run.scenario.duration / run.scenario.step))

    def check(self):
        """Max |difference| of the joint-space mass matrix over the wheel and arm
        coordinates (MuJoCo's mj_fullM vs Pinocchio's crba at the start pose), and
        the total masses, kg."""
        run, m, d = self.run, self.m, self.d
        self.reset()
        mujoco.mj_forward(m, d)
        M = np.zeros((m.nv, m.nv))
        mujoco.mj_fullM(m, d, M)
        robot = run.robot
        Mp = pin.crba(robot.model, robot.model.createData(), run.q0)
        Mp = np.triu(Mp) + np.triu(Mp, 1).T
        return (float(np.abs(M[6:, 6:] - Mp[3:, 3:]).max()), float(sum(m.body_mass)),
                robot.total_mass())

    def reset(self):
        m, d, q0 = self.m, self.d, self.run.q0
        for f, v in self.bare.items():
            getattr(m, f)[:] = v
        mujoco.mj_resetData(m, d)
        th = math.atan2(q0[3], q0[2])
        d.qpos[:7] = (q0[0], q0[1], 0.0, math.cos(th / 2), 0.0, 0.0, math.sin(th / 2))
        d.qpos[7:] = q0[4:]

    def state(self, q):
        """Write our (q, ν) from MuJoCo's state into q (nq,); returns ν (a copy)."""
        qpos = self.d.qpos
        w, x, y, z = qpos[3], qpos[4], qpos[5], qpos[6]
        th = math.atan2(2.0 * (w * z + x * y), 1.0 - 2.0 * (y * y + z * z))   # yaw of the chassis
        q[0], q[1], q[2], q[3] = qpos[0], qpos[1], math.cos(th), math.sin(th)
        q[4:] = qpos[7:]
        return self.d.qvel[6:].copy()

    def simulate(self, integrator=mujoco.mjtIntegrator.mjINT_RK4):
        """Run the scenario; returns (tool position error (n,) m at MuJoCo's tool
        site, the same as the controller sees it (its planar view of the state),
        base position at the end).  As in ours, the tool poses are computed
        after the loop from the recorded configurations."""
        run, m, d = self.run, self.m, self.d
        self.reset()
        m.opt.integrator = integrator
        events = sorted(run.events, key=lambda e: e.t)
        k_ev = 0
        control, state, dt, n = run.control, self.state, run.scenario.step, self.n_steps
        q = np.empty(run.robot.model.nq)
        qpos, qfrc = d.qpos, d.qfrc_applied
        qs, targets, e_ctrl = np.empty((n + 1, m.nq)), np.empty((n + 1, 3)), np.empty(n + 1)
        step_ = mujoco.mj_step
        try:
            for step in range(n + 1):
                t = step * dt
                while k_ev < len(events) and events[k_ev].t <= t + 1e-12:
                    self._event(events[k_ev])
                    k_ev += 1
                nu = state(q)
                Q, info = control(t, q, nu)
                qfrc[6:] = Q
                e = info.error
                e_ctrl[step] = math.sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2])
                targets[step] = info.target_position
                qs[step] = qpos
                if step == n:
                    break
                step_(m, d)
        finally:
            self._detach()
        d2 = mujoco.MjData(m)
        e_site = np.empty(n + 1)
        for i in range(n + 1):
            d2.qpos[:] = qs[i]
            mujoco.mj_kinematics(m, d2)
            e_site[i] = math.dist(d2.site_xpos[self.site], targets[i])
        return e_site, e_ctrl, (float(qpos[0]), float(qpos[1]))

    def _event(self, ev):
        """A payload event: the tote's inertia into (or out of) the flange body, and
        into the controller's model as simulate does it (the estimate when the
        controller has a model of its own).  MuJoCo keeps qvel at the mass change;
        simulate keeps the momentum, which differs negligibly here: the tote is
        caught at rest in the world and the tool holds still there at the pick."""
        run = self.run
        fields = self.loaded[id(ev)] if ev.kind == "pick" else self.bare
        for f, v in fields.items():
            getattr(self.m, f)[:] = v
        own = run.controller_robot is not run.robot
        if ev.kind == "pick":
            run.controller_robot.attach_payload((ev.estimate or ev.payload) if own else ev.payload)
        else:
            run.controller_robot.detach_payload()

    def _detach(self):
        self.run.robot.detach_payload()
        self.run.controller_robot.detach_payload()


def rms(x):
    x = x[np.isfinite(x)]
    return float(math.sqrt(np.mean(x * x)))


# ------------------------------------------------ in-loop split of our step
class _TimedKernel:
    """The compiled plant with a timer around each call (for `timed_run`)."""

    def __init__(self, kernel, acc, clock):
        self.kernel, self.acc, self.clock = kernel, acc, clock

    def _timed(self, name, *args):
        t0 = self.clock()
        out = getattr(self.kernel, name)(*args)
        self.acc["plant"] += self.clock() - t0
        return out

    def rk4(self, *args):
        return self._timed("rk4", *args)

    def euler(self, *args):
        return self._timed("euler", *args)

    def accel(self, *args):
        return self._timed("accel", *args)

    def state(self, *args):
        return self.kernel.state(*args)


def timed_run(run, integrator="rk4"):
    """One run of `run.run` with the controller callable, the compiled plant
    step and the recorder wrapped in timers (the wrappers add ~1 µs per step).
    Returns {piece: wall µs per step}, the instrumented total as "total" and
    the unwrapped rest of the loop as "loop"."""
    sim = sys.modules[_Plant.__module__]   # opspace.simulation._loop
    acc = dict.fromkeys(("control", "plant", "record", "result"), 0.0)
    clock = time.perf_counter
    saved = (_compiled.kernel_plant, sim._Recorder.add, sim._Recorder.result)
    kernel_plant, add, result = saved

    def wrap(fn, key):
        def w(*args, **kwargs):
            t0 = clock()
            out = fn(*args, **kwargs)
            acc[key] += clock() - t0
            return out
        return w

    _compiled.kernel_plant = lambda *a: _TimedKernel(kernel_plant(*a), acc, clock)
    sim._Recorder.add, sim._Recorder.result = wrap(add, "record"), wrap(result, "result")
    run.control = wrap(type(run).control.__get__(run), "control")
    try:
        total, _ = wall(lambda: run.run(integrator=integrator, stability=False))
    finally:
        _compiled.kernel_plant, sim._Recorder.add, sim._Recorder.result = saved
        del run.control                       # back to the class's method
    n = int(round(run.scenario.duration / run.scenario.step))
    out = {k: v / n * 1e6 for k, v in acc.items()}
    out["total"] = total / n * 1e6
    out["loop"] = out["total"] - sum(acc.values()) / n * 1e6
    return out


# ------------------------------------------------ standalone pieces
def cost_pieces(run, numpy_run, res, repeat, stride=3):
    """CPU µs per call of each piece of our step, timed alone over every
    `stride`-th state of the reference run (the payload attached from the pick
    on, as in the run).  The pieces are timed in turn within every repeat, and
    each is given as a median over repeats of its share of its parent piece
    timed in the same repeat (`SHARE_OF`), times the parent's median.  The
    compiled step advances its (q, ν) arguments in place, so each repeat starts
    1 ms further on: the same states to within a step."""
    robot, ctl = run.robot, run.controller
    model, S = robot.model, robot.S
    sc = run.scenario
    sel = np.arange(0, len(res.t), stride)
    pick = next((e for e in run.events if e.kind == "pick"), None)
    k_pick = len(sel) if pick is None else int(np.searchsorted(res.t[sel], pick.t - 1e-12))
    ts, qs, nus, Qs = res.t[sel], res.q[sel], res.nu[sel], res.Q[sel]
    states = [(float(t), q, nu) for t, q, nu in zip(ts, qs, nus)]
    qn = [(q, nu) for q, nu in zip(qs, nus)]
    h = sc.step
    cand = {}                                  # name: (fn, argument tuples)

    # --- the controller: the callable, the compiled command alone, its raw calls
    cand["control"] = (run.control, states)
    kc = ctl._kernel
    idx = [min(int(round(t / sc.control_period)), len(run.t_ctrl) - 1) for t in ts]
    cand["command"] = (lambda q, nu, x: kc[0](kc[1], kc[2], q, nu, x, kc[3]),
                       [(q, nu, run._packed[i]) for q, nu, i in zip(qs, nus, idx)])
    data = model.createData()
    fid, zero = robot.tool_frame_id, np.zeros(model.nv)

    def command_floor(q, nu):
        v = S.dot(nu)
        pin.crba(model, data, q, pin.Convention.WORLD)
        pin.getFrameJacobian(model, data, fid, LWA)
        pin.nonLinearEffects(model, data, q, v)
        pin.forwardKinematics(model, data, q, v, zero)
        pin.getFrameClassicalAcceleration(model, data, fid, LWA)
        pin.updateFramePlacement(model, data, fid)

    cand["command_floor"] = (command_floor, qn)
    cand["command_numpy"] = (numpy_run.controller._command_numpy,
                             [(q, nu, numpy_run._targets[i], numpy_run._plans[i])
                              for q, nu, i in zip(qs, nus, idx)])

    # --- the plant: the compiled step, its raw calls, the NumPy reference step
    kp = compiled_plant(robot, np.zeros(robot.nv, bool), sc.friction)
    pdata, out = model.createData(), np.empty(robot.nv)
    cand["kernel_rk4"] = (lambda q, nu, Q: kp.rk4(model, pdata, q, nu, Q, h, out),
                          [(q.copy(), nu.copy(), Q) for q, nu, Q in zip(qs, nus, Qs)])
    dq = np.zeros(model.nv)

    def plant_floor(q, nu):
        v = S.dot(nu)
        for _ in range(4):
            pin.crba(model, pdata, q)
            pin.nonLinearEffects(model, pdata, q, v)
            pin.integrate(model, q, dq)

    cand["plant_floor"] = (plant_floor, qn)
    plant = _Plant(robot, np.zeros(robot.nv, bool), sc.friction)
    S_h = (S * (0.5 * h), S * h, S * (h / 6.0))     # as `simulate` pre-scales it

    def numpy_step(model, plant, S_h, q, nu, a1, Q, h):
        # the step's start (stick-slip decisions, stops) then the RK4 stages
        q, nu = q.copy(), nu.copy()
        return _rk4(model, plant, S_h, q, nu, plant.begin(q, nu, Q), Q, h)

    cand["numpy_rk4"] = (numpy_step,
                         [(model, plant, S_h, res.q[i], res.nu[i], res.nu_dot[i], res.Q[i], h)
                          for i in sel])

    def once(fn, args_list):
        robot.detach_payload()
        a = per_call(fn, args_list[:k_pick], clock=time.process_time) * k_pick
        if pick is not None:
            robot.attach_payload(pick.payload)
            a += per_call(fn, args_list[k_pick:], clock=time.process_time) * (
                len(args_list) - k_pick)
            robot.detach_payload()
        return a / len(args_list) * 1e6

    samples = {name: [] for name in cand}
    for _ in range(repeat):
        for name, (fn, args_list) in cand.items():
            samples[name].append(once(fn, args_list))
    samples = {name: np.array(v) for name, v in samples.items()}
    result = {}
    for name, v in samples.items():
        parent = SHARE_OF.get(name)
        if parent is None or parent not in samples:
            result[name] = float(np.median(v))
        else:
            result[name] = float(np.median(v / samples[parent]) * np.median(samples[parent]))
    return result


#: the parent piece each piece's share is taken of (see `cost_pieces`)
SHARE_OF = {"command": "control", "command_floor": "control", "command_numpy": "control",
            "plant_floor": "kernel_rk4", "numpy_rk4": "kernel_rk4"}


def peer_timed(peer, integrator):
    """The peer's loop with timers around the state mapping, the controller and
    mj_step: {piece: µs per step}."""
    run, m, d = peer.run, peer.m, peer.d
    peer.reset()
    m.opt.integrator = integrator
    events = sorted(run.events, key=lambda e: e.t)
    k_ev, clock, n, dt = 0, time.perf_counter, peer.n_steps, run.scenario.step
    q = np.empty(run.robot.model.nq)
    acc = dict.fromkeys(("map", "control", "mj_step"), 0.0)
    ncon = []
    gc.disable()
    t_start = clock()
    try:
        for step in range(n):
            t = step * dt
            while k_ev < len(events) and events[k_ev].t <= t + 1e-12:
                peer._event(events[k_ev])
                k_ev += 1
            t0 = clock()
            nu = peer.state(q)
            t1 = clock()
            Q, info = run.control(t, q, nu)
            t2 = clock()
            d.qfrc_applied[6:] = Q
            mujoco.mj_step(m, d)
            t3 = clock()
            acc["map"] += t1 - t0
            acc["control"] += t2 - t1
            acc["mj_step"] += t3 - t2
            ncon.append(d.ncon)
        total = clock() - t_start
    finally:
        gc.enable()
        peer._detach()
    out = {k: v / n * 1e6 for k, v in acc.items()}
    out["total"] = total / n * 1e6
    out["loop"] = out["total"] - sum(acc.values()) / n * 1e6
    out["ncon"] = (min(ncon), max(ncon))
    out["nefc"] = int(d.nefc)
    return out


# -------------------------------------------------------------------- main
def main(repeat=5):
    sc = load_scenario(PICK)
    if not _compiled.available():
        print("the compiled kernel (opspace._kernel) is not built: reinstall opspace with a "
              "C++ compiler on PATH (this benchmark measures it)")
        return 1
    run = ScenarioRun(sc)                       # compiled controller and plant
    numpy_run = ScenarioRun(sc, compiled=False)  # the NumPy reference loop
    robot = run.robot
    T = sc.duration
    n_steps = int(round(T / sc.step))
    print(f"demo pick: {sc.name}")
    print(f"  {robot.nv} reduced coordinates, {T:g} s, step {sc.step * 1e3:g} ms, control "
          f"{1 / sc.control_period:g} Hz, {sc.integrator}, {n_steps} steps; {repeat} "
          f"interleaved repeats, GC paused while timing")

    peer = MujocoPeer(run)
    dM, m_mj, m_ours = peer.check()
    print(f"  MuJoCo peer model check at the start pose: max |M_mj − M_pin| over the wheel + "
          f"arm block {dM:.1e} kg m²; total mass {m_mj:.4f} kg (ours {m_ours:.4f} kg)")

    # warm-up and reference results (their tracking is printed as a sanity check)
    ref = run.run(stability=False)
    ref_euler = run.run(integrator="euler", stability=False)
    ref_numpy = numpy_run.run(stability=False)
    e_site, e_ctrl, base_end = peer.simulate()

    RK4, EUL = mujoco.mjtIntegrator.mjINT_RK4, mujoco.mjtIntegrator.mjINT_EULER
    names = ("ours RK4", "ours Euler", "ours RK4, NumPy loop", "MuJoCo RK4 peer",
             "MuJoCo Euler peer")
    fns = (lambda: run.run(stability=False), lambda: run.run(integrator="euler", stability=False),
           lambda: numpy_run.run(stability=False), lambda: peer.simulate(RK4),
           lambda: peer.simulate(EUL))
    wall_s = {k: [] for k in names}
    cpu_s = {k: [] for k in names}
    for _ in range(repeat):
        for name, fn in zip(names, fns):
            c0 = time.process_time()
            wall_s[name].append(wall(fn)[0])
            cpu_s[name].append(time.process_time() - c0)
    wall_s = {k: np.array(v) for k, v in wall_s.items()}
    cpu_s = {k: np.array(v) for k, v in cpu_s.items()}
    med = {k: float(np.median(v)) for k, v in wall_s.items()}
    rtf = {k: T / v for k, v in med.items()}
    rtf_cpu = {k: T / float(np.median(v)) for k, v in cpu_s.items()}

    def ratio(times, a, b):
        return float(np.median(times[a] / times[b]))

    print("\n1-3. real-time factor RTF = simulated s / wall s of `run.run` (set-up excluded); "
          "(CPU): / CPU s of this process")
    print(f"  {'':21s} {'wall s':>7s} {'RTF':>5s} {'(CPU)':>6s} {'µs/step':>8s}   "
          f"tool position error RMS / peak")
    errs = {"ours RK4": ref.position_error, "ours Euler": ref_euler.position_error,
            "ours RK4, NumPy loop": ref_numpy.position_error}
    for k in names:
        e = errs.get(k)
        etxt = f"{rms(e) * 1e3:5.2f} / {np.nanmax(e) * 1e3:5.2f} mm" if e is not None else ""
        if k == "MuJoCo RK4 peer":
            etxt = (f"{rms(e_site) * 1e3:5.2f} / {np.nanmax(e_site) * 1e3:5.2f} mm at MuJoCo's "
                    f"tool site ({rms(e_ctrl) * 1e3:.2f} / {np.nanmax(e_ctrl) * 1e3:.2f} mm as "
                    f"the controller sees it)")
        goal = "   target RTF >= 20" if k == "ours RK4" else ""
        print(f"  {k:21s} {med[k]:7.3f} {rtf[k]:5.1f} ({rtf_cpu[k]:4.1f}) "
              f"{med[k] / n_steps * 1e6:8.1f}   {etxt}{goal}")
    print(f"  base at the end: peer ({base_end[0]:.3f}, {base_end[1]:.3f}) m, ours "
          f"({ref.q[-1, 0]:.3f}, {ref.q[-1, 1]:.3f}) m; the plan ends at "
          f"({run.base['x'][-1]:.3f}, {run.base['y'][-1]:.3f}) m (the "
          f"peer's tyres creep on MuJoCo's soft contacts; the wheel servo follows rates)")
    print("  (the compiled and NumPy loops differ in round-off only; the sign of the plant's "
          "Coulomb friction near zero rates turns that into the small tracking difference)")

    r_peer = ratio(wall_s, "MuJoCo RK4 peer", "ours RK4")
    r_peer_cpu = ratio(cpu_s, "MuJoCo RK4 peer", "ours RK4")
    print("\n4. ratios (medians of per-repeat ratios)")
    print(f"  ours RK4 vs the MuJoCo RK4 peer, peer time / ours: {r_peer:.2f} wall "
          f"({r_peer_cpu:.2f} CPU)   target >= 1.25")
    print(f"  compiled vs NumPy loop: {ratio(wall_s, 'ours RK4, NumPy loop', 'ours RK4'):.2f}x; "
          f"Euler vs RK4 speed: ours {ratio(wall_s, 'ours RK4', 'ours Euler'):.2f}, MuJoCo "
          f"{ratio(wall_s, 'MuJoCo RK4 peer', 'MuJoCo Euler peer'):.2f}; ours Euler vs MuJoCo "
          f"Euler peer {ratio(wall_s, 'MuJoCo Euler peer', 'ours Euler'):.2f}")
    print(f"  targets: RK4 >= 20x real time {'met' if rtf['ours RK4'] >= 20 else 'NOT met'} "
          f"({rtf['ours RK4']:.1f}x wall, {rtf_cpu['ours RK4']:.1f}x CPU); >= 1.25x the "
          f"MuJoCo RK4 peer {'met' if r_peer >= 1.25 else 'NOT met'} ({r_peer:.2f}x)")

    # ------------------------------------------------ what our step is made of
    # instrumented runs, ours and the peer's alternating
    tls, pts = [], []
    for _ in range(max(repeat, 3)):
        tls.append(timed_run(run))
        pts.append(peer_timed(peer, RK4))
    tl = {k: float(np.median([x[k] for x in tls])) for k in tls[0]}
    p = cost_pieces(run, numpy_run, ref, max(repeat, 5))
    step_us = tl["total"]
    rows = [
        ("step (instrumented run)", step_us, ""),
        ("controller: run.control", tl["control"], "compiled command + Python wrapper"),
        ("plant: one compiled RK4 step (Plant.rk4)", tl["plant"], "4 stages + integrate"),
        ("recorder: add + result (tool pose per sample)", tl["record"] + tl["result"], ""),
        ("loop bookkeeping (limits, events, checks)", tl["loop"], "the rest, incl. timers"),
    ]
    print(f"\nour RK4 step, wall µs per step from timers inside the run (% of the step), "
          f"medians over {len(tls)} runs; uninstrumented: {med['ours RK4'] / n_steps * 1e6:.1f} µs")
    for label, v, note in rows:
        print(f"  {label:52s} {v:7.1f}  {100 * v / step_us:5.1f} %  {note}")

    def g(key):
        return p.get(key, math.nan)

    C, K = g("control"), g("kernel_rk4")
    detail = [
        ("controller, timed alone: run.control", C, C, ""),
        ("  the compiled command call alone", g("command"), C, ""),
        ("  its Pinocchio calls made from Python (floor)", g("command_floor"), C, "for scale"),
        ("  the callable's own work (lookup, info)", C - g("command"), C, "by difference"),
        ("  (NumPy reference: _command_numpy)", g("command_numpy"), C, "for scale"),
        ("compiled RK4 step alone: Plant.rk4", K, K, ""),
        ("  4 x (crba + nle + integrate) from Python", g("plant_floor"), K, "for scale"),
        ("  (NumPy reference: begin + _rk4)", g("numpy_rk4"), K, "for scale"),
    ]
    print("\npieces timed alone over the reference run's states, CPU µs per call "
          "(% of the parent piece)")
    for label, v, ref_v, note in detail:
        print(f"  {label:52s} {v:7.1f}  {100 * v / ref_v:5.1f} %  {note}")

    # ------------------------------------------------ the peer's step
    pe = peer_timed(peer, EUL)
    ncon, nefc = pts[0]["ncon"], pts[0]["nefc"]
    pt = {k: float(np.median([x[k] for x in pts]))
          for k in ("map", "control", "mj_step", "loop", "total")}
    print(f"\nMuJoCo RK4 peer step, wall µs per step from timers in its loop (runs alternating "
          f"with ours above); uninstrumented {med['MuJoCo RK4 peer'] / n_steps * 1e6:.1f} µs")
    for label, key in (("step (instrumented)", "total"), ("mj_step, RK4", "mj_step"),
                       ("state mapping MuJoCo -> (q, ν)", "map"),
                       ("controller: run.control", "control"),
                       ("rest (qfrc_applied, events)", "loop")):
        print(f"  {label:52s} {pt[key]:7.1f}  {100 * pt[key] / pt['total']:5.1f} %")
    print(f"  ({ncon[0]}–{ncon[1]} contacts, {nefc} constraint rows with the joints' dry "
          f"friction; mj_step with Euler {pe['mj_step']:.1f} µs)")

    # ------------------------------------------------ what dominates
    mj = pt["mj_step"] + pt["map"]
    print("\nwhat dominates")
    print(f"  20x real time = {1e6 * sc.step / 20:.0f} µs per step; ours: controller "
          f"{tl['control']:.0f} + plant {tl['plant']:.0f} + recorder {tl['record']:.0f} + "
          f"loop {tl['loop']:.0f} µs.  Inside the compiled calls the Pinocchio algorithms "
          f"(crba, nle) are most of the time; the Python loop and the controller's wrapper "
          f"are the rest")
    print(f"  the peer's physics (mj_step + mapping) {mj:.0f} µs per step, ours (compiled "
          f"plant) {tl['plant']:.0f} µs ({tl['plant'] / mj:.2f}x); both loops call the same "
          f"controller")
    return 0


if __name__ == "__main__":
    sys.exit(main(int(sys.argv[1]) if len(sys.argv) > 1 else 5))
