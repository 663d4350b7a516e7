"""Ground wrench, ZMP and load transfer of the whole robot against statics and
vehicle-dynamics closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest

import opspace
from opspace.stability import ground_wrench, stability_track
from conftest import base_doc, make_robot, two_link_urdf

G = opspace.GRAVITY


def test_static_robot_zmp_is_com_projection(demo, rng):
    # Statics: at rest the ground reaction is the weight, through the COM.
    for _ in range(3):
        arm = rng.uniform(np.maximum(demo.lower, -2), np.minimum(demo.upper, 2))
        q = demo.configuration(base_pose=rng.uniform(-3, 3, 3), arm=arm)
        zero = np.zeros(demo.nv)
        w = ground_wrench(demo, q, zero, zero)
        np.testing.assert_allclose(w.force[0], [0, 0, demo.total_mass() * G], rtol=1e-12, atol=1e-9)
        track = stability_track(demo, q[None], zero[None], zero[None], np.zeros((1, 2)))
        np.testing.assert_allclose(track.zmp[0], w.com[0, :2], atol=1e-12)
        assert track.margin[0] > 0


def two_line_robot(tmp_path):
    """Drive axle at x = 0, caster line at x = −0.35 (two casters): two contact
    lines as on a two-axle vehicle."""
    doc = base_doc(caster=[{"position": [-0.35, 0.2]}, {"position": [-0.35, -0.2]}],
                   base__com=[-0.12, 0.0, 0.22])
    return make_robot(tmp_path, two_link_urdf(), doc)


@pytest.mark.parametrize("a", [-1.5, -0.5, 0.0, 0.8, 2.0])
def test_longitudinal_load_transfer_gillespie(tmp_path, a):
    # Constant acceleration a on flat ground, arm held: axle loads
    # N_front = m (g l_r − a h) / L, N_rear = m (g l_f + a h) / L
    # (Gillespie, Fundamentals of Vehicle Dynamics, 1992, ch. 2), with l_f, l_r the
    # COM's distances to the front (drive) and rear (caster) lines, h its height.
    # Gillespie's rigid-vehicle form leaves out the spin angular momentum of the
    # wheels and motor rotors; the moment balance about the COM adds its rate
    # 2 (J_s + J_m G) a / r (pitch, carried by a load shift ∓ 2 (J_s + J_m G) a / (r L)
    # between the lines; derived here; rotors turning with their wheels).
    robot = two_line_robot(tmp_path)
    q = robot.configuration(arm=[0.3, -0.4])
    wr, wl = robot.wheel_rates(1.0, 0.0)
    ar, al = robot.wheel_rates(a, 0.0)
    nu = np.r_[wr, wl, 0.0, 0.0]
    nu_dot = np.r_[ar, al, 0.0, 0.0]
    track = stability_track(robot, q[None], nu[None], nu_dot[None], np.zeros((1, 2)))
    m = robot.total_mass()
    xc, _, h = track.wrench.com[0]
    L, l_f, l_r = 0.35, 0.0 - xc, xc + 0.35
    N = track.loads.N[0]
    front, rear = N[0] + N[1], N[2] + N[3]
    # J_s = 0.006 kg m², J_m = 2e-5 kg m², G = 20, r = 0.1 m (base_doc)
    spin = 2 * (0.006 + 2e-5 * 20) * (a / 0.1) / L
    assert front == pytest.approx(m * (G * l_r - a * h) / L - spin, rel=1e-9)
    assert rear == pytest.approx(m * (G * l_f + a * h) / L + spin, rel=1e-9)
    # and the longitudinal ground force is m a (Newton)
    assert track.wrench.force[0, 0] == pytest.approx(m * a, rel=1e-9, abs=1e-9)


def test_ramp_tip_angle(tmp_path):
    # Statics on a ramp (common practice): the robot tips backwards when
    # tan(slope) = d / h, d the distance of the COM projection to the rear edge
    # measured along the ground, h the COM height above it.
    robot = two_line_robot(tmp_path)
    q = robot.configuration(arm=[0.3, -0.4])
    zero = np.zeros(robot.nv)
    com = ground_wrench(robot, q, zero, zero).com[0]
    d, h = com[0] + 0.35, com[2]
    alpha = math.atan(d / h)
    for slope, inside in ((0.98 * alpha, True), (1.02 * alpha, False)):
        robot.set_ground_slope(slope)
        try:
            w = ground_wrench(robot, q, zero, zero)
            zmp_x = -w.moment[0, 1] / w.force[0, 2]
            assert (zmp_x > -0.35) == inside
        finally:
            robot.set_ground_slope(0.0)
    robot.set_ground_slope(alpha)
    w = ground_wrench(robot, q, zero, zero)
    robot.set_ground_slope(0.0)
    assert -w.moment[0, 1] / w.force[0, 2] == pytest.approx(-0.35, abs=1e-12)


def test_turning_lateral_force_is_centripetal(demo):
    # Steady turn (Newton): the ground's lateral force is m v ω toward the centre
    # for a COM on the axle line; here checked in general as m times the COM's
    # acceleration, computed independently from the COM path by finite differences.
    import pinocchio as pin
    q0 = demo.configuration(arm="carry")
    wr, wl = demo.wheel_rates(0.8, 0.6)
    nu = np.r_[wr, wl, np.zeros(demo.n_arm)]
    zero = np.zeros(demo.nv)
    dt = 1e-4
    com = [demo.com(pin.integrate(demo.model, q0, demo.S @ nu * k * dt)) for k in (-1, 0, 1)]
    acc = (com[2] - 2 * com[1] + com[0]) / dt**2
    w = ground_wrench(demo, q0, nu, zero)
    th = demo.base_pose(q0)[2]
    R_T = np.array([[math.cos(th), math.sin(th)], [-math.sin(th), math.cos(th)]])
    np.testing.assert_allclose(w.force[0, :2], demo.total_mass() * R_T @ acc[:2], rtol=1e-5, atol=1e-5)


def test_rotor_spin_momentum_equals_a_wheel_of_the_same_momentum(tmp_path, rng):
    # A rotor of inertia J_m turning at G φ̇ about an axis parallel to the axle
    # carries the angular momentum of a wheel with J_m G more spin inertia; the
    # ground wrench of robot A (wheel J_s, rotor J_m) must equal that of robot B
    # (wheel J_s + J_m G, no rotor), where Pinocchio computes the wheel's momentum
    # as a rigid body (accelerating and turning: pitch and gyroscopic roll).
    J_s, J_m, G = 0.005, 2e-5, 30.0   # J_s + J_m G <= 2 x diameter_inertia (0.0035)
    a = make_robot(tmp_path, two_link_urdf(), base_doc(
        wheel__spin_inertia=J_s, drive__rotor_inertia=J_m, drive__gear_ratio=G))
    (tmp_path / "b").mkdir()
    b = make_robot(tmp_path / "b", two_link_urdf(), base_doc(
        wheel__spin_inertia=J_s + J_m * G, drive__rotor_inertia=0.0, drive__gear_ratio=G))
    q = a.configuration(arm=[0.3, -0.4])
    nu, nu_dot = rng.normal(size=(2, 3, a.nv)) * 3
    qs = np.tile(q, (3, 1))
    wa, wb = ground_wrench(a, qs, nu, nu_dot), ground_wrench(b, qs, nu, nu_dot)
    np.testing.assert_allclose(wa.moment, wb.moment, rtol=1e-12, atol=1e-10)
    np.testing.assert_allclose(wa.force, wb.force, rtol=1e-12, atol=1e-10)
