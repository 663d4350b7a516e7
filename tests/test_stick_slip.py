"""Stick-slip friction and joint stops of the plant (opspace.dynamics.stick_slip),
on both loops: the breakaway of a block under a ramped force, a joint held below
its breakaway level, a slide coming to rest without chatter, a payload's weight
taken up over a load transfer, the pick speed, and a joint stop against MuJoCo's
joint limit."""

from __future__ import annotations

import numpy as np
import pinocchio as pin
import pytest

import opspace
from opspace.simulation import PayloadEvent, simulate
from conftest import DEMO, mujoco_fall

F_K, F_S = 10.0, 15.0          # the demo lift's kinetic level (URDF friction) and a static one


@pytest.fixture(params=[True, False], ids=["compiled", "numpy"])
def compiled(request):
    from opspace import _compiled
    if request.param and not _compiled.available():
        pytest.skip("the compiled kernel is not built (CI requires it: test_kernel.py)")
    return request.param


@pytest.fixture(scope="module")
def lift_robot(tmp_path_factory):
    """The demo robot with a breakaway level on the lift and no viscous term there
    (the lift then is Karnopp's block: a mass on a vertical guide)."""
    tmp = tmp_path_factory.mktemp("lift")
    text = DEMO.read_text().replace('arm_urdf = "arm.urdf"',
                                    f'arm_urdf = "{DEMO.with_name("arm.urdf").as_posix()}"')
    text += f"\n[arm_joint.lift]\nstiction = {F_S}\nviscous = 0.0\n"
    (tmp / "robot.toml").write_text(text)
    return opspace.load_robot(tmp / "robot.toml")


def only(robot, i):
    """`locked` mask holding every coordinate but i."""
    m = np.ones(robot.nv, bool)
    m[i] = False
    return m


def test_description_levels(lift_robot):
    assert lift_robot.coulomb[2] == F_K and lift_robot.stiction[2] == F_S
    # the demo's wheels: coulomb 0.2, stiction 0.3 N·m ([drive])
    np.testing.assert_array_equal(lift_robot.stiction[:2], [0.3, 0.3])


def test_breakaway_under_a_ramped_force(lift_robot, compiled):
    # Karnopp (ASME J. Dyn. Sys. Meas. Control 107, 1985) and Armstrong-Hélouvry,
    # Dupont & Canudas de Wit (Automatica 30(7), 1994), the block under a slowly
    # ramped force F = r t: it stays at rest while F <= μ_s N (here the static
    # level F_S), breaks away at the first instant F > F_S, then slides with the
    # kinetic level, m v̇ = F − F_K.  The lift's weight is balanced by a held load
    # g (constant on a vertical guide with the other joints held).
    robot = lift_robot
    q0 = robot.configuration(arm="carry")
    g = opspace.joint_space(robot, q0, np.zeros(robot.nv)).g[2]
    m = opspace.joint_space(robot, q0, np.zeros(robot.nv)).M[2, 2]
    r, h = 20.0, 1e-3                                 # N/s ramp, s step

    def control(t, q, nu):
        Q = np.zeros(robot.nv)
        Q[2] = g + r * t
        return Q, None

    res = simulate(robot, control, duration=1.0, q0=q0, dt=h, locked=only(robot, 2),
                   stability=False, compiled=compiled)
    k_b = int(np.argmax(r * res.t > F_S))             # first sample with F > F_S
    assert res.t[k_b] == pytest.approx(0.751)
    stuck = slice(0, k_b + 1)
    assert np.all(res.nu[stuck, 2] == 0.0)            # exactly at rest, no creep
    assert np.all(res.q[stuck, 6] == q0[6])
    # sliding: under a force held over each step (zero-order hold) the exact
    # velocity is the sum of the step impulses, v_n = Σ h (F_k − F_K) / m
    F = r * res.t[k_b:-1]
    v = np.concatenate([[0.0], np.cumsum(h * (F - F_K) / m)])
    np.testing.assert_allclose(res.nu[k_b:, 2], v, rtol=1e-9, atol=1e-12)
    assert res.nu[-1, 2] > 0.1                        # it did slide


