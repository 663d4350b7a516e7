"""Task-space (operational-space) terms against closed forms and independent algebra."""

from __future__ import annotations

import json
import math

import numpy as np
import pinocchio as pin
import pytest

import opspace
from conftest import make_robot, random_state, two_link_urdf, urdf, urdf_joint, urdf_link
from opspace.dynamics import (AXIS_NAMES, cartesian_task_space, effective_mass, inertia_ellipsoid,
                              task_space)

LWA = pin.LOCAL_WORLD_ALIGNED
# two_link_urdf defaults (conftest): m1, m2, l1, lc1, lc2, I1, I2 and the tool offset
TWO_LINK = dict(m1=2.0, m2=1.5, l1=0.5, lc1=0.25, lc2=0.2, I1=0.03, I2=0.02)
L2_TOOL = 0.4
POINT_MASS = 2.5   # kg


@pytest.fixture(scope="module")
def two_link(tmp_path_factory):
    return make_robot(tmp_path_factory.mktemp("two_link"), two_link_urdf(**TWO_LINK))


@pytest.fixture(scope="module")
def point_mass(tmp_path_factory):
    """Pan (z), shoulder and elbow (y) with massless links (no <inertial>) and a
    point mass at the tool: its rotational inertia 1e-12 kg·m² is the smallest
    the description accepts (positive definite)."""
    text = urdf(
        urdf_link("root"),
        urdf_joint("pan", "revolute", "root", "l1", xyz=(0, 0, 0.1), axis=(0, 0, 1)),
        urdf_link("l1"),
        urdf_joint("shoulder", "revolute", "l1", "l2", axis=(0, 1, 0)),
        urdf_link("l2"),
        urdf_joint("elbow", "revolute", "l2", "l3", xyz=(0.4, 0, 0), axis=(0, 1, 0)),
        urdf_link("l3"),
        urdf_joint("tool_joint", "fixed", "l3", "tool", xyz=(0.3, 0, 0)),
        urdf_link("tool", POINT_MASS, (0, 0, 0), (1e-12, 1e-12, 1e-12, 0, 0, 0)),
    )
    return make_robot(tmp_path_factory.mktemp("point_mass"), text)


# ------------------------------------------------------------ independent references
def reference_J(robot, q, frame_id):
    """Reduced Jacobian by Pinocchio's own computeFrameJacobian (a separate path)."""
    data = robot.model.createData()
    return pin.computeFrameJacobian(robot.model, data, q, frame_id, LWA).dot(robot.S)


def split(robot, q, nu, base):
    """J (6, n), M, c, g for the chosen base mode, from independent calls."""
    js = opspace.joint_space(robot, q, nu)
    J = reference_J(robot, q, robot.tool_frame_id)
    if base == "locked":
        return J[:, 2:], js.M[2:, 2:], js.c[2:], js.g[2:], J[:, :2], js.M[2:, :2]
    return J, js.M, js.c, js.g, None, None


def fd_Jdot_nu(robot, q, nu, eps=1e-6):
    """J̇ν by central differences along q(t) = q ⊕ t S ν (pinocchio.integrate)."""
    v = robot.S.dot(nu)
    qp = pin.integrate(robot.model, q, eps * v)
    qm = pin.integrate(robot.model, q, -eps * v)
    fid = robot.tool_frame_id
    return (reference_J(robot, qp, fid) - reference_J(robot, qm, fid)).dot(nu) / (2 * eps)


def spong_planar_M(q2, m1, m2, l1, lc1, lc2, I1, I2):
    """Mass matrix of the planar elbow arm: Spong, Hutchinson & Vidyasagar, Robot
    Modeling and Control (2006), eq. 7.87 (recalled from memory)."""
    c2 = math.cos(q2)
    d11 = m1 * lc1**2 + m2 * (l1**2 + lc2**2 + 2 * l1 * lc2 * c2) + I1 + I2
    d12 = m2 * (lc2**2 + l1 * lc2 * c2) + I2
    return np.array([[d11, d12], [d12, m2 * lc2**2 + I2]])


