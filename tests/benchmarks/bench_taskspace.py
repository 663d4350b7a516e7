"""Speed of the task-space terms and of the operational-space command (demo robot).

Prints, measured side by side in one run (candidates interleaved, repeats
alternated, so drift of this noisy machine hits all of them alike):

- `task_space` (full 6-D task) and `OperationalSpaceController.command`
  (whole body and arm only) in µs per call, median;
- their floor: the sum of the raw Pinocchio calls each needs, and the ratio;
- the same quantities computed with MuJoCo's Python bindings (mj_forward,
  mj_fullM, mj_jacSite, mj_jacDot) plus the same NumPy/LAPACK algebra on an
  equivalent model written here as MJCF from the Pinocchio model (same tree,
  joint placements, inertias and armature; the planar base as slide x, slide y,
  hinge z, with the differential-drive reduction applied to it), and the ratio.
  The MuJoCo results are checked against opspace's before timing.

Targets (issue 3): command within 4x its floor, and faster than the MuJoCo path.

    python tests/benchmarks/bench_taskspace.py
"""

from __future__ import annotations

import gc
import math
import time
from pathlib import Path

import mujoco
import numpy as np
import pinocchio as pin
from scipy.linalg import lapack

import opspace
from opspace.control import Gains, OperationalSpaceController, Target
from opspace.dynamics import task_space

DEMO = Path(__file__).resolve().parents[2] / "models" / "marmot" / "robot.toml"
LWA = pin.LOCAL_WORLD_ALIGNED


def measure(candidates, repeat=21, number=1000):
    """µs per call of each candidate, one sample per repeat; the candidates run in
    turn within every repeat, so a ratio taken repeat by repeat compares calls
    made under the same machine load.

    CPU time of this process (`time.process_time`), not wall time: time spent
    descheduled is not charged to whichever candidate happened to be running.
    The garbage collector is paused while timing."""
    samples = {name: [] for name in candidates}
    gc.disable()
    try:
        for _ in range(repeat):
            for name, fn in candidates.items():
                t0 = time.process_time()
                for _ in range(number):
                    fn()
                samples[name].append((time.process_time() - t0) / number * 1e6)
    finally:
        gc.enable()
    return {name: np.array(s) for name, s in samples.items()}


def ratio(samples, a, b):
    """Median over repeats of the per-repeat ratio a / b."""
    return float(np.median(samples[a] / samples[b]))


# ------------------------------------------------------------- MuJoCo model
def _fmt(x):
    return " ".join(f"{float(v):.17g}" for v in x)


def mjcf_from_pinocchio(robot):
    """MJCF of the same kinematic tree and inertias (no geometry, no contacts)."""
    model = robot.model
    children = {i: [] for i in range(model.njoints)}
    for i in range(1, model.njoints):
        children[model.parents[i]].append(i)
    sites = {}
    for f in model.frames:
        if f.name == robot.tool_frame:
            sites.setdefault(f.parentJoint, []).append(f)

    def joint_xml(i):
        jm, name = model.joints[i], model.names[i]
        kind = jm.shortname()
        arm = model.armature[jm.idx_v]
        if kind == "JointModelPlanar":
            return (f'<joint name="{name}_x" type="slide" axis="1 0 0"/>'
                    f'<joint name="{name}_y" type="slide" axis="0 1 0"/>'
                    f'<joint name="{name}_th" type="hinge" axis="0 0 1"/>')
        axis = {"X": "1 0 0", "Y": "0 1 0", "Z": "0 0 1"}[kind[-1]]
        jtype = "hinge" if kind.startswith("JointModelR") else "slide"
        if kind[-2] not in "RP" or kind[:-2] != "JointModel":
            raise NotImplementedError(f"joint type {kind} (only axis-aligned R/P and planar)")
        return f'<joint name="{name}" type="{jtype}" axis="{axis}" armature="{arm:.17g}"/>'

    def body_xml(i):
        X, Y = model.jointPlacements[i], model.inertias[i]
        quat = pin.Quaternion(X.rotation)
        I = Y.inertia
        s = (f'<body name="{model.names[i]}" pos="{_fmt(X.translation)}" '
             f'quat="{_fmt([quat.w, quat.x, quat.y, quat.z])}">'
             f'<inertial pos="{_fmt(Y.lever)}" mass="{Y.mass:.17g}" fullinertia="'
             f'{_fmt([I[0, 0], I[1, 1], I[2, 2], I[0, 1], I[0, 2], I[1, 2]])}"/>'
             + joint_xml(i))
        for f in sites.get(i, []):
            q = pin.Quaternion(f.placement.rotation)
            s += (f'<site name="{f.name}" pos="{_fmt(f.placement.translation)}" '
                  f'quat="{_fmt([q.w, q.x, q.y, q.z])}"/>')
        return s + "".join(body_xml(c) for c in children[i]) + "</body>"

    g = model.gravity.linear
    return (f'<mujoco model="equivalent"><compiler angle="radian" autolimits="true"/>'
            f'<option gravity="{_fmt(g)}"><flag contact="disable"/></option>'
            f'<worldbody>{"".join(body_xml(c) for c in children[0])}</worldbody></mujoco>')


