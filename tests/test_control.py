"""Operational-space controller: closed-loop response, consistency, limits, bad input."""

from __future__ import annotations

import json
import math

import numpy as np
import pinocchio as pin
import pytest

import opspace
from conftest import make_robot, random_state, two_link_urdf
from opspace import trajectory
from opspace.control import BasePlan, Gains, OperationalSpaceController, Target
from opspace.dynamics import cartesian_task_space, task_space



@pytest.fixture(scope="module")
def two_link(tmp_path_factory):
    return make_robot(tmp_path_factory.mktemp("two_link_ctl"), two_link_urdf())


def unlimited(robot):
    return np.full(robot.nv, np.inf)


def damped_oscillator(t, e0, edot0, wn, zeta):
    """Free response of ë + 2ζω_n ė + ω_n² e = 0 (under-, critically and over-damped
    cases; Thomson & Dahleh, Theory of Vibration with Applications, 5th ed. 1998,
    sec. 2.6, free vibration with viscous damping; recalled from memory)."""
    if zeta < 1.0:
        wd = wn * math.sqrt(1.0 - zeta * zeta)
        return np.exp(-zeta * wn * t) * (e0 * np.cos(wd * t)
                                         + (edot0 + zeta * wn * e0) / wd * np.sin(wd * t))
    if zeta == 1.0:
        return np.exp(-wn * t) * (e0 + (edot0 + wn * e0) * t)
    s = wn * math.sqrt(zeta * zeta - 1.0)
    r1, r2 = -zeta * wn + s, -zeta * wn - s
    return ((edot0 - r2 * e0) * np.exp(r1 * t) - (edot0 - r1 * e0) * np.exp(r2 * t)) / (r1 - r2)


def rk4_closed_loop(robot, ctl, q, nu, target, dt, steps, plan=None):
    """Classical RK4 of the reduced dynamics with the controller evaluated at every
    stage (a continuous-time control law); configurations stepped on the manifold
    with pinocchio.integrate.  Returns the task errors and wheel rates after each step."""
    model, S = robot.model, robot.S
    plan = plan or (lambda t: None)

    def f(q, nu, t):
        Q = ctl.command(q, nu, target, base=plan(t))
        return opspace.forward_dynamics(robot, q, nu, Q)

    errors, wheels = [], []
    t = 0.0
    for _ in range(steps):
        k1 = f(q, nu, t)
        n2 = nu + 0.5 * dt * k1
        k2 = f(pin.integrate(model, q, S.dot(nu) * 0.5 * dt), n2, t + 0.5 * dt)
        n3 = nu + 0.5 * dt * k2
        k3 = f(pin.integrate(model, q, S.dot(n2) * 0.5 * dt), n3, t + 0.5 * dt)
        n4 = nu + dt * k3
        k4 = f(pin.integrate(model, q, S.dot(n3) * dt), n4, t + dt)
        q = pin.integrate(model, q, S.dot(nu + 2 * n2 + 2 * n3 + n4) * dt / 6)
        nu = nu + dt / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
        t += dt
        ctl.command(q, nu, target, base=plan(t))
        errors.append(ctl.info.error.copy())
        wheels.append(nu[:2].copy())
    return np.array(errors), np.array(wheels)


# ------------------------------------------------------------------ closed loop
STIFFNESS = np.array([100.0, 200.0, 300.0, 150.0, 250.0, 120.0])   # 1/s²
ZETA = np.array([0.7, 1.0, 0.5, 0.8, 1.5, 1.0])


def offset_target(robot, q, dp, yaw):
    X = robot.frame_placement(q, robot.tool_frame)
    return Target(X.translation + dp, pin.exp3(np.array([0.0, 0.0, yaw])).dot(X.rotation))


def check_response(errors, dt, e0, edot0):
    t = dt * np.arange(1, len(errors) + 1)
    for i in range(6):
        ref = damped_oscillator(t, e0[i], edot0[i], math.sqrt(STIFFNESS[i]), ZETA[i])
        # RK4 at dt = 1 ms on a 17 rad/s loop: ~1e-11; the margin covers the SE(2) step
        np.testing.assert_allclose(errors[:, i], ref, rtol=0, atol=1e-8,
                                   err_msg=f"task row {i} does not follow ë + Kd ė + Kp e = 0")


