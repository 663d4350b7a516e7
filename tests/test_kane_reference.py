"""Joint-space dynamics of opspace against an independent Kane derivation.

Reference: Kane & Levinson, *Dynamics: Theory and Applications* (McGraw-Hill,
1985), ch. 6 — Kane's dynamical equations for nonholonomic systems with
independent generalized speeds ν = [φ̇_r, φ̇_l, q̇1, q̇2, q̇3] and the rolling
constraints as velocity constraints — carried out symbolically by
``sympy.physics.mechanics.KanesMethod`` in ``tests/reference/kane_diffdrive.py``
(no Pinocchio, no opspace there). Convention on both sides:
M ν̇ + c + g = Q, g on the left side.
"""

import numpy as np
import pytest

pytest.importorskip("sympy")

import opspace  # noqa: E402

try:  # tests/ as a package (rootdir on sys.path) or as a plain directory
    from tests.reference import kane_diffdrive as kane
except ModuleNotFoundError:
    from reference import kane_diffdrive as kane

SEEDS = (20251, 40372)
N_STATES = 5
RTOL = 1e-9
ATOL = 1e-9  # multiplied by the size of the reference quantity (at least 1)


def _close(actual, desired, name):
    desired = np.asarray(desired)
    scale = max(1.0, float(np.abs(desired).max()))
    np.testing.assert_allclose(
        np.asarray(actual), desired, rtol=RTOL, atol=ATOL * scale,
        err_msg=f"{name} differs from the Kane reference",
    )


def _state(seed, k):
    """A random state: base pose, wheel angles, arm joints, reduced speed ν."""
    rng = np.random.default_rng([seed, k])
    base_pose = (rng.uniform(-2.0, 2.0), rng.uniform(-2.0, 2.0), rng.uniform(-np.pi, np.pi))
    wheels = tuple(rng.uniform(-10.0, 10.0, size=2))
    q_arm = np.array([rng.uniform(-np.pi, np.pi), rng.uniform(-0.3, 0.3),
                      rng.uniform(-np.pi, np.pi)])
    nu = rng.normal(scale=2.0, size=5)
    return base_pose, wheels, q_arm, nu


@pytest.fixture(scope="module", params=SEEDS, ids=lambda s: f"params{s}")
def case(request, tmp_path_factory):
    params = kane.random_params(request.param)
    path = kane.write_description(params, tmp_path_factory.mktemp(f"kane{request.param}"))
    return request.param, params, opspace.load_robot(path)


def test_random_params_put_chassis_com_off_axle_and_off_centre_line(case):
    # The chassis COM offset enters through m·cx·ω² and m·cx·ω·vx in c and
    # through the vx-ω coupling −m·cy in M (Kane & Levinson 1985, ch. 6,
    # nonholonomic partial velocities; worked out by hand, and reproduced by
    # kane_diffdrive.py); a COM on the axle (cx = 0) or on the centre line
    # (cy = 0) would leave those terms untested.
    _, params, _ = case
    cx, cy, _ = params["base_com"]
    assert abs(cx) > 1e-3 and abs(cy) > 1e-3, params["base_com"]
    assert abs(params["mount"][1]) > 1e-3, params["mount"]
    # products of inertia present (full tensors, not diagonal ones); the
    # chassis ones do not enter M, c, g (it only yaws), the arm ones do
    for key in ("base_inertia", "link1_inertia", "link2_inertia", "link3_inertia"):
        assert min(abs(v) for v in params[key][3:]) > 1e-9, (key, params[key])


@pytest.mark.parametrize("k", range(N_STATES))
def test_joint_space_matches_kane(case, k):
    seed, params, robot = case
    base_pose, wheels, q_arm, nu = _state(seed, k)
    q = robot.configuration(base_pose=base_pose, wheels=wheels, arm=list(q_arm))
    js = opspace.joint_space(robot, q, nu)
    # Kane & Levinson (1985), ch. 6 nonholonomic Kane equations, via
    # sympy.physics.mechanics.KanesMethod (kane_diffdrive.reference_terms).
    M, c, g = kane.reference_terms(params, base_pose[2], q_arm, nu)
    _close(js.M, M, "M")
    _close(js.c, c, "c")
    _close(js.g, g, "g")


@pytest.mark.parametrize("k", range(2))
def test_inverse_and_forward_dynamics_match_kane(case, k):
    if not (hasattr(opspace, "inverse_dynamics") and hasattr(opspace, "forward_dynamics")):
        pytest.skip("opspace.inverse_dynamics / forward_dynamics not available yet")
    seed, params, robot = case
    base_pose, wheels, q_arm, nu = _state(seed, 100 + k)
    nu_dot = np.random.default_rng([seed, 200 + k]).normal(size=5)
    q = robot.configuration(base_pose=base_pose, wheels=wheels, arm=list(q_arm))
    M, c, g = kane.reference_terms(params, base_pose[2], q_arm, nu)
    # Kane's generalized active forces are F̃r = B Q with Q = [wheel motor
    # torques (reaction on the chassis), arm efforts]; B = 1 is what makes Q
    # "torque at the wheel" (Kane & Levinson 1985, ch. 6, via KanesMethod).
    B = kane.generalized_force_map(params, base_pose[2], q_arm)
    Q = np.linalg.solve(B, M @ nu_dot + c + g)
    _close(opspace.inverse_dynamics(robot, q, nu, nu_dot), Q, "inverse_dynamics")
    _close(opspace.forward_dynamics(robot, q, nu, Q), nu_dot, "forward_dynamics")


def test_reflected_rotor_inertia_matches_kane_rotor_bodies(tmp_path):
    # A rotor of spin inertia J turning at n·φ̇ relative to the chassis about
    # an axis parallel to the axle, modelled as an extra rigid body in Kane's
    # method (Kane & Levinson 1985, ch. 6, via KanesMethod): its kinetic energy
    # is ½ J n² φ̇², so M gains J n² on the wheel diagonal (the project's
    # armature model) and c, g are unchanged.
    params = dict(kane.random_params(SEEDS[0]), rotor_inertia=1.3e-5, gear_ratio=23.0)
    robot = opspace.load_robot(kane.write_description(params, tmp_path))
    for k in range(2):
        base_pose, wheels, q_arm, nu = _state(SEEDS[0], 300 + k)
        q = robot.configuration(base_pose=base_pose, wheels=wheels, arm=list(q_arm))
        js = opspace.joint_space(robot, q, nu)
        M, c, g = kane.reference_terms(params, base_pose[2], q_arm, nu)
        _close(js.M, M, "M with rotor inertia")
        _close(js.c, c, "c with rotor inertia")
        _close(js.g, g, "g with rotor inertia")
