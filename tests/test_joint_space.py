"""Joint-space dynamics against closed forms and textbook results."""

from __future__ import annotations

import numpy as np
import pytest

import opspace
from conftest import base_doc, make_robot, two_link_urdf

G = 9.80665


def hand_mass_properties(doc, q_arm_zero_links):
    """m, (x_c, y_c), I_P of the locked robot by the parallel-axis theorem.

    I_P = Σ_i (I_zz,i + m_i (x_i² + y_i²)) about the vertical through the pivot
    (Meriam & Kraige, Engineering Mechanics: Dynamics, parallel-axis theorem).
    `q_arm_zero_links`: list of (mass, (x, y) in base frame, I_zz about own COM).
    """
    base, wheel = doc["base"], doc["wheel"]
    b = base["half_track"]
    bodies = [(base["mass"], base["com"][:2], base["inertia"][2]),
              (wheel["mass"], (0.0, -b), wheel["diameter_inertia"]),
              (wheel["mass"], (0.0, b), wheel["diameter_inertia"])] + q_arm_zero_links
    m = sum(mi for mi, _, _ in bodies)
    xc = sum(mi * p[0] for mi, p, _ in bodies) / m
    yc = sum(mi * p[1] for mi, p, _ in bodies) / m
    I_P = sum(Izz + mi * (p[0] ** 2 + p[1] ** 2) for mi, p, Izz in bodies)
    return m, xc, yc, I_P


def closed_form_wheel_block(m, yc, I_P, r, b, J_wheel):
    """Locked differential-drive body, derived by Lagrange (see DriveInertia):
    M_w = (m r²/4)[[1 + a − 2y_c/b, 1 − a], [1 − a, 1 + a + 2y_c/b]] + J_wheel I,
    a = I_P/(m b²).  For y_c = 0 this is the form given as a fact of the trade."""
    a = I_P / (m * b * b)
    return (m * r * r / 4) * np.array([[1 + a - 2 * yc / b, 1 - a],
                                       [1 - a, 1 + a + 2 * yc / b]]) + J_wheel * np.eye(2)


@pytest.mark.parametrize("com", [(0.0, 0.0, 0.2), (-0.08, 0.0, 0.2), (0.05, 0.04, 0.3)],
                         ids=["on-axle", "off-axle", "off-axle-and-centre-line"])
def test_wheel_block_closed_form(tmp_path, com):
    doc = base_doc(base__com=list(com))
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    mount = doc["mount"]["xyz"]
    # two-link arm at q = 0 lies along +x; link inertia isotropic (I about z = I)
    links = [(2.0, (mount[0] + 0.25, mount[1]), 0.03), (1.5, (mount[0] + 0.5 + 0.2, mount[1]), 0.02)]
    m, xc, yc, I_P = hand_mass_properties(doc, links)
    r, b = doc["base"]["wheel_radius"], doc["base"]["half_track"]
    J_wheel = doc["wheel"]["spin_inertia"] + doc["drive"]["rotor_inertia"] * doc["drive"]["gear_ratio"] ** 2
    q = robot.configuration(base_pose=(0.3, -0.2, 0.7), arm=[0.0, 0.0])
    js = opspace.joint_space(robot, q, np.zeros(robot.nv))
    np.testing.assert_allclose(js.M[:2, :2], closed_form_wheel_block(m, yc, I_P, r, b, J_wheel),
                               rtol=1e-12, atol=1e-14)
    di = opspace.drive_inertia(robot, q)
    np.testing.assert_allclose([di.mass, di.yaw_inertia, di.com[0], di.com[1]], [m, I_P, xc, yc],
                               rtol=1e-12, atol=1e-14)
    assert di.distribution == pytest.approx(I_P / (m * b * b), rel=1e-12)


def test_radius_of_gyration_equal_half_track_gives_half_mass_per_wheel(tmp_path):
    # Rule of thumb of the trade (no source): when the yaw radius of gyration about
    # the pivot equals the half track (a = 1), the wheels decouple and each one
    # carries half of the robot's mass.
    doc = base_doc(base__com=[0.0, 0.0, 0.2], drive__rotor_inertia=0.0)
    mount = doc["mount"]["xyz"]
    links = [(2.0, (mount[0] + 0.25, 0.0), 0.03), (1.5, (mount[0] + 0.7, 0.0), 0.02)]
    m, _, _, I_P = hand_mass_properties(doc, links)
    b = doc["base"]["half_track"]
    doc["base"]["inertia"][2] += m * b * b - I_P       # make I_P = m b²
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    di = opspace.drive_inertia(robot, robot.configuration())
    r, Js = doc["base"]["wheel_radius"], doc["wheel"]["spin_inertia"]
    assert di.distribution == pytest.approx(1.0, rel=1e-12)
    assert abs(di.M_w[0, 1]) < 1e-12
    np.testing.assert_allclose((np.diag(di.M_w) - Js) / r**2, [m / 2, m / 2], rtol=1e-12)


