"""Identities between algorithms and physical properties of the reduced model."""

from __future__ import annotations

import numpy as np
import pinocchio as pin
import pytest
from hypothesis import given, settings, strategies as st

import opspace
from conftest import random_state


def test_mass_matrix_symmetric_positive_definite(demo, rng):
    for _ in range(20):
        q, nu = random_state(demo, rng)
        M = opspace.joint_space(demo, q, nu).M
        np.testing.assert_allclose(M, M.T, rtol=0, atol=1e-14 * np.abs(M).max())
        assert np.linalg.eigvalsh(M).min() > 0


def test_invariant_to_base_pose_and_wheel_angles(demo, rng):
    # Symmetry of the planar base: the dynamics cannot depend on where the robot
    # stands, which way it faces, or how far the wheels have turned.
    q, nu = random_state(demo, rng)
    arm = demo.arm_positions(q)
    ref = opspace.joint_space(demo, demo.configuration(arm=arm), nu)
    for _ in range(5):
        q2 = demo.configuration(base_pose=rng.uniform(-5, 5, 3), wheels=rng.uniform(-9, 9, 2), arm=arm)
        js = opspace.joint_space(demo, q2, nu)
        np.testing.assert_allclose(js.M, ref.M, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(js.c, ref.c, rtol=1e-10, atol=1e-10)
        np.testing.assert_allclose(js.g, ref.g, rtol=1e-12, atol=1e-10)


def reduced_coriolis_matrix(robot, q, nu):
    C = pin.computeCoriolisMatrix(robot.model, robot.model.createData(), q, robot.S @ nu)
    return robot.S.T @ C @ robot.S


def test_coriolis_matrix_and_skew_symmetry(demo, rng):
    # Ṁ − 2C is skew-symmetric (passivity of Lagrangian systems; e.g. Spong,
    # Hutchinson & Vidyasagar 2006, ch. 7); Ṁ by a central difference along ν
    # on the manifold (pinocchio.integrate).
    for _ in range(3):
        q, nu = random_state(demo, rng)
        C = reduced_coriolis_matrix(demo, q, nu)
        np.testing.assert_allclose(C @ nu, opspace.joint_space(demo, q, nu).c, rtol=1e-9, atol=1e-9)
        eps = 1e-6
        v = demo.S @ nu
        Mp = opspace.joint_space(demo, pin.integrate(demo.model, q, v * eps), nu).M
        Mm = opspace.joint_space(demo, pin.integrate(demo.model, q, -v * eps), nu).M
        Mdot = (Mp - Mm) / (2 * eps)
        K = Mdot - 2 * C
        np.testing.assert_allclose(K + K.T, np.zeros_like(K), atol=1e-6 * np.abs(Mdot).max())


def test_inverse_forward_round_trip(demo, rng):
    for _ in range(10):
        q, nu = random_state(demo, rng)
        nu_dot = rng.normal(size=demo.nv)
        Q = opspace.inverse_dynamics(demo, q, nu, nu_dot)
        np.testing.assert_allclose(opspace.forward_dynamics(demo, q, nu, Q), nu_dot,
                                   rtol=1e-10, atol=1e-10)


def test_split_of_bias_terms(demo, rng):
    # c + g equals RNEA at zero acceleration; g equals RNEA at rest (identities).
    q, nu = random_state(demo, rng)
    js = opspace.joint_space(demo, q, nu)
    zero = np.zeros(demo.nv)
    np.testing.assert_allclose(js.c + js.g, opspace.inverse_dynamics(demo, q, nu, zero, with_friction=False),
                               rtol=1e-12, atol=1e-10)
    np.testing.assert_allclose(js.g, opspace.inverse_dynamics(demo, q, zero, zero, with_friction=False),
                               rtol=1e-12, atol=1e-10)


def test_energy_balance_of_inverse_dynamics(demo, rng):
    # Work-energy theorem: ∫ Qᵀ ν dt = ΔT + ΔV for the frictionless model, over
    # a short trajectory with ν(t) = ν0 + α t; the configuration is integrated
    # on the manifold with the midpoint velocity (second order in dt).
    q, nu0 = random_state(demo, rng, scale=0.5)
    alpha = rng.normal(size=demo.nv)
    dt, n = 2e-4, 1000
    t = np.arange(n + 1) * dt
    power = np.empty(n + 1)
    qk = q.copy()
    for k, tk in enumerate(t):
        nu = nu0 + alpha * tk
        power[k] = opspace.inverse_dynamics(demo, qk, nu, alpha, with_friction=False) @ nu
        if k < n:
            q_end = qk
            qk = pin.integrate(demo.model, qk, demo.S @ (nu0 + alpha * (tk + dt / 2)) * dt)
    from scipy.integrate import simpson  # independent quadrature
    work = simpson(power, x=t)
    E0 = opspace.kinetic_energy(demo, q, nu0) + opspace.potential_energy(demo, q)
    E1 = opspace.kinetic_energy(demo, qk, nu0 + alpha * t[-1]) + opspace.potential_energy(demo, qk)
    assert work == pytest.approx(E1 - E0, rel=1e-5, abs=1e-6)
    del q_end


def test_batch_equals_loop(demo, rng):
    states = [random_state(demo, rng) for _ in range(50)]
    qs = np.array([s[0] for s in states])
    nus = np.array([s[1] for s in states])
    nu_dots = rng.normal(size=nus.shape)
    Q = opspace.inverse_dynamics_batch(demo, qs, nus, nu_dots)
    loop = np.array([opspace.inverse_dynamics(demo, *x) for x in zip(qs, nus, nu_dots)])
    np.testing.assert_allclose(Q, loop, rtol=1e-10, atol=1e-10)
    with pytest.raises(ValueError, match="nus"):
        opspace.inverse_dynamics_batch(demo, qs, nus[:-1], nu_dots)


def test_payload_attach_detach(demo):
    # A point payload m at the tool adds m to the total mass and its weight to
    # the gravity efforts: Δg = J_toolᵀ (m g ẑ) (virtual work).
    q = demo.configuration(arm="reach_forward")
    g0 = opspace.joint_space(demo, q, np.zeros(demo.nv)).g
    m0 = demo.total_mass()
    demo.attach_payload(mass=2.0)
    try:
        assert demo.total_mass() == pytest.approx(m0 + 2.0, rel=1e-12)
        g1 = opspace.joint_space(demo, q, np.zeros(demo.nv)).g
        J = pin.computeFrameJacobian(demo.model, demo.model.createData(), q, demo.tool_frame_id,
                                     pin.LOCAL_WORLD_ALIGNED)[:3] @ demo.S
        np.testing.assert_allclose(g1 - g0, J.T @ np.array([0, 0, 2.0 * opspace.GRAVITY]),
                                   rtol=1e-9, atol=1e-9)
    finally:
        demo.detach_payload()
    assert demo.total_mass() == pytest.approx(m0, rel=1e-14)


@settings(max_examples=25, deadline=None)
@given(theta=st.floats(-np.pi, np.pi), v=st.floats(-2, 2), w=st.floats(-2, 2))
def test_wheel_rates_are_the_inverse_of_the_base_twist(theta, v, w):
    from conftest import DEMO
    robot = _cached(DEMO)
    wr, wl = robot.wheel_rates(v, w)
    vx, wz = robot.base_twist(np.r_[wr, wl, np.zeros(robot.n_arm)])
    assert vx == pytest.approx(v, abs=1e-12) and wz == pytest.approx(w, abs=1e-12)
    # the base velocity of S ν is (v, 0, ω): no side slip
    vel = robot.S @ np.r_[wr, wl, np.zeros(robot.n_arm)]
    np.testing.assert_allclose(vel[:3], [v, 0.0, w], atol=1e-12)


_robots = {}


def _cached(path):
    if path not in _robots:
        _robots[path] = opspace.load_robot(path)
    return _robots[path]
