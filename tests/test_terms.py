"""The reduced terms through the compiled kernel equal the NumPy path.

`opspace.dynamics._terms` owns M_r, h_r, g_r, J_r, J̇ν, friction (Coulomb with
sign or smoothed, viscous), rolling resistance and the static contact loads;
`opspace/_kernel.cpp` implements the same named terms (`Terms`).  An identity
between two implementations of the same equations, at random states of a
robot invented here (casters, rolling resistance, joint friction), with a
payload attached and on a slope.  The NumPy path itself is held to Kane's
method, Spong's closed forms and MuJoCo by the other test files.
"""

from __future__ import annotations

import numpy as np
import pytest

from opspace import _compiled
from opspace.dynamics import (RollingLoads, bias_forces, compiled_terms, frame_terms,
                              friction_forces, gravity_forces, mass_matrix, rolling_resistance)

from conftest import base_doc, make_robot, random_state, two_link_urdf

needs_kernel = pytest.mark.skipif(not _compiled.available(),
                                  reason="the compiled kernel is not built")


def close(a, b, rtol=1e-12):
    """|a − b| within rtol of the larger magnitude of the two (round-off)."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    assert a.shape == b.shape
    scale = max(np.abs(a).max(initial=0.0), np.abs(b).max(initial=0.0), 1.0)
    np.testing.assert_allclose(a, b, rtol=0, atol=rtol * scale)


@pytest.fixture
def robot(tmp_path):
    doc = base_doc(base__rolling_resistance=0.03, drive__coulomb=0.4, drive__viscous=0.05,
                   caster=[{"position": [0.35, 0.2]}, {"position": [-0.3, -0.15]},
                           {"position": [-0.3, 0.22]}])
    return make_robot(tmp_path, two_link_urdf(damping=0.2, friction=0.7), doc)


@needs_kernel
@pytest.mark.parametrize("payload, slope", [(False, 0.0), (True, 0.15), (True, -0.2)])
def test_each_term_compiled_equals_numpy(robot, rng, payload, slope):
    with robot.kept():
        if payload:
            robot.attach_payload(mass=2.5, com=(0.02, -0.01, 0.03),
                                 inertia=(0.012, 0.015, 0.01, 0.001, 0.0, 0.0))
        robot.set_ground_slope(slope)
        k = compiled_terms(robot)
        model, data, fid = robot.model, robot.model.createData(), robot.tool_frame_id
        for _ in range(8):
            q, nu = random_state(robot, rng)
            close(k.mass(model, data, q), mass_matrix(robot, q))
            close(k.bias(model, data, q, nu), bias_forces(robot, q, nu))
            close(k.gravity(model, data, q), gravity_forces(robot, q))
            _, J6, _, Jdot_nu, _ = frame_terms(robot, robot.data, q, robot.S.dot(nu), fid,
                                               slice(None))
            close(k.jacobian(model, data, q, fid), J6.dot(robot.S))
            close(k.jdot_nu(model, data, q, nu, fid), Jdot_nu)
            for v_s in (0.0, 0.05):            # Coulomb with sign, then smoothed (tanh)
                close(k.friction(model, data, q, nu, v_s), friction_forces(robot, q, nu, v_s))
            close(k.rolling(model, data, q, nu), rolling_resistance(robot, q, nu))
            N = k.contact_loads(model, data, q)
            close(N, RollingLoads(robot, q).N)
            # statics (Newton's first law normal to the ground): with no contact
            # lifted, the loads carry the weight's normal component, Σ N = m g cos α
            assert np.all(N > 0)
            np.testing.assert_allclose(N.sum(), robot.total_mass() * 9.80665 * np.cos(slope),
                                       rtol=1e-12)


@needs_kernel
def test_the_terms_see_the_friction_and_rolling_they_are_given(robot, rng):
    # a check that can fail: with the rolling resistance on, f differs from
    # Coulomb + viscous alone by the wheel torques C_rr N_i r sign(φ̇_i) + casters
    q, nu = random_state(robot, rng)
    k = compiled_terms(robot)
    f = k.friction(robot.model, robot.model.createData(), q, nu, 0.0)
    f_rr = k.rolling(robot.model, robot.model.createData(), q, nu)
    assert np.abs(f_rr[:2]).min() > 0 and np.all(f_rr[2:] == 0)
    close(f - f_rr, robot.coulomb * np.sign(nu) + robot.viscous * nu)


@needs_kernel
def test_the_command_input_is_packed_where_the_kernel_reads_each_field(rng):
    # the kernel describes its input vector (name, offset, size); Python packs by
    # those names, so a field moved in the C++ cannot be read from the wrong place
    from opspace.control import BasePlan, OperationalSpaceController, Target

    R = np.linalg.qr(rng.normal(size=(3, 3)))[0]
    R *= np.sign(np.linalg.det(R))
    target = Target(rng.normal(size=3), R, rng.normal(size=6), rng.normal(size=6))
    plan = BasePlan(*rng.normal(size=4))
    expected = {"position": target.position, "rotation": R.ravel(), "velocity": target.velocity,
                "acceleration": target.acceleration, "plan_v": [plan.v],
                "plan_omega": [plan.omega], "plan_a": [plan.a], "plan_alpha": [plan.alpha]}
    layout = _compiled.target_layout()
    assert set(layout) == set(expected)
    for x in (OperationalSpaceController.pack(target, plan),
              OperationalSpaceController.pack_many(target.position[None], R[None],
                                                   target.velocity[None],
                                                   target.acceleration[None],
                                                   np.array([[plan.v, plan.omega, plan.a,
                                                              plan.alpha]]))[0]):
        assert x.shape == (sum(size for _, size in layout.values()),)
        for name, (offset, size) in layout.items():
            np.testing.assert_array_equal(x[offset:offset + size], expected[name])