def planar_J(q1, q2, l1, l2):
    """Tool-point Jacobian (rows x, z) of the planar two-link arm, angles from the
    horizontal: x = l1 c1 + l2 c12, z = l1 s1 + l2 s12 (forward kinematics of a
    planar 2R chain, e.g. Spong et al. 2006, sec. 3.x; common practice)."""
    s1, c1, s12, c12 = math.sin(q1), math.cos(q1), math.sin(q1 + q2), math.cos(q1 + q2)
    return np.array([[-l1 * s1 - l2 * s12, -l2 * s12], [l1 * c1 + l2 * c12, l2 * c12]])


# --------------------------------------------------------------------- Λ, J̄, N
@pytest.mark.parametrize("base", ["whole_body", "locked"])
@pytest.mark.parametrize("axes", ["full", "linear", ("x", "z", "rz")])
def test_lambda_is_inverse_of_mobility(demo, rng, base, axes):
    for _ in range(3):
        q, nu = random_state(demo, rng)
        ts = task_space(demo, q, nu, axes=axes, base=base)
        J, M, c, g, _, _ = split(demo, q, nu, base)
        rows = [AXIS_NAMES.index(a) for a in ts.axes]
        J = J[rows]
        np.testing.assert_allclose(ts.J, J, rtol=0, atol=1e-12)
        # Khatib 1987, IEEE J. Robotics and Automation 3(1): Λ = (J M⁻¹ Jᵀ)⁻¹
        Lambda = np.linalg.inv(J.dot(np.linalg.solve(M, J.T)))
        assert not ts.damped
        np.testing.assert_allclose(ts.Lambda, Lambda, rtol=1e-9, atol=1e-9 * np.abs(Lambda).max())
        np.testing.assert_allclose(ts.Lambda.dot(ts.Lambda_inv), np.eye(len(rows)), atol=1e-9)


@pytest.mark.parametrize("base", ["whole_body", "locked"])
def test_generalized_inverse_and_projector(demo, rng, base):
    q, nu = random_state(demo, rng)
    ts = task_space(demo, q, nu, base=base)
    k, n = ts.J.shape
    # Khatib 1987: J J̄ = I, N = I − J̄ J is a projector (N² = N) onto the motions
    # that leave the task still (J N = 0)
    np.testing.assert_allclose(ts.J.dot(ts.Jbar), np.eye(k), atol=1e-10)
    np.testing.assert_allclose(ts.N.dot(ts.N), ts.N, atol=1e-10)
    np.testing.assert_allclose(ts.J.dot(ts.N), np.zeros((k, n)), atol=1e-10)


def test_null_space_efforts_cause_no_task_acceleration(demo, rng):
    """Dynamic consistency (Khatib 1987): ẍ is unchanged by adding Nᵀ Q₀."""
    q, nu = random_state(demo, rng)
    ts = task_space(demo, q, nu)
    Q = rng.normal(size=demo.nv) * 5.0
    Q0 = rng.normal(size=demo.nv) * 20.0
    a1 = opspace.forward_dynamics(demo, q, nu, Q)
    a2 = opspace.forward_dynamics(demo, q, nu, Q + ts.N.T.dot(Q0))
    assert np.abs(a2 - a1).max() > 1e-3          # the posture effort does move the robot
    np.testing.assert_allclose(ts.J.dot(a2 - a1), np.zeros(6), atol=1e-9)


def test_null_space_locked_arm(demo, rng):
    """Locked base: J_a M_aa⁻¹ N_aᵀ Q₀ = 0 for the arm rows (Khatib 1987)."""
    q, nu = random_state(demo, rng)
    ts = task_space(demo, q, nu, base="locked")
    M_aa = opspace.joint_space(demo, q, nu).M[2:, 2:]
    Q0 = rng.normal(size=demo.n_arm) * 20.0
    np.testing.assert_allclose(ts.J.dot(np.linalg.solve(M_aa, ts.N.T.dot(Q0))), np.zeros(6),
                               atol=1e-9)


