"""Mimic joints (a two-finger gripper) and placeholder links.

Outside reference: a mimic relation q_f = k q_l + o is a holonomic constraint
q = γ(y) with q̇ = G ẏ and constant G; the constrained equation of motion is
Gᵀ H G ÿ + Gᵀ C(q, G ẏ) = Gᵀ τ (Featherstone, Rigid Body Dynamics Algorithms,
2008, ch. 8, §8.2 "implicit constraints"; equation quoted from memory).  The
tests build G (here Sₘ) by hand from the unconstrained model.
"""

from __future__ import annotations

import numpy as np
import pytest

import opspace
from conftest import base_doc, make_robot, urdf, urdf_joint, urdf_link

K, O = -1.5, 0.01      # follower: q_f = K q_l + O (m)


def gripper_urdf(mimic=True, placeholder=True, multiplier=K, offset=O):
    """A shoulder, an elbow, a palm and two prismatic fingers; finger_b follows
    finger_a (axis +y each, so K < 0 closes them together), plus a massless
    camera frame."""
    follow = (f'<mimic joint="finger_a" multiplier="{multiplier}" offset="{offset}"/>'
              if mimic else "")
    finger_b = urdf_joint("finger_b", "prismatic", "palm", "fb", xyz=(0.05, -0.02, 0),
                          axis=(0, 1, 0), lower=-0.1, upper=0.1, damping=0.3, friction=0.2)
    elements = [
        urdf_link("root"),
        urdf_joint("shoulder", "revolute", "root", "link1", axis=(0, -1, 0)),
        urdf_link("link1", 2.0, (0.2, 0, 0), (0.01, 0.03, 0.03, 0, 0, 0)),
        urdf_joint("elbow", "revolute", "link1", "palm", xyz=(0.4, 0, 0), axis=(0, -1, 0)),
        urdf_link("palm", 0.8, (0.03, 0.0, 0.01), (0.002, 0.003, 0.004, 0, 0, 0)),
        urdf_joint("finger_a", "prismatic", "palm", "fa", xyz=(0.05, 0.02, 0), axis=(0, 1, 0),
                   lower=-0.1, upper=0.1, damping=0.5, friction=0.1),
        urdf_link("fa", 0.15, (0.02, 0.0, 0.0), (1e-4, 2e-4, 2e-4, 0, 0, 0)),
        finger_b.replace("</joint>", follow + "</joint>"),
        urdf_link("fb", 0.12, (0.02, 0.01, 0.0), (1e-4, 1.5e-4, 2e-4, 0, 0, 0)),
        urdf_joint("tool_joint", "fixed", "palm", "tool", xyz=(0.1, 0, 0)),
        urdf_link("tool"),
    ]
    if placeholder:
        elements += [urdf_joint("camera_joint", "fixed", "palm", "camera", xyz=(0, 0, 0.05)),
                     urdf_link("camera", 0.0)]
    return urdf(*elements)


@pytest.fixture
def pair(tmp_path):
    """(robot with the mimic, the same robot with finger_b free)."""
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    return make_robot(a, gripper_urdf(True)), make_robot(b, gripper_urdf(False))


def S_m(n_free, leader, follower, k):
    """Hand-built G: the free model's coordinates from the independent ones."""
    G = np.delete(np.eye(n_free), follower, axis=1)
    G[follower, leader] = k
    return G


def free_configuration(free, arm_independent):
    qa = np.insert(arm_independent, 3, K * arm_independent[2] + O)   # finger_b after finger_a
    return free.configuration(arm=qa)


def test_coordinates_and_poses(pair, tmp_path):
    robot, free = pair
    assert robot.coordinate_names == ["wheel_right", "wheel_left", "shoulder", "elbow", "finger_a"]
    assert free.nv == robot.nv + 1
    q = robot.configuration(arm=[0.3, -0.4, 0.05])
    fb = robot.model.joints[robot.model.getJointId("finger_b")].idx_q
    assert q[fb] == pytest.approx(K * 0.05 + O, abs=1e-15)
    np.testing.assert_allclose(robot.arm_positions(q), [0.3, -0.4, 0.05], atol=1e-15)
    # the follower's range narrows the leader's: |K q + O| <= 0.1 -> q in [-0.06, 0.0733]
    np.testing.assert_allclose(robot.lower[2:], [(0.1 - O) / K], rtol=1e-12)
    np.testing.assert_allclose(robot.upper[2:], [(-0.1 - O) / K], rtol=1e-12)
    with pytest.raises(ValueError, match=r"one value per independent arm joint "
                                         r"\(shoulder, elbow, finger_a\)"):
        robot.configuration(arm=[0.0, 0.0, 0.0, 0.0])