class MujocoPath:
    """The demo robot's terms from MuJoCo: qpos (x, y, θ, wheels, arm)."""

    def __init__(self, robot):
        self.robot = robot
        self.m = mujoco.MjModel.from_xml_string(mjcf_from_pinocchio(robot))
        self.d = mujoco.MjData(self.m)
        self.site = mujoco.mj_name2id(self.m, mujoco.mjtObj.mjOBJ_SITE, robot.tool_frame)
        self.body = int(self.m.site_bodyid[self.site])
        nv = self.m.nv
        self.M = np.zeros((nv, nv))
        self.jac = np.zeros((6, nv))
        self.jac_dot = np.zeros((6, nv))
        self.S = robot.S.copy()            # rows 0, 1 depend on θ (world slides)
        self.St = np.empty((robot.nv, nv))
        self.jac_com = np.zeros((3, nv))
        self.Sdot_nu = np.zeros(nv)
        self.weight = -robot.total_mass() * robot.model.gravity.linear   # N, (0, 0, m g)

    def set_state(self, q, nu):
        r = self.robot.wheel_radius
        theta = math.atan2(q[3], q[2])
        c, s = math.cos(theta), math.sin(theta)
        S = self.S
        S[0, :2], S[1, :2] = c * r / 2, s * r / 2   # ẋ_w = cos θ v, ẏ_w = sin θ v
        self.St[:] = S.T
        d = self.d
        d.qpos[:2], d.qpos[2], d.qpos[3:] = q[:2], theta, q[4:]
        d.qvel[:] = S.dot(nu)
        return theta

    def terms(self, q, nu):
        """M, h = c + g, J (6, nv_red), J̇ν (6,), p (3,), R (3, 3), reduced."""
        m, d, robot = self.m, self.d, self.robot
        theta = self.set_state(q, nu)
        mujoco.mj_forward(m, d)
        mujoco.mj_fullM(m, d, self.M)
        mujoco.mj_jacSite(m, d, self.jac[:3], self.jac[3:], self.site)
        p = d.site_xpos[self.site]
        mujoco.mj_jacDot(m, d, self.jac_dot[:3], self.jac_dot[3:], p, self.body)
        S, St = self.S, self.St
        M = St.dot(self.M).dot(S)
        J = self.jac.dot(S)
        # S depends on θ here (world-frame slides): v̇ = S ν̇ + Ṡ ν, so the reduced
        # bias gains Sᵀ M_mj Ṡ ν and J̇_red ν = J̇ S ν + J Ṡ ν
        r, omega = robot.wheel_radius, d.qvel[2]
        v_fwd = r * (nu[0] + nu[1]) / 2
        Sdot_nu = self.Sdot_nu
        Sdot_nu[0], Sdot_nu[1] = -math.sin(theta) * omega * v_fwd, math.cos(theta) * omega * v_fwd
        h = St.dot(d.qfrc_bias + self.M.dot(Sdot_nu))
        Jdot_nu = self.jac_dot.dot(d.qvel) + self.jac.dot(Sdot_nu)
        return M, h, J, Jdot_nu, p, d.site_xmat[self.site].reshape(3, 3)

    def gravity(self):
        """g = Sᵀ J_comᵀ m |g| ẑ (the whole system's COM Jacobian: one call)."""
        mujoco.mj_jacSubtreeCom(self.m, self.d, self.jac_com, 0)
        return self.St.dot(self.jac_com.T.dot(self.weight))


