"""Speed of the simulation loop on the demo pick, and MuJoCo's RK4 as the peer.

Prints, all measured in one run (issue 6, "Speed"):

1. the real-time factor of the bundled demo pick (models/marmot/pick.toml: 9
   reduced coordinates, 1 kHz control, RK4, 9 s, a 3 kg tote picked at 4.05 s)
   run by ``ScenarioRun(...).run(stability=False)``; only `run.run` is timed
   (the set-up, robots, plans and controller, is not);
2. the same run with semi-implicit Euler;
3. the peer: the SAME controller callable (`run.control`, on our own model)
   driving MuJoCo's own RK4 integrator (mjINT_RK4, 1 ms) on an equivalent model
   written below as MJCF: the chassis on a free joint on a ground plane, two
   wheel cylinders on hinges rolling by frictional contact, four frictionless
   caster spheres, the arm's bodies written out from the Pinocchio model
   (joint placements, inertias, armature, joint damping and dry friction), the
   tote's inertia added to the flange body at the pick.  Each control step maps
   MuJoCo's state to our (q, ν) and applies Q through `qfrc_applied`;
4. the ratios (ours RK4 vs the peer, Euler vs RK4) and what a step is made
   of: (a) timers inside runs of ours around the controller callable, the
   plant's forward-dynamics stages (×4 per RK4 step), the rolling-resistance
   loads, the RK4 glue and the recorder, the rest being the loop's own
   bookkeeping; the plant alone, `simulate(..., control=None)`; (b) each
   piece and its parts timed alone over the reference run's states (the
   controller callable, its fast path, its friction feed-forward, the raw
   Pinocchio/LAPACK calls it makes; one forward-dynamics stage and its parts;
   the RK4 glue); (c) timers inside the peer's loop (mj_step, the state
   mapping, the controller), its runs alternating with those of (a); (d) the
   budgets the targets leave: the time of the raw calls alone, and how fast
   our plant must be for the peer ratio.

Timing: the four runs of items 1–3 alternate within every repeat, with the
garbage collector paused; the figures are medians over repeats and every ratio
is the median of the per-repeat ratios (the machine is noisy: compare ratios,
never absolute times).  RTF is on wall time, as the issue asks; the CPU time of
this process is printed beside it (time spent descheduled is not charged).
The pieces of (b) are CPU time, interleaved within each repeat, each given as
its median share of its parent piece.  The private pieces timed in item 4
(`opspace.simulate._Plant`, `_rk4`, `_Recorder`, the controller's `_command`)
are the ones `simulate` calls; if they are renamed, update this script.

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
from scipy.linalg import lapack, null_space

from opspace.description import inertia_matrix
from opspace.description.scenario import load_scenario
from opspace.dynamics.joint_space import RollingLoads
from opspace.model import GRAVITY, load_robot
from opspace.simulate import ScenarioRun, _Plant, _rk4, simulate

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
def timed_run(run, integrator="rk4"):
    """One run of `run.run` with the controller, the plant's stages, the RK4 glue
    and the recorder wrapped in timers (the wrappers add a few µs per step).
    Returns {piece: wall µs per step}, the instrumented total as "total" and
    the unwrapped rest of the loop as "loop"."""
    sim = sys.modules[_Plant.__module__]   # the module (opspace.simulate is also a function name)

    acc = dict.fromkeys(("control", "start_step", "accel", "rk4_glue", "record", "result"), 0.0)
    clock = time.perf_counter
    saved = (sim._rk4, sim._Plant.accel, sim._Plant.start_step, sim._Recorder.add,
             sim._Recorder.result, run.control)
    rk4, accel, start_step, add, result, control = saved

    def t_accel(self, q, nu, Q):
        t0 = clock()
        out = accel(self, q, nu, Q)
        acc["accel"] += clock() - t0
        return out

    def t_rk4(*args):
        a0, t0 = acc["accel"], clock()
        out = rk4(*args)
        acc["rk4_glue"] += clock() - t0 - (acc["accel"] - a0)
        return out

    def wrap(fn, key):
        def w(*args, **kwargs):
            t0 = clock()
            out = fn(*args, **kwargs)
            acc[key] += clock() - t0
            return out
        return w

    sim._rk4, sim._Plant.accel = t_rk4, t_accel
    sim._Plant.start_step, sim._Recorder.add = wrap(start_step, "start_step"), wrap(add, "record")
    sim._Recorder.result = wrap(result, "result")
    run.control = wrap(control, "control")
    try:
        total, _ = wall(lambda: run.run(integrator=integrator, stability=False))
    finally:
        (sim._rk4, sim._Plant.accel, sim._Plant.start_step, sim._Recorder.add,
         sim._Recorder.result) = saved[:5]
        del run.control                       # back to the class's method
    n = int(round(run.scenario.duration / run.scenario.step))
    out = {k: v / n * 1e6 for k, v in acc.items()}
    out["total"] = total / n * 1e6
    out["loop"] = out["total"] - sum(acc.values()) / n * 1e6
    return out


# ------------------------------------------------ standalone pieces
def cost_pieces(run, res, repeat, stride=3):
    """CPU µs per call of each piece of our step, timed alone over every
    `stride`-th state of the reference run (the payload attached from the pick
    on, as in the run).  The pieces are timed in turn within every repeat, and
    each is given as a median over repeats of its share of its parent piece
    timed in the same repeat (`SHARE_OF`), times the parent's median."""
    robot, ctl = run.robot, run.controller
    model, S, St = robot.model, robot.S, robot.St
    sc = run.scenario
    sel = np.arange(0, len(res.t), stride)
    pick = next((e for e in run.events if e.kind == "pick"), None)
    k_pick = len(sel) if pick is None else int(np.searchsorted(res.t[sel], pick.t - 1e-12))
    ts, qs, nus, Qs = res.t[sel], res.q[sel], res.nu[sel], res.Q[sel]
    states = [(float(t), q, nu) for t, q, nu in zip(ts, qs, nus)]
    qn = [(q, nu) for q, nu in zip(qs, nus)]
    cand = {}                                  # name: (fn, argument tuples)

    # --- the controller callable and the arguments it hands to the fast path
    cand["control"] = (run.control, states)
    captured, fast = [], ctl._command
    ctl._command = lambda *args: captured.append(args) or fast(*args)
    try:
        for st in states:
            run.control(*st)
    finally:
        del ctl._command                      # back to the class's method
    if len(captured) == len(states):
        cand["_command"] = (ctl._command, captured)
    friction_ff = getattr(sys.modules[type(ctl).__module__], "_friction", None)
    if friction_ff is not None and ctl.friction_feedforward:
        cand["friction_ff"] = (lambda q, nu: friction_ff(robot, q, nu), qn)
    data = model.createData()
    fid, zero = robot.tool_frame_id, np.zeros(model.nv)
    k, na = ctl.k, robot.n_arm
    Ma, Ra = np.asfortranarray(np.eye(na) * 2.0), np.asfortranarray(np.ones((na, k + 1)))
    Mt, Rt = np.asfortranarray(np.eye(k) * 2.0), np.asfortranarray(np.ones((k, k + 1)))
    Rd = run.tool.R[0]

    def command_floor(q, nu):
        v = S.dot(nu)
        pin.crba(model, data, q, pin.Convention.WORLD)
        pin.getFrameJacobian(model, data, fid, LWA)
        pin.nonLinearEffects(model, data, q, v)
        pin.forwardKinematics(model, data, q, v, zero)
        pin.getFrameClassicalAcceleration(model, data, fid, LWA)
        H = pin.updateFramePlacement(model, data, fid).homogeneous
        pin.log3(Rd.dot(H[:3, :3].T))
        lapack.dposv(Ma, Ra)
        lapack.dposv(Mt, Rt)

    cand["command_floor"] = (command_floor, qn)

    # --- the plant: one forward-dynamics stage and its parts, the RK4 glue
    plant = _Plant(robot, np.zeros(robot.nv, bool), sc.friction)
    plant.start_step(qs[0])
    cand["start_step"] = (plant.start_step, [(q,) for q in qs])
    cand["accel"] = (plant.accel, [(q, nu, Q) for q, nu, Q in zip(qs, nus, Qs)])
    rl = RollingLoads(robot, qs[0])
    cand["rolling"] = (rl.wheel_efforts, [(nu,) for nu in nus])
    cand["crba_StMS"] = (lambda q: St.dot(pin.crba(model, data, q)).dot(S), [(q,) for q in qs])
    cand["nle_St"] = (lambda q, nu: St.dot(pin.nonLinearEffects(model, data, q, S.dot(nu))), qn)
    cf, vf = robot.coulomb, robot.viscous
    cand["coulomb_viscous"] = (lambda nu: cf * np.sign(nu) + vf * nu, [(nu,) for nu in nus])
    M9 = St.dot(pin.crba(model, data, qs[0])).dot(S)
    cand["dposv"] = (lambda b: lapack.dposv(M9, b), [(Q,) for Q in Qs])

    def accel_floor(q, nu):
        pin.crba(model, data, q)
        pin.nonLinearEffects(model, data, q, S.dot(nu))
        lapack.dposv(M9, nu)

    cand["accel_floor"] = (accel_floor, qn)
    cand["aba"] = (lambda q, nu: pin.aba(model, data, q, S.dot(nu), zero), qn)
    # the same stage as one call: Pinocchio's KKT forward dynamics with the three
    # rolling constraints J_c v = 0 (J_c spans the complement of S: J_c S = 0)
    Jc = np.ascontiguousarray(null_space(St).T)
    gamma = np.zeros(Jc.shape[0])
    taus = [np.concatenate((np.zeros(3), Q)) for Q in Qs]
    cand["kkt"] = (lambda q, nu, tau: pin.forwardDynamics(model, data, q, S.dot(nu), tau, Jc, gamma),
                   [(q, nu, tau) for q, nu, tau in zip(qs, nus, taus)])
    frictionless = _Plant(robot, np.zeros(robot.nv, bool), False)
    i = len(qs) // 2
    a_kkt = pin.forwardDynamics(model, data, qs[i], S.dot(nus[i]), taus[i], Jc, gamma)
    kkt_check = float(np.abs(a_kkt[3:] - frictionless.accel(qs[i], nus[i], Qs[i])).max())
    h = sc.step
    S_h = (S * (0.5 * h), S * h, S * (h / 6.0))     # as `simulate` pre-scales it
    cand["rk4"] = (_rk4, [(model, plant, S_h, res.q[i], res.nu[i], res.nu_dot[i], res.Q[i], h)
                          for i in sel[:-1]])
    cand["integrate"] = (lambda q, nu: pin.integrate(model, q, S.dot(nu) * h), qn)

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
    out = {}
    for name, v in samples.items():
        parent = SHARE_OF.get(name)
        if parent is None or parent not in samples:
            out[name] = float(np.median(v))
        else:
            out[name] = float(np.median(v / samples[parent]) * np.median(samples[parent]))
    out["kkt_check"] = kkt_check
    return out