def test_reflected_rotor_inertia_on_wheel_diagonal(tmp_path):
    # Reflected inertia J_rotor G² (common practice, no source): the wheel block
    # grows by exactly that on the diagonal, nothing off it.
    r0 = make_robot(tmp_path, two_link_urdf(), base_doc(drive__rotor_inertia=0.0), "a.toml")
    r1 = make_robot(tmp_path, two_link_urdf(), base_doc(drive__rotor_inertia=3e-5,
                                                         drive__gear_ratio=30.0), "b.toml")
    q = r0.configuration(arm=[0.4, -0.7])
    dM = opspace.joint_space(r1, q, np.zeros(4)).M - opspace.joint_space(r0, q, np.zeros(4)).M
    expected = np.zeros((4, 4))
    expected[0, 0] = expected[1, 1] = 3e-5 * 30.0**2
    np.testing.assert_allclose(dM, expected, atol=1e-14)


def spong_planar_elbow(q, qd, m1, m2, l1, lc1, lc2, I1, I2, g=G):
    """Planar elbow manipulator, angles from the horizontal, gravity −z:
    Spong, Hutchinson & Vidyasagar, Robot Modeling and Control (2006), ch. 7,
    the planar elbow manipulator (d11, d12, d22, the Christoffel terms with
    h = −m2 l1 lc2 sin q2, and φ1, φ2); recalled from memory."""
    q1, q2 = q
    c2 = np.cos(q2)
    d11 = m1 * lc1**2 + m2 * (l1**2 + lc2**2 + 2 * l1 * lc2 * c2) + I1 + I2
    d12 = m2 * (lc2**2 + l1 * lc2 * c2) + I2
    d22 = m2 * lc2**2 + I2
    h = -m2 * l1 * lc2 * np.sin(q2)
    c = np.array([h * (2 * qd[0] * qd[1] + qd[1] ** 2), -h * qd[0] ** 2])
    phi1 = (m1 * lc1 + m2 * l1) * g * np.cos(q1) + m2 * lc2 * g * np.cos(q1 + q2)
    phi2 = m2 * lc2 * g * np.cos(q1 + q2)
    return np.array([[d11, d12], [d12, d22]]), c, np.array([phi1, phi2])


def test_two_link_arm_against_spong(tmp_path, rng):
    params = dict(m1=2.0, m2=1.5, l1=0.5, lc1=0.25, lc2=0.2, I1=0.03, I2=0.02)
    robot = make_robot(tmp_path, two_link_urdf(**params))
    for _ in range(5):
        qa, qd = rng.uniform(-2.5, 2.5, 2), rng.normal(size=2)
        q = robot.configuration(base_pose=rng.uniform(-1, 1, 3), arm=qa)
        js = opspace.joint_space(robot, q, np.r_[0.0, 0.0, qd])
        M, c, g = spong_planar_elbow(qa, qd, **params)
        np.testing.assert_allclose(js.M[2:, 2:], M, rtol=1e-12)
        np.testing.assert_allclose(js.c[2:], c, rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(js.g[2:], g, rtol=1e-12, atol=1e-12)


def test_straight_rolling_resistance_total(tmp_path):
    # Rolling resistance at constant speed on flat ground: the wheel torques add
    # up to C_rr m g r (common practice, no source), shared by both wheels.
    doc = base_doc(base__rolling_resistance=0.02, base__com=[0.0, 0.0, 0.2])
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    q = robot.configuration(arm=[0.3, 0.2])
    nu = np.r_[5.0, 5.0, 0.0, 0.0]
    Q = opspace.inverse_dynamics(robot, q, nu, np.zeros(4))
    m, r = robot.total_mass(), doc["base"]["wheel_radius"]
    assert Q[0] + Q[1] == pytest.approx(0.02 * m * G * r, rel=1e-12)
    np.testing.assert_allclose(opspace.inverse_dynamics(robot, q, -nu, np.zeros(4))[:2], -Q[:2],
                               rtol=1e-12)


def test_friction_model(tmp_path, rng):
    doc = base_doc(drive__coulomb=0.4, drive__viscous=0.05)
    robot = make_robot(tmp_path, two_link_urdf(damping=0.3, friction=1.2), doc)
    q = robot.configuration(arm=[0.1, 0.2])
    np.testing.assert_array_equal(opspace.friction(robot, q, np.zeros(4)), np.zeros(4))
    nu = np.array([2.0, -1.0, 0.5, -3.0])
    expected = np.array([0.4, 0.4, 1.2, 1.2]) * np.sign(nu) + np.array([0.05, 0.05, 0.3, 0.3]) * nu
    np.testing.assert_allclose(opspace.friction(robot, q, nu), expected, rtol=1e-14)
    rigid = opspace.inverse_dynamics(robot, q, nu, np.ones(4), with_friction=False)
    full = opspace.inverse_dynamics(robot, q, nu, np.ones(4))
    np.testing.assert_allclose(full - rigid, expected, rtol=1e-12)
