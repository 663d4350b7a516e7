"""A whole-robot URDF as the description: derived base values against hand sums
over the URDF's own inertial elements, and the same dynamics as the arm-URDF
form of the same robot.

Outside references: the composite body (mass sum, COM as the mass-weighted
mean, parallel-axis theorem; Meriam & Kraige, Engineering Mechanics: Dynamics,
appendix B), and Pinocchio's own spatial-inertia sum (pinocchio.Inertia +) as
an independent implementation of the same composite.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pinocchio as pin
import pytest

import opspace
from opspace.cli import main as cli_main
from conftest import base_doc, run_cli_module, two_link_urdf, urdf, urdf_joint, urdf_link, write_toml

H = 0.1          # axle height above the ground = wheel radius, m
B = 0.25         # half track, m
RPY_BATTERY = (0.0, 0.0, 0.3)
BATTERY_I = (0.05, 0.08, 0.09, 0.004, 0.0, -0.002)


def _joint(name, kind, parent, child, xyz, rpy=(0, 0, 0), axis=(0, 0, 1), extra=""):
    axis_el = f'<axis xyz="{axis[0]} {axis[1]} {axis[2]}"/>' if kind != "fixed" else ""
    return (f'<joint name="{name}" type="{kind}"><parent link="{parent}"/><child link="{child}"/>'
            f'<origin xyz="{xyz[0]} {xyz[1]} {xyz[2]}" rpy="{rpy[0]!r} {rpy[1]!r} {rpy[2]!r}"/>'
            f'{axis_el}{extra}</joint>')


def _wheel(name, spin_axis):
    I = {"z": (0.0035, 0.0035, 0.006), "y": (0.0035, 0.006, 0.0035)}[spin_axis]
    rot = "0 0 0" if spin_axis == "z" else f"{-math.pi / 2!r} 0 0"   # cylinder along local z
    return (urdf_link(name, 1.5, inertia=I + (0, 0, 0))[:-7] +
            f'<collision><origin rpy="{rot}"/><geometry><cylinder radius="{H}" length="0.05"/>'
            f'</geometry></collision></link>')


def whole_urdf(left_axis=(0, 1, 0), wheel_kind="continuous"):
    """Root link at axle height, 5 cm behind the axle; a rotated battery, an arm
    plate with the two-link arm, a placeholder camera, a swivelling caster."""
    arm = two_link_urdf().split("\n")[2:-2]          # the arm's elements (root link first)
    arm = [e.replace('"root"', '"arm_plate"') for e in arm[1:]]
    arm = [e.replace('<origin xyz="0 0 0"/><axis xyz="0 -1 0"/>',
                     '<origin xyz="0 0 0.05"/><axis xyz="0 -1 0"/>', 1) if "shoulder" in e else e
           for e in arm]
    caster = ('<link name="caster_wheel"><inertial><mass value="0.2"/><inertia ixx="1e-4" '
              'iyy="1e-4" izz="1e-4" ixy="0" ixz="0" iyz="0"/></inertial><collision>'
              '<origin xyz="-0.02 0 0"/><geometry><sphere radius="0.05"/></geometry>'
              '</collision></link>')
    return urdf(
        urdf_link("base_link", 20.0, (0.1, 0.0, 0.1), (0.6, 0.8, 1.0, 0, 0, 0)),
        _joint("battery_joint", "fixed", "base_link", "battery", (-0.1, 0.05, 0.0), RPY_BATTERY),
        urdf_link("battery", 8.0, (0.01, 0.0, 0.02), BATTERY_I),
        _joint("plate_joint", "fixed", "base_link", "arm_plate", (0.15, 0.0, 0.3)),
        urdf_link("arm_plate", 1.0, (0.0, 0.0, 0.01), (0.002, 0.002, 0.003, 0, 0, 0)),
        _joint("camera_joint", "fixed", "base_link", "camera", (0.3, 0.0, 0.5), (0, 0.4, 0)),
        urdf_link("camera", 0.0),
        _joint("wheel_r_joint", wheel_kind, "base_link", "wheel_r", (0.05, -B, 0.0),
               (-math.pi / 2, 0, 0), (0, 0, 1), extra='<limit lower="-1" upper="1" effort="1" '
               'velocity="1"/>' if wheel_kind == "prismatic" else ""),
        _wheel("wheel_r", "z"),
        _joint("wheel_l_joint", "continuous", "base_link", "wheel_l", (0.05, B, 0.0),
               axis=left_axis),
        _wheel("wheel_l", "y"),
        _joint("caster_swivel", "continuous", "base_link", "caster_fork", (0.4, 0.0, -0.02)),
        urdf_link("caster_fork", 0.3, (-0.01, 0.0, -0.01), (2e-4, 2e-4, 1e-4, 0, 0, 0)),
        _joint("caster_axle", "continuous", "caster_fork", "caster_wheel", (-0.0, 0.0, -0.03),
               axis=(0, 1, 0)),
        caster,
        *arm,
        name="whole_test")


def whole_doc(**robot):
    doc = {"robot": {"name": "whole", "urdf": "robot.urdf",
                     "wheel_joints": ["wheel_r_joint", "wheel_l_joint"], "tool_frame": "tool",
                     **robot},
           "drive": base_doc()["drive"],
           "caster": [{"link": "caster_wheel"}]}
    return doc


def load_whole(tmp_path, text=None, doc=None):
    (tmp_path / "robot.urdf").write_text(text or whole_urdf())
    return opspace.load_robot(write_toml(tmp_path / "robot.toml", doc or whole_doc()))


# the root link's origin in the base frame B: 5 cm behind the axle, at axle height
P_ROOT = np.array([-0.05, 0.0, H])


def hand_chassis():
    """(m, c, I_c) of the chassis links by hand (base frame B)."""
    Rb = pin.rpy.rpyToMatrix(np.array(RPY_BATTERY))
    parts = [  # (m, c in B, I about own COM in B axes)
        (20.0, P_ROOT + [0.1, 0, 0.1], np.diag([0.6, 0.8, 1.0])),
        (8.0, P_ROOT + [-0.1, 0.05, 0] + Rb @ [0.01, 0, 0.02],
         Rb @ opspace.description.inertia_matrix(BATTERY_I) @ Rb.T),
        (1.0, P_ROOT + [0.15, 0, 0.31], np.diag([0.002, 0.002, 0.003])),
        (0.3, P_ROOT + [0.39, 0, -0.03], np.diag([2e-4, 2e-4, 1e-4])),
        (0.2, P_ROOT + [0.4, 0, -0.05], np.diag([1e-4] * 3)),
    ]
    m = sum(p[0] for p in parts)                                  # mass sum
    c = sum(p[0] * p[1] for p in parts) / m                       # mass-weighted mean
    I = sum(Ii + mi * ((ci - c) @ (ci - c) * np.eye(3) - np.outer(ci - c, ci - c))
            for mi, ci, Ii in parts)                              # parallel-axis theorem
    return m, c, I, parts


def test_derived_base_against_hand_sums(tmp_path):
    robot = load_whole(tmp_path)
    d = robot.description
    m, c, I, parts = hand_chassis()
    assert d.base.mass == pytest.approx(m, rel=1e-14)
    np.testing.assert_allclose(d.base.com, c, atol=1e-14)
    np.testing.assert_allclose(opspace.description.inertia_matrix(d.base.inertia), I,
                               rtol=1e-12, atol=1e-15)
    # the same composite through Pinocchio's spatial-inertia sum
    total = pin.Inertia.Zero()
    for mi, ci, Ii in parts:
        total += pin.Inertia(mi, ci, Ii)
    np.testing.assert_allclose(I, total.inertia, rtol=1e-12, atol=1e-15)
    assert d.base.half_track == pytest.approx(B, rel=1e-14)
    assert d.base.wheel_radius == H
    assert (d.wheel.mass, d.wheel.spin_inertia, d.wheel.diameter_inertia) == pytest.approx(
        (1.5, 0.006, 0.0035), rel=1e-12)
    np.testing.assert_allclose(d.mount_xyz, P_ROOT + [0.15, 0, 0.3], atol=1e-15)
    np.testing.assert_allclose(d.casters, [(P_ROOT[0] + 0.4 - 0.02, 0.0)], atol=1e-15)
    # the placeholder camera is a frame of the model, at its URDF place
    X = robot.frame_placement(robot.configuration(), "camera")
    np.testing.assert_allclose(X.translation, P_ROOT + [0.3, 0, 0.5], atol=1e-15)
    # a wheel link turns with its wheel: R = Ry(φ) Rx(−π/2), centre fixed
    X = robot.frame_placement(robot.configuration(wheels=(0.3, 0.0)), "wheel_r")
    np.testing.assert_allclose(X.translation, [0.0, -B, H], atol=1e-15)
    np.testing.assert_allclose(X.rotation, pin.utils.rotate("y", 0.3) @ pin.utils.rotate(
        "x", -math.pi / 2), atol=1e-15)
    assert robot.model.existFrame("caster_wheel")          # held at zero with the chassis


def arm_form(tmp_path):
    """The same robot in today's arm-URDF form, its base typed in by hand."""
    m, c, I, _ = hand_chassis()
    arm = two_link_urdf().replace('<origin xyz="0 0 0"/><axis xyz="0 -1 0"/>',
                                  '<origin xyz="0 0 0.05"/><axis xyz="0 -1 0"/>', 1)
    doc = base_doc(base={"mass": m, "com": list(c), "half_track": B, "wheel_radius": H,
                         "inertia": [I[0, 0], I[1, 1], I[2, 2], I[0, 1], I[0, 2], I[1, 2]]},
                   wheel={"mass": 1.5, "spin_inertia": 0.006, "diameter_inertia": 0.0035},
                   mount={"xyz": list(P_ROOT + [0.15, 0, 0.3])},
                   caster=[{"position": [P_ROOT[0] + 0.38, 0.0]}])
    (tmp_path / "arm.urdf").write_text(arm)
    return opspace.load_robot(write_toml(tmp_path / "arm_form.toml", doc))