# ------------------------------------------------------------------ μ, p and J̇ν
@pytest.mark.parametrize("base", ["whole_body", "locked"])
def test_mu_and_p_against_finite_differences(demo, rng, base):
    for _ in range(2):
        q, nu = random_state(demo, rng)
        ts = task_space(demo, q, nu, base=base)
        Jdot_nu = fd_Jdot_nu(demo, q, nu)
        # central differences on the manifold: error O(ε²) + rounding/ε ≈ 1e-9 here
        np.testing.assert_allclose(ts.Jdot_nu, Jdot_nu, rtol=0, atol=1e-7)
        J, M, c, g, J_base, M_aw = split(demo, q, nu, base)
        Lambda = np.linalg.inv(J.dot(np.linalg.solve(M, J.T)))
        # Khatib 1987: μ = Λ (J M⁻¹ c − J̇ν), p = Λ J M⁻¹ g
        mu = Lambda.dot(J.dot(np.linalg.solve(M, c)) - Jdot_nu)
        p = Lambda.dot(J.dot(np.linalg.solve(M, g)))
        np.testing.assert_allclose(ts.mu, mu, rtol=1e-6, atol=1e-6)
        np.testing.assert_allclose(ts.p, p, rtol=1e-9, atol=1e-9)
        if base == "locked":
            # coupling Γ = Λ (J M_aa⁻¹ M_aw − J_base) (module docstring derivation)
            np.testing.assert_allclose(
                ts.coupling, Lambda.dot(J.dot(np.linalg.solve(M, M_aw)) - J_base), atol=1e-9)


def test_mu_plus_p_is_the_bias_of_rnea(demo, rng):
    """μ + p = Λ (J M⁻¹ (c + g) − J̇ν) with c + g = Sᵀ rnea(q, Sν, 0) straight from
    Pinocchio (an identity between algorithms)."""
    q, nu = random_state(demo, rng)
    ts = task_space(demo, q, nu)
    data = demo.model.createData()
    h = demo.S.T.dot(pin.rnea(demo.model, data, q, demo.S.dot(nu), np.zeros(demo.model.nv)))
    M = opspace.joint_space(demo, q, nu).M
    np.testing.assert_allclose(ts.mu + ts.p,
                               ts.Lambda.dot(ts.J.dot(np.linalg.solve(M, h)) - ts.Jdot_nu),
                               rtol=1e-9, atol=1e-8)