def test_closed_loop_whole_body_follows_second_order_response(demo):
    q = demo.configuration(base_pose=(0.5, -0.3, 0.4), arm="carry")
    dp, yaw = np.array([0.02, -0.01, 0.015]), 0.1
    target = offset_target(demo, q, dp, yaw)
    ctl = OperationalSpaceController(demo, gains=Gains.from_stiffness(STIFFNESS, ZETA),
                                     posture="carry", friction_feedforward=True,
                                     effort_limit=unlimited(demo))
    v0 = np.array([0.05, 0.02, -0.03])
    ts = task_space(demo, q, np.zeros(demo.nv))
    nu = ts.Jbar.dot(np.concatenate((v0, np.zeros(3))))      # ẋ(0) = [v0; 0]
    errors, _ = rk4_closed_loop(demo, ctl, q, nu, target, 1e-3, 300)
    # the orientation error stays about the world z axis (ω ∥ z from rest)
    check_response(errors, 1e-3, np.r_[dp, 0.0, 0.0, yaw], np.r_[-v0, 0.0, 0.0, 0.0])


def test_closed_loop_arm_only_with_the_base_driving(demo):
    """Arm-only mode while the base accelerates along a plan: the tool error still
    obeys the second-order law (the coupling Γ ν̇_w* is fed forward) and the wheel
    servo's rate error decays as exp(−K_w t)."""
    q = demo.configuration(base_pose=(0.0, 0.0, -0.3), arm="carry")
    dp, yaw = np.array([-0.01, 0.02, 0.01]), -0.08
    target = offset_target(demo, q, dp, yaw)
    K_w = 12.0
    ctl = OperationalSpaceController(demo, mode="arm_only", wheel_gain=K_w,
                                     gains=Gains.from_stiffness(STIFFNESS, ZETA), posture="carry",
                                     friction_feedforward=True, effort_limit=unlimited(demo))
    v0, a, w0, alpha = 0.1, 0.4, 0.1, 0.3

    def plan(t):
        return BasePlan(v=v0 + a * t, omega=w0 + alpha * t, a=a, alpha=alpha)

    dt, steps = 1e-3, 300
    errors, wheels = rk4_closed_loop(demo, ctl, q, np.zeros(demo.nv), target, dt, steps, plan)
    check_response(errors, dt, np.r_[dp, 0.0, 0.0, yaw], np.zeros(6))
    t = dt * np.arange(1, steps + 1)
    planned = np.column_stack(demo.wheel_rates(v0 + a * t, w0 + alpha * t))
    e_w0 = np.array(demo.wheel_rates(v0, w0))
    # first-order servo ė_w = −K_w e_w (closed form e_w(0) exp(−K_w t))
    np.testing.assert_allclose(planned - wheels, np.outer(np.exp(-K_w * t), e_w0), atol=1e-9)


# ------------------------------------------------------------ one-step identities
@pytest.mark.parametrize("mode", ["whole_body", "arm_only"])
def test_task_acceleration_equals_a_star(demo, rng, mode):
    """Perfect-model computed torque (Khatib 1987): ẍ = J ν̇ + J̇ν = a*, with the
    posture in the null space and friction fed forward."""
    ctl = OperationalSpaceController(demo, mode=mode, posture="stowed",
                                     friction_feedforward=True, effort_limit=unlimited(demo))
    for _ in range(3):
        q, nu = random_state(demo, rng, scale=0.5)
        X = demo.frame_placement(q, demo.tool_frame)
        target = Target(X.translation + rng.normal(size=3) * 0.05,
                        pin.exp3(rng.normal(size=3) * 0.1).dot(X.rotation),
                        rng.normal(size=6) * 0.1, rng.normal(size=6))
        plan = BasePlan(v=0.2, omega=-0.1, a=0.3, alpha=0.2)
        Q = ctl.command(q, nu, target, base=plan)
        nu_dot = opspace.forward_dynamics(demo, q, nu, Q)
        ts = task_space(demo, q, nu)
        np.testing.assert_allclose(ts.J.dot(nu_dot) + ts.Jdot_nu, ctl.info.a_star,
                                   rtol=1e-8, atol=1e-8)
        if mode == "arm_only":   # the wheel servo: ν̇_w* = ν̇_plan + K_w (ν_plan − ν_w)
            w_plan = np.array(demo.wheel_rates(plan.v, plan.omega))
            w_acc = np.array(demo.wheel_rates(plan.a, plan.alpha))
            np.testing.assert_allclose(nu_dot[:2], w_acc + ctl.wheel_gain * (w_plan - nu[:2]),
                                       rtol=1e-8, atol=1e-8)