def test_whole_form_has_the_dynamics_of_the_arm_form(tmp_path, rng):
    whole, arm = load_whole(tmp_path), arm_form(tmp_path)
    assert whole.coordinate_names == arm.coordinate_names
    assert whole.total_mass() == pytest.approx(arm.total_mass(), rel=1e-14)
    for _ in range(5):
        qa = rng.uniform(-1, 1, 2)
        nu = rng.normal(size=whole.nv)
        base = tuple(rng.uniform(-1, 1, 3))
        a = opspace.joint_space(whole, whole.configuration(base, arm=qa), nu)
        b = opspace.joint_space(arm, arm.configuration(base, arm=qa), nu)
        for x, y in ((a.M, b.M), (a.c, b.c), (a.g, b.g)):
            np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-12)


def test_overrides_and_check_prints_sources(tmp_path, capsys):
    doc = whole_doc()
    doc["base"] = {"mass": 31.0, "wheel_radius": 0.11}
    doc["mount"] = {"xyz": [0.1, 0.0, 0.4]}
    robot = load_whole(tmp_path, doc=doc)
    d = robot.description
    assert d.base.mass == 31.0 and d.base.wheel_radius == 0.11 and d.mount_xyz == (0.1, 0.0, 0.4)
    # the ground moves with the given radius: the root link is now 0.11 m up
    np.testing.assert_allclose(d.base.com, hand_chassis()[1] + [0, 0, 0.01], atol=1e-14)
    assert cli_main(["check", str(tmp_path / "robot.toml")]) == 0
    stdout = capsys.readouterr().out
    for line in ("[base] mass", "given in robot.toml", "mass-weighted mean of the chassis links'",
                 "base_link, battery, arm_plate, camera", 
                 "moving joints held at zero: caster_swivel", "half the distance between the "
                 "origins of joints 'wheel_r_joint' and 'wheel_l_joint'", "[[caster]] 1",
                 "below link 'caster_wheel'"):
        assert line in stdout, line