def test_mass_matrix_is_reduced_by_the_mimic_map(pair, rng):
    """M = Gᵀ H G and c + g = Gᵀ h(q, G ν) (Featherstone 2008, ch. 8)."""
    robot, free = pair
    G = S_m(free.nv, leader=4, follower=5, k=K)
    for _ in range(5):
        arm = rng.uniform(-0.1, 0.1, 3)
        nu = rng.normal(size=robot.nv)
        js = opspace.joint_space(robot, robot.configuration(arm=arm), nu)
        ref = opspace.joint_space(free, free_configuration(free, arm), G @ nu)
        np.testing.assert_allclose(js.M, G.T @ ref.M @ G, rtol=1e-12, atol=1e-14)
        np.testing.assert_allclose(js.c + js.g, G.T @ (ref.c + ref.g), rtol=1e-11, atol=1e-13)


def test_friction_folds_into_the_leader(pair):
    """Viscous: Gᵀ D G adds k² d_f; Coulomb: Gᵀ F sign(G ν) adds |k| F_f (virtual power)."""
    robot, _ = pair
    assert robot.viscous[4] == pytest.approx(0.5 + K**2 * 0.3, rel=1e-12)
    assert robot.coulomb[4] == pytest.approx(0.1 + abs(K) * 0.2, rel=1e-12)


@pytest.mark.parametrize("compiled", [None, False])
def test_fingers_keep_the_relation_in_a_simulation(pair, compiled):
    robot, _ = pair
    q0 = robot.configuration(arm=[0.2, -0.3, 0.02])
    nu0 = np.array([1.0, 0.5, 0.3, -0.2, 0.2])
    run = opspace.simulate(robot, None, duration=0.3, q0=q0, nu0=nu0, dt=1e-3,
                           stability=False, compiled=compiled)
    ia = robot.model.joints[robot.model.getJointId("finger_a")].idx_q
    ib = robot.model.joints[robot.model.getJointId("finger_b")].idx_q
    assert np.ptp(run.q[:, ia]) > 0.01            # the leader did move
    np.testing.assert_allclose(run.q[:, ib], K * run.q[:, ia] + O, atol=1e-12)


def test_worst_case_poses_keep_the_relation(pair):
    robot, _ = pair
    qs = robot.configurations(np.array([[0.1, 0.2, 0.05], [0.0, -1.0, -0.1]]))
    ia = robot.model.joints[robot.model.getJointId("finger_a")].idx_q
    ib = robot.model.joints[robot.model.getJointId("finger_b")].idx_q
    np.testing.assert_allclose(qs[:, ib], K * qs[:, ia] + O, atol=1e-15)


def test_pose_length_names_the_joints(tmp_path):
    doc = base_doc(poses={"open": [0.0, 0.0, 0.0, 0.0]})
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: \[poses\] open must list 3 "
                                                  r"joint values, one per independent arm "
                                                  r"joint \(shoulder, elbow, finger_a"):
        make_robot(tmp_path, gripper_urdf(), doc)
    doc = base_doc(poses={"open": [0.0, 0.5, 0.05]})
    assert make_robot(tmp_path, gripper_urdf(), doc).pose("open")[2] == 0.05


def test_mimic_errors(tmp_path):
    bad = gripper_urdf().replace('mimic joint="finger_a"', 'mimic joint="thumb"')
    with pytest.raises(opspace.ConfigError, match=r"arm\.urdf: joint 'finger_b' <mimic> "
                                                  r"joint=\"thumb\" must name another"):
        make_robot(tmp_path, bad)
    with pytest.raises(opspace.ConfigError, match=r"no position of 'finger_a' keeps both"):
        make_robot(tmp_path, gripper_urdf(offset=0.5))


def test_placeholder_link_is_a_massless_frame(pair):
    robot, free = pair
    masses = 2.0 + 0.8 + 0.15 + 0.12
    assert robot.model.existFrame("camera")
    arm_mass = sum(i.mass for i in robot.description.arm_model.inertias)
    assert arm_mass == pytest.approx(masses, rel=1e-12)


@pytest.mark.parametrize("link, expect", [
    ('<link name="camera"><inertial><mass value="0.3"/></inertial></link>',
     r"link 'camera' <inertial> has <mass value=\"0.3\"> but no <inertia>"),
    ('<link name="camera"><inertial><mass value="0.3"/><inertia ixx="1" iyy="0.1" izz="0.1" '
     'ixy="0" ixz="0" iyz="0"/></inertial></link>',
     r"link 'camera' <inertial> <inertia> violates the triangle inequality"),
    ('<link name="camera"><inertial><mass value="0"/><inertia ixx="1e-4" iyy="1e-4" '
     'izz="1e-4" ixy="0" ixz="0" iyz="0"/></inertial></link>',
     r"link 'camera' <inertial> <mass value> must be > 0 kg \(or 0 with a zero <inertia>"),
])
def test_bad_placeholder_links(tmp_path, link, expect):
    text = gripper_urdf().replace(urdf_link("camera", 0.0), link)
    assert link in text
    with pytest.raises(opspace.ConfigError, match=r"arm\.urdf: " + expect):
        make_robot(tmp_path, text)