def test_posture_acts_in_the_null_space(demo, rng):
    q, nu = random_state(demo, rng, scale=0.5)
    target = Target.hold(demo, q)
    a = OperationalSpaceController(demo, posture="stowed", effort_limit=unlimited(demo))
    b = OperationalSpaceController(demo, posture="reach_forward", effort_limit=unlimited(demo),
                                   posture_gains=Gains.from_stiffness(80.0, 0.5, size=demo.n_arm))
    dQ = a.command(q, nu, target) - b.command(q, nu, target)
    ts = task_space(demo, q, nu)
    M = opspace.joint_space(demo, q, nu).M
    assert np.abs(dQ).max() > 1.0
    # Khatib 1987: efforts Nᵀ Q₀ produce no task acceleration, J M⁻¹ ΔQ = 0
    np.testing.assert_allclose(ts.J.dot(np.linalg.solve(M, dQ)), np.zeros(6), atol=1e-9)


def test_friction_feedforward_adds_the_model_friction(demo, rng):
    q, nu = random_state(demo, rng)
    target = Target.hold(demo, q)
    kw = dict(posture="carry", effort_limit=unlimited(demo))
    with_f = OperationalSpaceController(demo, friction_feedforward=True, **kw)
    without = OperationalSpaceController(demo, **kw)
    dQ = with_f.command(q, nu, target) - without.command(q, nu, target)
    np.testing.assert_allclose(dQ, opspace.friction(demo, q, nu), rtol=1e-10, atol=1e-10)
    # smoothed Coulomb term: f_C tanh(ν / v_s) in place of f_C sign(ν)
    smooth = OperationalSpaceController(demo, friction_feedforward=True, friction_velocity=0.05,
                                        **kw)
    dQ = smooth.command(q, nu, target) - without.command(q, nu, target)
    expected = opspace.friction(demo, q, nu) + demo.coulomb * (np.tanh(nu / 0.05) - np.sign(nu))
    np.testing.assert_allclose(dQ, expected, rtol=1e-10, atol=1e-10)


def test_effort_limits_saturate_and_are_reported(demo, rng):
    q, nu = random_state(demo, rng)
    X = demo.frame_placement(q, demo.tool_frame)
    target = Target(X.translation + [0.3, 0.0, 0.0], X.rotation)
    limit = np.full(demo.nv, 5.0)
    ctl = OperationalSpaceController(demo, effort_limit=limit)
    Q = ctl.command(q, nu, target)
    info = ctl.info
    np.testing.assert_array_equal(Q, np.clip(info.Q_demand, -limit, limit))
    np.testing.assert_array_equal(info.saturated, np.abs(info.Q_demand) > limit)
    assert info.any_saturated and np.all(np.abs(Q) <= limit)
    d = json.loads(json.dumps(info.to_dict()))
    assert len(d["saturated"]) == demo.nv
    # the demo's own limits: wheels from [drive] torque_limit, arm from the URDF efforts
    np.testing.assert_array_equal(OperationalSpaceController(demo).effort_limit,
                                  demo.effort_limit)