# ------------------------------------------------------------------ Cartesian form
def test_cartesian_form_two_link_closed_form(two_link, rng):
    for q1, q2 in [(0.3, 0.9), (-0.4, 1.7), (0.8, -1.2)]:
        q = two_link.configuration(arm=[q1, q2])
        nu = np.concatenate(([0.0, 0.0], rng.normal(size=2)))
        ts = task_space(two_link, q, nu, axes=("x", "z"), base="locked")
        cf = cartesian_task_space(two_link, q, nu, axes=("x", "z"), base="locked")
        J = planar_J(q1, q2, TWO_LINK["l1"], L2_TOOL)
        D = spong_planar_M(q2, **TWO_LINK)
        np.testing.assert_allclose(ts.J, J, atol=1e-12)
        Jinv = np.linalg.inv(J)
        # Khatib 1987: for a square regular J, Λ = J⁻ᵀ M J⁻¹ (M from Spong eq. 7.87)
        np.testing.assert_allclose(cf.Lambda, Jinv.T.dot(D).dot(Jinv), rtol=1e-10)
        np.testing.assert_allclose(ts.Lambda, Jinv.T.dot(D).dot(Jinv), rtol=1e-9)
        np.testing.assert_allclose(cf.mu, ts.mu, rtol=1e-8, atol=1e-10)
        np.testing.assert_allclose(cf.p, ts.p, rtol=1e-10)
        np.testing.assert_allclose(cf.Jbar, ts.Jbar, rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(cf.coupling, ts.coupling, rtol=1e-8, atol=1e-10)
        # the exact map back: F = J⁻ᵀ Q for Q = Jᵀ F
        F = rng.normal(size=2)
        np.testing.assert_allclose(np.linalg.solve(cf.J.T, cf.J.T.dot(F)), F, rtol=1e-12)


def test_cartesian_form_rejects_non_square_and_singular(demo, two_link):
    q = demo.configuration(arm="carry")
    with pytest.raises(ValueError, match="square"):
        cartesian_task_space(demo, q, np.zeros(demo.nv))
    straight = two_link.configuration(arm=[0.2, 0.0])
    with pytest.raises(opspace.ModelError, match="singular"):
        cartesian_task_space(two_link, straight, np.zeros(4), axes=("x", "z"), base="locked")


# ------------------------------------------------------------------ effective mass
def test_point_mass_effective_mass_is_the_mass(point_mass, rng):
    """A point mass on massless links: Λ = m I along every direction (Khatib 1995,
    IJRR 14(1): the effective mass of a single particle is its mass)."""
    q = point_mass.configuration(arm=[0.3, -0.4, 0.9])
    ts = task_space(point_mass, q, np.zeros(point_mass.nv), axes="linear", base="locked")
    # the 1e-12 kg·m² rotational inertia changes Λ by ~1e-12 / (m l²) relative
    np.testing.assert_allclose(ts.Lambda, POINT_MASS * np.eye(3), rtol=0, atol=1e-9)
    for _ in range(5):
        u = rng.normal(size=3)
        assert effective_mass(point_mass, q, u, base="locked") == pytest.approx(POINT_MASS,
                                                                                rel=1e-10)
    ell = inertia_ellipsoid(point_mass, q, base="locked")
    np.testing.assert_allclose(ell.masses, [POINT_MASS] * 3, rtol=1e-10)


def test_two_link_effective_mass_closed_form(two_link):
    """m_u = 1/(uᵀ J M⁻¹ Jᵀ u) with M from Spong et al. eq. 7.87 and the planar J
    (Khatib 1995, IJRR 14(1), effective mass along u)."""
    for q1, q2 in [(0.3, 0.9), (1.0, 2.0), (-0.5, -0.7)]:
        q = two_link.configuration(arm=[q1, q2])
        J = planar_J(q1, q2, TWO_LINK["l1"], L2_TOOL)
        Minv = np.linalg.inv(spong_planar_M(q2, **TWO_LINK))
        for angle in np.linspace(0.0, math.pi, 5):
            u2 = np.array([math.cos(angle), math.sin(angle)])       # in the x-z plane
            m_ref = 1.0 / u2.dot(J).dot(Minv).dot(J.T).dot(u2)
            u = np.array([u2[0], 0.0, u2[1]])
            assert effective_mass(two_link, q, u, base="locked") == pytest.approx(m_ref, rel=1e-10)
        # out of the plane the planar arm cannot move: infinite effective mass
        assert effective_mass(two_link, q, [0.0, 1.0, 0.0], base="locked") == math.inf
        ell = inertia_ellipsoid(two_link, q, base="locked")
        assert ell.masses[-1] == math.inf
        np.testing.assert_allclose(np.abs(ell.directions[:, -1]), [0, 1, 0], atol=1e-12)


def test_ellipsoid_principal_masses_and_whole_body_is_lighter(demo, rng):
    for _ in range(3):
        q, _ = random_state(demo, rng)
        for base in ("whole_body", "locked"):
            ell = inertia_ellipsoid(demo, q, base=base)
            np.testing.assert_allclose(ell.center, demo.frame_placement(q, "tool").translation,
                                       atol=1e-14)
            np.testing.assert_allclose(ell.directions.T.dot(ell.directions), np.eye(3), atol=1e-12)
            assert np.all(np.diff(ell.masses) >= 0)
            for i in range(3):
                d = ell.directions[:, i]
                assert effective_mass(demo, q, d, base=base) == pytest.approx(ell.masses[i],
                                                                              rel=1e-9)
                assert ell.mass_along(d) == pytest.approx(ell.masses[i], rel=1e-9)
        # Kelvin's minimum-energy theorem (Whittaker, Analytical Dynamics, 1904, §§ on
        # impulsive motion; recalled from memory): freeing the wheels can only lower the
        # kinetic energy needed for a given tool velocity, so m_whole ≤ m_locked
        for _ in range(4):
            u = rng.normal(size=3)
            assert (effective_mass(demo, q, u) <=
                    effective_mass(demo, q, u, base="locked") * (1 + 1e-12))


# ------------------------------------------------------------------ singularities
def test_damping_at_and_near_a_singular_pose(two_link):
    straight = two_link.configuration(arm=[0.2, 0.0])            # stretched: J singular
    ts = task_space(two_link, straight, np.zeros(4), axes=("x", "z"), base="locked")
    assert ts.damped and np.all(np.isfinite(ts.Lambda))
    # the damped Λ caps the principal task mass at exactly 1/ε² (module docstring)
    eps = opspace.dynamics.DEFAULT_DAMPING
    assert np.linalg.eigvalsh(ts.Lambda).max() == pytest.approx(1 / eps**2, rel=1e-9)
    assert ts.sigma_min < 1e-6 and ts.condition == math.inf and ts.manipulability < 1e-8
    with pytest.raises(opspace.ModelError, match="singular"):
        task_space(two_link, straight, np.zeros(4), axes=("x", "z"), base="locked",
                   damping=None)
    near = two_link.configuration(arm=[0.2, 1e-4])
    ts = task_space(two_link, near, np.zeros(4), axes=("x", "z"), base="locked")
    assert ts.damped and np.linalg.eigvalsh(ts.Lambda).max() <= 1 / eps**2 * (1 + 1e-9)


def test_damping_leaves_a_regular_pose_unchanged_and_is_continuous(demo, rng):
    q, nu = random_state(demo, rng)
    plain = task_space(demo, q, nu, damping=None)
    damped = task_space(demo, q, nu)
    assert not damped.damped
    np.testing.assert_array_equal(damped.Lambda, plain.Lambda)
    np.testing.assert_array_equal(damped.mu, plain.mu)
    # a threshold just above σ_min switches the damping on with λ² ≈ 0: no jump
    eps = plain.sigma_min * (1 + 1e-9)
    just = task_space(demo, q, nu, damping=eps)
    assert just.damped
    np.testing.assert_allclose(just.Lambda, plain.Lambda, rtol=1e-6,
                               atol=1e-6 * np.abs(plain.Lambda).max())


# ------------------------------------------------------------------ results, bad input
def test_result_fields_and_to_dict(demo, rng):
    q, nu = random_state(demo, rng)
    ts = task_space(demo, q, nu, axes="linear", base="locked")
    assert ts.J.shape == (3, demo.n_arm) and ts.Jbar.shape == (demo.n_arm, 3)
    assert ts.J_base.shape == (3, 2) and ts.coupling.shape == (3, 2)
    assert ts.frame == demo.tool_frame and ts.axes == ("x", "y", "z") and ts.base == "locked"
    # Yoshikawa 1985 (IJRR 4(2)): manipulability = product of the singular values of J
    assert ts.manipulability == pytest.approx(np.prod(np.linalg.svd(ts.J, compute_uv=False)),
                                              rel=1e-9)
    d = json.loads(json.dumps(ts.to_dict()))
    assert d["damped"] is False and len(d["Lambda"]) == 3
    json.dumps(inertia_ellipsoid(demo, q).to_dict())


def test_bad_input(demo):
    q, nu = demo.configuration(arm="carry"), np.zeros(demo.nv)
    with pytest.raises(opspace.ConfigError, match="unknown frame 'gripper'"):
        task_space(demo, q, nu, frame="gripper")
    with pytest.raises(ValueError, match="`axes`"):
        task_space(demo, q, nu, axes="xyz")
    with pytest.raises(ValueError, match="each once"):
        task_space(demo, q, nu, axes=("x", "x"))
    with pytest.raises(ValueError, match="`base`"):
        task_space(demo, q, nu, base="free")
    with pytest.raises(ValueError, match="`damping`"):
        task_space(demo, q, nu, damping=-0.1)
    with pytest.raises(ValueError, match=r"`q` must have shape \(13,\)"):
        task_space(demo, q[:-1], nu)
    with pytest.raises(ValueError, match="non-finite"):
        task_space(demo, q, np.full(demo.nv, np.nan))
    with pytest.raises(ValueError, match="non-zero"):
        effective_mass(demo, q, [0.0, 0.0, 0.0])
    with pytest.raises(ValueError, match=r"\(3,\) or \(6,\)"):
        effective_mass(demo, q, [1.0, 0.0])