def test_a_joint_below_breakaway_is_held_exactly(lift_robot, compiled):
    # Held below its breakaway level (a load of 0.3 F_S beyond its weight, plus the
    # reactions of the elbow and the wrist swinging under a joint PD, a few N):
    # the lift stays put to 1e-9 m for 1 s (the bound), the others move.
    robot = lift_robot
    q0 = robot.configuration(arm="carry")
    arm0 = robot.arm_positions(q0)
    locked = np.zeros(robot.nv, bool)
    locked[:2] = True

    def control(t, q, nu):
        Q = opspace.joint_space(robot, q, np.zeros(robot.nv)).g.copy()
        ref = arm0 + 0.2 * np.sin(2 * np.pi * 0.5 * t) * np.array([0, 0, 0, 1, 1, 0, 0])
        Q[3:] += 400.0 * (ref[1:] - robot.arm_positions(q)[1:]) - 40.0 * nu[3:]
        Q[2] += 0.3 * F_S
        return Q, None

    res = simulate(robot, control, duration=1.0, q0=q0, dt=1e-3, locked=locked,
                   stability=False, compiled=compiled)
    assert np.max(np.abs(res.q[:, 6] - q0[6])) <= 1e-9
    assert np.ptp(res.q[:, 9]) > 0.1                  # the elbow swung


def test_a_slide_comes_to_rest_without_chatter(lift_robot, compiled):
    # A block sliding at v0 under its balanced weight decelerates at F_K / m, stops
    # at t_s = m v0 / F_K after m v0² / (2 F_K) (Coulomb's law of kinetic friction,
    # by hand), and then stays exactly at rest: no velocity reversal afterwards.
    robot = lift_robot
    q0 = robot.configuration(arm="carry")
    js = opspace.joint_space(robot, q0, np.zeros(robot.nv))
    m, g, v0 = js.M[2, 2], js.g[2], 0.05

    def control(t, q, nu):
        Q = np.zeros(robot.nv)
        Q[2] = g
        return Q, None

    nu0 = np.zeros(robot.nv)
    nu0[2] = v0
    res = simulate(robot, control, duration=0.6, q0=q0, nu0=nu0, dt=1e-3,
                   locked=only(robot, 2), stability=False, compiled=compiled)
    t_s = m * v0 / F_K
    moving = res.nu[:, 2] != 0.0
    assert res.t[moving][-1] == pytest.approx(t_s, abs=1e-3)
    assert not moving[res.t > t_s + 1e-3].any()       # stuck for good
    # the velocity crosses zero once, inside the step where it stops (the state at
    # the next step's start is the only sample past zero, by less than one step's
    # deceleration); then the reset impulse holds it
    back = np.flatnonzero(res.nu[:, 2] < 0.0)
    assert len(back) <= 1 and np.all(res.nu[back, 2] > -1e-3 * F_K / m)
    np.testing.assert_allclose(res.q[-1, 6] - q0[6], m * v0**2 / (2 * F_K), rtol=2e-2)
    # the kinetic energy went into the kinetic friction's work and the final impulse
    W = F_K * (res.q[-1, 6] - q0[6]) + res.extra["plant"]["impulse_loss"]
    assert W == pytest.approx(0.5 * m * v0**2, rel=1e-9)