#: the parent piece each piece's share is taken of (see `cost_pieces`)
SHARE_OF = {"_command": "control", "friction_ff": "control", "command_floor": "control",
            "rolling": "accel", "crba_StMS": "accel", "nle_St": "accel",
            "coulomb_viscous": "accel", "dposv": "accel", "accel_floor": "accel",
            "aba": "accel", "kkt": "accel", "integrate": "rk4"}


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
    run = ScenarioRun(sc)
    robot = run.robot
    T = sc.duration
    n_steps = int(round(T / sc.step))
    rep2 = max(repeat // 2, 1)
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
    e_site, e_ctrl, base_end = peer.simulate()

    RK4, EUL = mujoco.mjtIntegrator.mjINT_RK4, mujoco.mjtIntegrator.mjINT_EULER
    names = ("ours RK4", "ours Euler", "MuJoCo RK4 peer", "MuJoCo Euler peer")
    fns = (lambda: run.run(stability=False), lambda: run.run(integrator="euler", stability=False),
           lambda: peer.simulate(RK4), lambda: peer.simulate(EUL))
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
    print(f"  {'':18s} {'wall s':>7s} {'RTF':>5s} {'(CPU)':>6s} {'µs/step':>8s}   "
          f"tool position error RMS / peak")
    errs = {"ours RK4": ref.position_error, "ours Euler": ref_euler.position_error}
    for k in names:
        e = errs.get(k)
        etxt = f"{rms(e) * 1e3:5.2f} / {np.nanmax(e) * 1e3:5.2f} mm" if e is not None else ""
        if k == "MuJoCo RK4 peer":
            etxt = (f"{rms(e_site) * 1e3:5.2f} / {np.nanmax(e_site) * 1e3:5.2f} mm at MuJoCo's "
                    f"tool site ({rms(e_ctrl) * 1e3:.2f} / {np.nanmax(e_ctrl) * 1e3:.2f} mm as "
                    f"the controller sees it)")
        goal = "   target RTF >= 20" if k == "ours RK4" else ""
        print(f"  {k:18s} {med[k]:7.3f} {rtf[k]:5.1f} ({rtf_cpu[k]:4.1f}) "
              f"{med[k] / n_steps * 1e6:8.1f}   {etxt}{goal}")
    print(f"  base at the end: peer ({base_end[0]:.3f}, {base_end[1]:.3f}) m, ours "
          f"({ref.q[-1, 0]:.3f}, {ref.q[-1, 1]:.3f}) m; the plan ends at "
          f"({run.base['x'][-1]:.3f}, {run.base['y'][-1]:.3f}) m (the "
          f"peer's tyres creep on MuJoCo's soft contacts; the wheel servo follows rates)")

    r_peer = ratio(wall_s, "MuJoCo RK4 peer", "ours RK4")
    r_peer_cpu = ratio(cpu_s, "MuJoCo RK4 peer", "ours RK4")
    print("\n4. ratios (medians of per-repeat ratios)")
    print(f"  ours RK4 vs the MuJoCo RK4 peer, peer time / ours: {r_peer:.2f} wall "
          f"({r_peer_cpu:.2f} CPU)   target >= 1.25")
    print(f"  Euler vs RK4 speed: ours {ratio(wall_s, 'ours RK4', 'ours Euler'):.2f}, MuJoCo "
          f"{ratio(wall_s, 'MuJoCo RK4 peer', 'MuJoCo Euler peer'):.2f}; ours Euler vs MuJoCo "
          f"Euler peer {ratio(wall_s, 'MuJoCo Euler peer', 'ours Euler'):.2f}")
    print(f"  targets: RK4 >= 20x real time {'met' if rtf['ours RK4'] >= 20 else 'NOT met'} "
          f"({rtf['ours RK4']:.1f}x); >= 1.25x the MuJoCo RK4 peer "
          f"{'met' if r_peer >= 1.25 else 'NOT met'} ({r_peer:.2f}x)")

    # ------------------------------------------------ what our step is made of
    # instrumented runs, ours and the peer's alternating
    tls, pts = [], []
    for _ in range(max(repeat, 3)):
        tls.append(timed_run(run))
        pts.append(peer_timed(peer, RK4))
    tl = {k: float(np.median([x[k] for x in tls])) for k in tls[0]}
    p = cost_pieces(run, ref, max(repeat, 5))
    t_plant = float(np.median([wall(lambda: simulate(
        robot, None, duration=T, q0=run.q0, dt=sc.step, friction=sc.friction,
        stability=False))[0] for _ in range(rep2)])) / n_steps * 1e6
    step_us = tl["total"]
    rows = [
        ("step (instrumented run)", step_us, ""),
        ("controller: run.control", tl["control"], ""),
        ("plant: 4 forward-dynamics stages (_Plant.accel)", tl["accel"], ""),
        ("plant: start_step (rolling-resistance loads)", tl["start_step"], ""),
        ("RK4 glue (4 pin.integrate, stage states)", tl["rk4_glue"], "_rk4 − its 3 accel"),
        ("recorder: add + result (tool pose per sample)", tl["record"] + tl["result"], ""),
        ("loop bookkeeping (limits, events, checks)", tl["loop"], "the rest, incl. timers"),
    ]
    print(f"\nour RK4 step, wall µs per step from timers inside the run (% of the step), "
          f"medians over {len(tls)} runs; uninstrumented: {med['ours RK4'] / n_steps * 1e6:.1f} µs")
    for label, v, note in rows:
        print(f"  {label:52s} {v:7.1f}  {100 * v / step_us:5.1f} %  {note}")
    print(f"  {'plant alone: simulate(control=None), per step':52s} {t_plant:7.1f}")

    def g(key):
        return p.get(key, math.nan)

    C = g("control")
    detail = [
        ("controller, timed alone: run.control", C, C, ""),
        ("  the controller's fast path (_command)", g("_command"), C, ""),
        ("    of which friction feed-forward (_friction)", g("friction_ff"), C, ""),
        ("    Pinocchio + LAPACK calls it makes (floor)", g("command_floor"), C, ""),
        ("  the callable's own work (lookup, info)", C - g("_command"), C, "by difference"),
        ("one forward-dynamics stage, timed alone: accel", g("accel"), g("accel"), ""),
        ("  Sᵀ crba S", g("crba_StMS"), g("accel"), ""),
        ("  Sᵀ nonLinearEffects(S ν)", g("nle_St"), g("accel"), ""),
        ("  Coulomb + viscous (NumPy)", g("coulomb_viscous"), g("accel"), ""),
        ("  rolling resistance (wheel_efforts)", g("rolling"), g("accel"), ""),
        ("  dposv 9x9", g("dposv"), g("accel"), ""),
        ("  floor: crba + nonLinearEffects + dposv", g("accel_floor"), g("accel"), ""),
        ("  (pin.aba of the unreduced model, for scale)", g("aba"), g("accel"), ""),
        ("  (one call: pin.forwardDynamics, KKT, 3 constraints)", g("kkt"), g("accel"),
         f"no friction; = accel to {g('kkt_check'):.0e}"),
        ("start_step alone (RollingLoads)", g("start_step"), g("start_step"), ""),
        ("_rk4 alone (3 accel inside)", g("rk4"), g("rk4"), ""),
        ("  glue: _rk4 − 3 accel", g("rk4") - 3 * g("accel"), g("rk4"), ""),
        ("  one pin.integrate(q, S ν h)", g("integrate"), g("rk4"), ""),
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

    # ------------------------------------------------ budgets
    floor = g("command_floor") + 4 * g("accel_floor") + 4 * g("integrate")
    C_loop, P = tl["control"], step_us - tl["control"]
    mj = pt["mj_step"] + pt["map"]
    print("\nbudgets")
    print(f"  20x real time = {1e6 * sc.step / 20:.0f} µs per step; raw calls alone (the "
          f"controller's + 4 x (crba + nle + dposv) + 4 integrate) already take {floor:.0f} µs")
    print(f"  1.25x the peer with the same controller C = {C_loop:.0f} µs: our plant part "
          f"(step − C = {P:.0f} µs) must be <= 0.8 (mj_step + mapping) − 0.2 C = "
          f"{0.8 * mj - 0.2 * C_loop:.0f} µs (a faster controller raises the bound toward "
          f"{0.8 * mj:.0f} µs); the peer's physics (mj_step + mapping) is {mj:.0f} µs, ours "
          f"{P:.0f} µs ({P / mj:.2f}x)")
    return 0


if __name__ == "__main__":
    sys.exit(main(int(sys.argv[1]) if len(sys.argv) > 1 else 5))