@pytest.mark.parametrize("change, expect", [
    (dict(wheel_kind="prismatic"), r"\[robot\] wheel_joints: joint 'wheel_r_joint' of "
                                   r"robot\.urdf is prismatic; a wheel joint must be continuous"),
    (dict(left_axis=(1, 0, 0)), r"\[robot\] wheel_joints: wheel joints 'wheel_r_joint' and "
                                r"'wheel_l_joint' of robot\.urdf are not coaxial"),
])
def test_bad_wheel_joints(tmp_path, change, expect):
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: " + expect):
        load_whole(tmp_path, whole_urdf(**change))


@pytest.mark.parametrize("robot_keys, expect", [
    (dict(tool_frame="camera"), r"tool_frame 'camera' is rigidly fixed to the base link"),
    (dict(arm_root="battery"), r"tool_frame 'tool' is not under the arm: arm_root 'battery'"),
    (dict(arm_root="link1"), r"tool_frame 'tool' is not under the arm: arm_root 'link1'"),
    (dict(urdf="package://nowhere/robot.urdf"),
     r"\[robot\] urdf: package 'nowhere' of package://nowhere/robot\.urdf is not in "
     r"\[package_paths\]"),
    (dict(wheel_joints=["wheel_r_joint", "caster"]), r"'caster' is not a joint of robot\.urdf"),
])
def test_bad_whole_descriptions(tmp_path, robot_keys, expect):
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: .*" + expect):
        load_whole(tmp_path, doc=whole_doc(**robot_keys))