def test_load_transfer_takes_the_weight_up_linearly(demo, compiled):
    # The payload's weight enters linearly over the transfer time T: on the lift
    # (vertical, the rest held, friction off) m ẍ = −m_p g (t − t₀)/T after the
    # pick, so v(t) = −m_p g (t − t₀)² / (2 T m) (integrated by hand); under the
    # step's zero-order hold the exact velocity is the sum of the step impulses.
    robot = demo
    q0 = robot.configuration(arm="carry")
    g0 = opspace.joint_space(robot, q0, np.zeros(robot.nv)).g[2]
    payload = robot.description.payload
    t0, T, h = 0.1, 0.2, 1e-3

    def control(t, q, nu):
        Q = np.zeros(robot.nv)
        Q[2] = g0                       # the lift's own weight only, not the payload's
        return Q, None

    res = simulate(robot, control, duration=0.3, q0=q0, dt=h, locked=only(robot, 2),
                   friction=False, stability=False, compiled=compiled,
                   events=[PayloadEvent(t0, "pick", payload, transfer=T)])
    with robot.kept():
        robot.attach_payload(payload)
        m = opspace.joint_space(robot, q0, np.zeros(robot.nv)).M[2, 2]
    k0 = int(np.argmax(res.t >= t0 - 1e-12))
    share = np.clip((res.t[k0:-1] - t0) / T, 0.0, 1.0)
    v = np.concatenate([[0.0], np.cumsum(-h * payload.mass * opspace.GRAVITY * share / m)])
    np.testing.assert_allclose(res.nu[k0:, 2], v, rtol=1e-9, atol=1e-12)
    # the closed form of the continuous ramp, to the hold's O(h)
    tt = res.t[k0 + 100] - t0
    assert res.nu[k0 + 100, 2] == pytest.approx(-payload.mass * opspace.GRAVITY * tt**2
                                                 / (2 * T * m), rel=2e-2)


def test_pick_speed_is_the_tool_point_speed_and_is_flagged(demo, compiled):
    # the speed of the payload's point of the tool relative to the resting payload
    # (Pinocchio's own frame velocity, v + ω × R c) above the limit -> "fast_pick"
    q0 = demo.configuration(arm="carry")
    nu0 = np.array([0.0, 0.0, 0.05, 0.3, -0.2, 0.4, 0.1, 0.2, 0.5])
    payload = demo.description.payload
    locked = np.zeros(demo.nv, bool)
    locked[:2] = True
    res = simulate(demo, None, duration=0.002, q0=q0, nu0=nu0, dt=1e-3, friction=False,
                   locked=locked, stability=False, compiled=compiled,
                   events=[PayloadEvent(0.001, "pick", payload, speed_limit=0.05)])
    data = demo.model.createData()
    pin.forwardKinematics(demo.model, data, res.q[1], demo.S.dot(res.nu[0] + 1e-3 * res.nu_dot[0]))
    pin.updateFramePlacements(demo.model, data)
    fid = demo.tool_frame_id
    vel = pin.getFrameVelocity(demo.model, data, fid, pin.LOCAL_WORLD_ALIGNED)
    expected = vel.linear + np.cross(vel.angular, data.oMf[fid].rotation.dot(payload.com))
    _, speed, limit = res.extra["plant"]["pick"]
    assert limit == 0.05
    assert speed == pytest.approx(np.linalg.norm(expected), rel=1e-2)
    assert res.status == "fast_pick" and "t = 0.001 s" in res.message


def test_a_stop_against_mujoco_joint_limit(demo, compiled):
    # Base held, no friction: the arm falls from a pose; the lift lands on its lower
    # stop, then the shoulder on its upper one (1.4 rad).  MuJoCo (a general-purpose
    # simulator) with the URDF's limits as a stiff, heavily damped joint-limit
    # constraint (solref = (−1e5, −3e3): stiffness, damping) is the reference; its
    # stop penetrates by m g / k and rebounds slightly, ours is an inelastic
    # impulse, so the bound is 5 mrad (measured 2 mrad), not round-off.
    arm0 = np.array([0.3, 0.0, 0.9, 0.8, 0.0, 0.0, 0.0])
    ref = mujoco_fall(demo, arm0, stops=(-1e5, -3e3))
    locked = np.zeros(demo.nv, bool)
    locked[:2] = True
    res = simulate(demo, None, duration=1.0, q0=demo.configuration(arm=arm0), dt=5e-4,
                   friction=False, locked=locked, stability=False, compiled=compiled)
    ours = np.array([demo.arm_positions(q) for q in res.q[::200]])
    np.testing.assert_allclose(ours, ref, atol=5e-3, rtol=0)
    hits = {name: (t, side) for name, t, side in res.extra["plant"]["stops_hit"]}
    assert hits["shoulder_lift"][1] == "upper" and 0.3 < hits["shoulder_lift"][0] < 0.5
    assert "joint_limit" in [f["kind"] for f in res.extra["findings"]]
    assert np.all(res.q[:, 8] <= 1.4 + 1e-3)            # never past the stop by a step