def osc_algebra(M, h, J, Jdot_nu, p, R, nu, target, gains, nd0, limit):
    """The controller's whole-body algebra (full 6-D task), written once more:
    Q = Jᵀ Λ (a* + J M⁻¹(h − M ν̇₀) − J̇ν) + M ν̇₀, clipped to the limits."""
    e = np.empty(6)
    e[:3] = target.position - p
    e[3:] = pin.log3(target.rotation.dot(R.T))
    a_star = target.acceleration + gains.Kd.dot(target.velocity - J.dot(nu)) + gains.Kp.dot(e)
    M_nd0 = M.dot(nd0)
    _, Y, _ = lapack.dposv(M, np.column_stack((J.T, h - M_nd0)))
    JY = J.dot(Y)
    rhs = np.column_stack((np.eye(6), JY[:, 6] + a_star - Jdot_nu))
    _, X, _ = lapack.dposv(JY[:, :6], rhs)
    Q = J.T.dot(X[:, 6]) + M_nd0
    return np.clip(Q, -limit, limit)


def posture_acceleration(robot, ctl, q, nu):
    """ν̇₀ of the controller's null-space task from its public settings (base still)."""
    nd0 = np.empty(robot.nv)
    nd0[:2] = -ctl.wheel_gain * nu[:2]
    Pg = ctl.posture_gains
    nd0[2:] = Pg.Kp.dot(ctl.posture - robot.arm_positions(q)) - Pg.Kd.dot(nu[2:])
    return nd0


def task_algebra(M, c, g, J, Jdot_nu):
    """Λ, μ, p, J̄ from joint-space terms (the task_space algebra)."""
    _, Y, _ = lapack.dposv(M, np.column_stack((J.T, c, g)))
    JY = J.dot(Y)
    rhs = np.column_stack((np.eye(6), JY[:, 6] - Jdot_nu, JY[:, 7]))
    _, X, _ = lapack.dposv(JY[:, :6], rhs)
    return X[:, :6], X[:, 6], X[:, 7], Y[:, :6].dot(X[:, :6])