def test_cartesian_form_maps_the_command_back(two_link, rng):
    """Square regular J (planar arm, rows x and z, base locked): the arm efforts map
    back exactly, J⁻ᵀ Q_a = F = Λ a* + μ + p with Λ = J⁻ᵀ M J⁻¹ (Khatib 1987)."""
    q = two_link.configuration(arm=[0.4, 1.1])
    nu = np.concatenate(([0.0, 0.0], rng.normal(size=2)))
    X = two_link.frame_placement(q, "tool")
    target = Target(X.translation + [0.02, 0.0, -0.03], velocity=[0.1, 0.0, 0.05],
                    acceleration=[0.5, 0.0, -0.2])
    ctl = OperationalSpaceController(two_link, axes=("x", "z"), mode="arm_only",
                                     effort_limit=unlimited(two_link))
    Q = ctl.command(q, nu, target)
    cf = cartesian_task_space(two_link, q, nu, axes=("x", "z"), base="locked")
    F = cf.Lambda.dot(ctl.info.a_star) + cf.mu + cf.p
    np.testing.assert_allclose(np.linalg.solve(cf.J.T, Q[2:]), F, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(ctl.info.F, F, rtol=1e-9, atol=1e-9)


# ------------------------------------------------------------------ singularities
def test_singular_pose_command_is_finite_and_damped(demo):
    q = demo.configuration(arm="reach_forward")      # stretched: the arm cannot push along x
    target = Target.hold(demo, q)
    nu = np.zeros(demo.nv)
    arm = OperationalSpaceController(demo, mode="arm_only", posture="carry")
    Q = arm.command(q, nu, target)
    assert np.all(np.isfinite(Q)) and arm.info.damped
    # whole body: the base supplies the x motion, the task is regular
    whole = OperationalSpaceController(demo, posture="carry")
    whole.command(q, nu, target)
    assert not whole.info.damped
    # undamped, the same arm-only task is singular
    with pytest.raises(opspace.ModelError, match="singular"):
        OperationalSpaceController(demo, mode="arm_only", damping=None).command(q, nu, target)


@pytest.mark.parametrize("mode", ["whole_body", "arm_only"])
def test_damping_does_not_change_a_regular_command(demo, rng, mode):
    q, nu = random_state(demo, rng)
    target = Target.hold(demo, q)
    with_d = OperationalSpaceController(demo, mode=mode, posture="carry")
    without = OperationalSpaceController(demo, mode=mode, posture="carry", damping=None)
    np.testing.assert_array_equal(with_d.command(q, nu, target), without.command(q, nu, target))
    assert not with_d.info.damped


# ------------------------------------------------------------------ values and helpers
def test_gains_from_stiffness_and_matrices():
    g = Gains.from_stiffness([400.0, 100.0], [1.0, 0.5])
    # critically damped unit mass: K_d = 2 ζ √K_p (common practice, no source)
    np.testing.assert_allclose(g.Kd, np.diag([40.0, 10.0]))
    assert Gains.from_stiffness(25.0, size=3).Kp.shape == (3, 3)
    with pytest.raises(ValueError, match="positive semi-definite"):
        Gains(np.diag([1.0, -1.0]), np.eye(2))
    with pytest.raises(ValueError, match=">= 0"):
        Gains.from_stiffness([100.0, -1.0])
    with pytest.raises(ValueError, match=">= 0"):
        Gains.from_stiffness(100.0, -0.2, size=2)
    with pytest.raises(ValueError, match="symmetric"):
        Gains(np.array([[1.0, 0.5], [0.0, 1.0]]), np.eye(2))
    with pytest.raises(ValueError, match="square"):
        Gains(np.eye(2), np.eye(3))
    with pytest.raises(ValueError, match="give `size`"):
        Gains.from_stiffness(100.0)


def test_target_from_profile_and_base_plan_from_timeline(demo):
    prof = trajectory.trapezoidal(0.3, 0.2, 0.5)
    dt = 0.01
    t = np.arange(0.0, prof.duration + dt / 2, dt)
    sample = prof.sample(t)
    start, end = np.array([0.5, 0.0, 0.8]), np.array([0.5, 0.3, 0.8])
    targets = [Target.from_profile(sample, i, start, end) for i in range(len(t))]
    np.testing.assert_allclose(targets[-1].position, end, atol=1e-12)
    pos = np.array([x.position for x in targets])
    vel = np.array([x.velocity[:3] for x in targets])
    # central differences of the positions match the velocities (common practice, no source)
    np.testing.assert_allclose((pos[2:] - pos[:-2]) / (2 * dt), vel[1:-1], atol=0.5 * 0.5 * dt)
    np.testing.assert_allclose(vel[:, [0, 2]], 0.0, atol=1e-15)

    timeline = trajectory.Timeline([trajectory.Piece(base=trajectory.arc(prof, 2.0))])
    ts = timeline.sample(0.05)
    plan = BasePlan.from_timeline(ts, 3)
    assert (plan.v, plan.omega, plan.a, plan.alpha) == (ts.v[3], ts.omega[3], ts.a[3], ts.alpha[3])
    assert plan.omega == pytest.approx(plan.v / 2.0)   # arc: ω = v / R


def test_bad_input(demo):
    q, nu = demo.configuration(arm="carry"), np.zeros(demo.nv)
    X = demo.frame_placement(q, demo.tool_frame)
    with pytest.raises(ValueError, match=r"`position` must have shape \(3,\)"):
        Target([0.0, 1.0])
    with pytest.raises(ValueError, match="rotation matrix"):
        Target(X.translation, 2.0 * X.rotation)
    with pytest.raises(ValueError, match="rotation matrix"):
        Target(X.translation, -X.rotation)                      # a reflection, det = −1
    with pytest.raises(ValueError, match=r"`velocity` must have shape \(6,\)"):
        Target(X.translation, X.rotation, velocity=[0.0] * 4)
    with pytest.raises(ValueError, match="non-finite"):
        Target(X.translation, X.rotation, acceleration=[np.nan, 0.0, 0.0])
    ctl = OperationalSpaceController(demo)
    with pytest.raises(ValueError, match="needs a `rotation`"):
        ctl.command(q, nu, Target(X.translation))
    with pytest.raises(ValueError, match="must be a Target"):
        ctl.command(q, nu, X)
    with pytest.raises(ValueError, match="BasePlan"):
        ctl.command(q, nu, Target.hold(demo, q), base=(0.1, 0.0))
    with pytest.raises(ValueError, match=r"`q` must have shape \(13,\)"):
        ctl.command(q[:6], nu, Target.hold(demo, q))
    with pytest.raises(ValueError, match="non-finite"):
        ctl.command(q, np.full(demo.nv, np.inf), Target.hold(demo, q))
    with pytest.raises(opspace.ConfigError, match="unknown frame 'gripper'"):
        OperationalSpaceController(demo, frame="gripper")
    with pytest.raises(opspace.ConfigError, match="unknown frame"):
        Target.hold(demo, q, frame="gripper")
    with pytest.raises(opspace.ConfigError, match="no pose 'wave'"):
        OperationalSpaceController(demo, posture="wave")
    with pytest.raises(ValueError, match="`mode`"):
        OperationalSpaceController(demo, mode="base_only")
    with pytest.raises(ValueError, match="6 x 6"):
        OperationalSpaceController(demo, gains=Gains.from_stiffness(100.0, size=3))
    with pytest.raises(ValueError, match="`wheel_gain`"):
        OperationalSpaceController(demo, wheel_gain=-1.0)
    with pytest.raises(ValueError, match="`effort_limit`"):
        OperationalSpaceController(demo, effort_limit=np.zeros(demo.nv))
    with pytest.raises(ValueError, match="`posture`"):
        OperationalSpaceController(demo, posture=[0.0, 0.1])


def test_continuous_joint_posture_error_goes_the_short_way(tmp_path):
    """A continuous elbow (Pinocchio stores cos, sin): the posture error is taken
    modulo 2π, so postures 2π apart give the same command."""
    text = two_link_urdf().replace('name="elbow" type="revolute"', 'name="elbow" type="continuous"')
    robot = make_robot(tmp_path, text)
    assert robot.model.nq == robot.model.nv + 2          # the continuous joint's (cos, sin)
    q = robot.configuration(arm=[0.3, -math.pi + 0.1])
    nu = np.array([0.0, 0.0, 0.2, -0.1])
    target = Target(robot.frame_placement(q, "tool").translation)
    kw = dict(axes="linear", effort_limit=unlimited(robot))
    a = OperationalSpaceController(robot, posture=[0.3, math.pi - 0.1], **kw)
    b = OperationalSpaceController(robot, posture=[0.3, -math.pi - 0.1], **kw)
    np.testing.assert_allclose(a.command(q, nu, target), b.command(q, nu, target), atol=1e-9)


def test_example_runs_in_quick_mode(tmp_path):
    """examples/osc_prototype.py --quick: runs, prints, writes both figures."""
    import importlib.util
    from pathlib import Path

    path = Path(__file__).resolve().parent.parent / "examples" / "osc_prototype.py"
    spec = importlib.util.spec_from_file_location("osc_prototype", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    module.main(["--quick", "--out", str(tmp_path)])
    for name in ("osc_effective_mass.png", "osc_tracking.png"):
        assert (tmp_path / name).stat().st_size > 10_000