def test_package_paths_and_cli_one_line(tmp_path):
    (tmp_path / "share" / "demo_pkg" / "urdf").mkdir(parents=True)
    (tmp_path / "share" / "demo_pkg" / "urdf" / "robot.urdf").write_text(whole_urdf())
    doc = whole_doc(urdf="package://demo_pkg/urdf/robot.urdf")
    doc["package_paths"] = {"demo_pkg": "share/demo_pkg"}
    robot = opspace.load_robot(write_toml(tmp_path / "robot.toml", doc))
    assert robot.description.base.half_track == pytest.approx(B)
    doc["robot"]["urdf"] = "package://other_pkg/urdf/robot.urdf"
    write_toml(tmp_path / "bad.toml", doc)
    out = run_cli_module("check", str(tmp_path / "bad.toml"))
    assert out.returncode == 2 and out.stdout == ""
    assert out.stderr.count("\n") == 1 and "package 'other_pkg'" in out.stderr


def test_world_link_above_a_floating_base_and_massless_wheels(tmp_path):
    """A "world" root with a floating joint to the base is skipped; wheels whose
    links are placeholders need [wheel] given (a message, not a zero mass)."""
    text = whole_urdf().replace('<link name="base_link">', '<link name="world"/><joint '
                                'name="float" type="floating"><parent link="world"/><child '
                                'link="base_link"/></joint><link name="base_link">')
    robot = load_whole(tmp_path, text)
    np.testing.assert_allclose(robot.description.base.com, hand_chassis()[1], atol=1e-14)
    text = re.sub(r'(<link name="wheel_[rl]">)<inertial>.*?</inertial>',
                  r'\1<inertial><mass value="0"/><inertia ixx="0" iyy="0" izz="0" ixy="0" '
                  r'ixz="0" iyz="0"/></inertial>', whole_urdf())
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: the wheel links of robot\.urdf "
                                                  r"have no mass: give \[wheel\] mass"):
        load_whole(tmp_path, text)
    doc = whole_doc()
    doc["wheel"] = {"mass": 1.5, "spin_inertia": 0.006, "diameter_inertia": 0.0035}
    assert load_whole(tmp_path, text, doc).description.wheel.mass == 1.5


def test_arm_root_higher_up_gives_the_same_robot(tmp_path, rng):
    """arm_root = the root link: the arm is cut above the plate, whose mass still
    counts with the chassis; the mount moves, the dynamics do not."""
    a = load_whole(tmp_path)
    b = load_whole(tmp_path, doc=whole_doc(arm_root="base_link"))
    np.testing.assert_allclose(b.description.mount_xyz, P_ROOT, atol=1e-15)
    assert b.description.base.mass == a.description.base.mass
    q, nu = a.configuration(arm=rng.uniform(-1, 1, 2)), rng.normal(size=a.nv)
    ja, jb = opspace.joint_space(a, q, nu), opspace.joint_space(b, q, nu)
    for x, y in ((ja.M, jb.M), (ja.c, jb.c), (ja.g, jb.g)):
        np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-12)