def main():
    robot = opspace.load_robot(DEMO)
    model, data = robot.model, robot.model.createData()
    rng = np.random.default_rng(3)
    q = robot.configuration(base_pose=(0.4, -0.2, 0.7), arm="carry")
    nu = 0.3 * rng.normal(size=robot.nv)
    v, zero, fid = robot.S.dot(nu), np.zeros(model.nv), robot.tool_frame_id
    X = robot.frame_placement(q, fid)
    target = Target(X.translation + [0.01, -0.02, 0.005], pin.exp3(np.array([0.0, 0.05, 0.02]))
                    .dot(X.rotation), [0.05, 0.0, 0.0, 0.0, 0.0, 0.1])
    gains = Gains.from_stiffness([400.0] * 3 + [300.0] * 3, 1.0)
    ctl = OperationalSpaceController(robot, gains=gains, posture="carry")
    ctl_arm = OperationalSpaceController(robot, gains=gains, posture="carry", mode="arm_only")

    # the same controller on MuJoCo's terms, and a check that both agree
    mj = MujocoPath(robot)
    nd0 = posture_acceleration(robot, ctl, q, nu)
    Q_ref = ctl.command(q, nu, target)
    Q_mj = osc_algebra(*mj.terms(q, nu), nu, target, gains, nd0, ctl.effort_limit)
    ts = task_space(robot, q, nu)
    M_mj, h_mj, J_mj, Jdn_mj, _, _ = mj.terms(q, nu)
    js = opspace.joint_space(robot, q, nu)
    print("MuJoCo model check (max |difference|): "
          f"M {np.abs(M_mj - js.M).max():.1e}, c+g {np.abs(h_mj - js.h).max():.1e}, "
          f"g {np.abs(mj.gravity() - js.g).max():.1e}, "
          f"J {np.abs(J_mj - ts.J).max():.1e}, J̇ν {np.abs(Jdn_mj - ts.Jdot_nu).max():.1e}, "
          f"command Q {np.abs(Q_mj - Q_ref).max():.1e} N·m")

    def floor_task_space():
        pin.crba(model, data, q)
        pin.nonLinearEffects(model, data, q, v)
        pin.computeGeneralizedGravity(model, data, q)
        pin.computeFrameJacobian(model, data, q, fid, LWA)
        pin.forwardKinematics(model, data, q, v, zero)
        pin.getFrameClassicalAcceleration(model, data, fid, LWA)

    def floor_command():
        pin.crba(model, data, q)
        pin.nonLinearEffects(model, data, q, v)
        pin.computeFrameJacobian(model, data, q, fid, LWA)
        pin.forwardKinematics(model, data, q, v, zero)
        pin.getFrameClassicalAcceleration(model, data, fid, LWA)
        pin.log3(pin.updateFramePlacement(model, data, fid).rotation)

    def calls_made_by_command():
        pin.crba(model, data, q, pin.Convention.WORLD)
        pin.getFrameJacobian(model, data, fid, LWA)      # uses data.J left by crba(WORLD)
        pin.nonLinearEffects(model, data, q, v)
        pin.forwardKinematics(model, data, q, v, zero)
        pin.getFrameClassicalAcceleration(model, data, fid, LWA)
        pin.log3(pin.updateFramePlacement(model, data, fid).rotation)

    mm, md = mj.m, mj.d

    def mujoco_raw():
        mj.set_state(q, nu)
        mujoco.mj_forward(mm, md)
        mujoco.mj_fullM(mm, md, mj.M)
        mujoco.mj_jacSite(mm, md, mj.jac[:3], mj.jac[3:], mj.site)
        mujoco.mj_jacDot(mm, md, mj.jac_dot[:3], mj.jac_dot[3:], md.site_xpos[mj.site], mj.body)

    def mujoco_task_space():
        M, h, J, Jdn, _, _ = mj.terms(q, nu)
        g = mj.gravity()
        return task_algebra(M, h - g, g, J, Jdn)

    def mujoco_command():
        return osc_algebra(*mj.terms(q, nu), nu, target, gains, nd0, ctl.effort_limit)

    t = measure({
        "floor_ts": floor_task_space,
        "task_space": lambda: task_space(robot, q, nu),
        "floor_cmd": floor_command,
        "calls_cmd": calls_made_by_command,
        "command": lambda: ctl.command(q, nu, target),
        "command_arm": lambda: ctl_arm.command(q, nu, target),
        "mujoco_raw": mujoco_raw,
        "mujoco_ts": mujoco_task_space,
        "mujoco_cmd": mujoco_command,
    })
    med = {name: float(np.median(x)) for name, x in t.items()}
    print(f"\nµs per call, medians over {len(t['command'])} interleaved repeats; ratios are "
          f"medians of per-repeat ratios (demo robot, nv = {robot.nv})")
    rows = (
        ("task_space (full 6-D)", "task_space", "floor_ts", "mujoco_ts", None),
        ("command, whole body", "command", "floor_cmd", "mujoco_cmd", 4.0),
        ("command, arm only", "command_arm", "floor_cmd", None, 4.0),
    )
    print(f"{'':24s} {'µs':>7s} {'floor µs':>9s} {'/floor':>7s} {'MuJoCo µs':>10s} "
          f"{'/MuJoCo':>8s}")
    for label, name, floor, name_mj, target_ratio in rows:
        r_floor = ratio(t, name, floor)
        r_mj = ratio(t, name, name_mj) if name_mj else None
        mj_txt = f"{med[name_mj]:10.2f} {r_mj:8.2f}" if name_mj else f"{'':10s} {'':8s}"
        verdict = ""
        if target_ratio is not None:
            ok = r_floor <= target_ratio and (r_mj is None or r_mj < 1.0)
            verdict = "  PASS" if ok else "  MISS"
        print(f"{label:24s} {med[name]:7.2f} {med[floor]:9.2f} {r_floor:7.2f} {mj_txt}{verdict}")
    print(f"raw MuJoCo calls (mj_forward + mj_fullM + mj_jacSite + mj_jacDot): "
          f"{med['mujoco_raw']:.2f} µs, {ratio(t, 'mujoco_raw', 'floor_cmd'):.2f}x the Pinocchio "
          "command floor")
    print(f"the Pinocchio calls command actually makes (crba(WORLD) + getFrameJacobian in "
          f"place of computeFrameJacobian): {med['calls_cmd']:.2f} µs; command / those: "
          f"{ratio(t, 'command', 'calls_cmd'):.2f}")
    print("targets: command <= 4x its floor and faster than the MuJoCo path")


if __name__ == "__main__":
    main()
