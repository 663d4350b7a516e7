"""Whole-robot descriptions written in xacro: a macro-built robot equals the
hand-expanded URDF; `$(find pkg)` and `package://` go through [package_paths];
xacro errors are one line naming the file.

Outside reference: the PyPI `xacro` package does the expansion; the check is
that its output and a URDF written out by hand give the same tree and the same
model (structure, inertials, and the mass matrix at a state).
"""

from __future__ import annotations

import numpy as np
import pytest

import opspace
from conftest import base_doc, urdf_elements, write_toml
from opspace.cli import main as cli_main

pytest.importorskip("xacro")

MACROS = """<?xml version="1.0"?>
<robot xmlns:xacro="http://www.ros.org/wiki/xacro">
  <xacro:macro name="wheel" params="side y">
    <joint name="wheel_${side}_joint" type="continuous">
      <parent link="base_link"/><child link="wheel_${side}"/>
      <origin xyz="0 ${y} ${radius}" rpy="0 0 0"/><axis xyz="0 1 0"/>
    </joint>
    <link name="wheel_${side}">
      <inertial><mass value="${wheel_mass}"/>
        <inertia ixx="${wheel_mass * (3 * radius**2 + 0.04**2) / 12}" iyy="${wheel_mass * radius**2 / 2}"
                 izz="${wheel_mass * (3 * radius**2 + 0.04**2) / 12}" ixy="0" ixz="0" iyz="0"/>
      </inertial>
      <visual><geometry><mesh filename="package://rover_pkg/meshes/wheel.stl"/></geometry></visual>
      <collision><origin rpy="${pi/2} 0 0"/>
        <geometry><cylinder radius="${radius}" length="0.04"/></geometry></collision>
    </link>
  </xacro:macro>
</robot>
"""

MAIN = """<?xml version="1.0"?>
<robot name="rover" xmlns:xacro="http://www.ros.org/wiki/xacro">
  <xacro:arg name="arm_mass" default="1.5"/>
  <xacro:property name="radius" value="0.08"/>
  <xacro:property name="wheel_mass" value="1.2"/>
  <xacro:include filename="$(find rover_pkg)/urdf/wheel.xacro"/>
  <link name="base_link">
    <inertial><origin xyz="0 0 0.15"/><mass value="25"/>
      <inertia ixx="0.8" iyy="1.0" izz="1.2" ixy="0" ixz="0" iyz="0"/></inertial>
  </link>
  <xacro:wheel side="right" y="-0.22"/>
  <xacro:wheel side="left" y="0.22"/>
  <joint name="shoulder" type="revolute"><parent link="base_link"/><child link="upper"/>
    <origin xyz="0.1 0 0.35"/><axis xyz="0 0 1"/>
    <limit lower="-2" upper="2" effort="40" velocity="2"/></joint>
  <link name="upper"><inertial><origin xyz="0.2 0 0"/><mass value="$(arg arm_mass)"/>
      <inertia ixx="0.002" iyy="0.02" izz="0.02" ixy="0" ixz="0" iyz="0"/></inertial></link>
  <joint name="tool_joint" type="fixed"><parent link="upper"/><child link="tool"/>
    <origin xyz="0.4 0 0"/></joint>
  <link name="tool"/>
</robot>
"""


def hand_expanded(arm_mass=1.5):
    """MAIN with the macro, properties and arguments expanded by hand."""
    r, m = 0.08, 1.2
    i_d, i_s = m * (3 * r**2 + 0.04**2) / 12, m * r**2 / 2
    wheel = lambda side, y: (  # noqa: E731
        f'<joint name="wheel_{side}_joint" type="continuous"><parent link="base_link"/>'
        f'<child link="wheel_{side}"/><origin xyz="0 {y} {r}" rpy="0 0 0"/><axis xyz="0 1 0"/>'
        f'</joint><link name="wheel_{side}"><inertial><mass value="{m}"/><inertia ixx="{i_d}" '
        f'iyy="{i_s}" izz="{i_d}" ixy="0" ixz="0" iyz="0"/></inertial><visual><geometry>'
        f'<mesh filename="package://rover_pkg/meshes/wheel.stl"/></geometry></visual>'
        f'<collision><origin rpy="{np.pi / 2} 0 0"/><geometry><cylinder radius="{r}" '
        f'length="0.04"/></geometry></collision></link>')
    return ('<robot name="rover"><link name="base_link"><inertial><origin xyz="0 0 0.15"/>'
            '<mass value="25"/><inertia ixx="0.8" iyy="1.0" izz="1.2" ixy="0" ixz="0" iyz="0"/>'
            '</inertial></link>' + wheel("right", -0.22) + wheel("left", 0.22) +
            '<joint name="shoulder" type="revolute"><parent link="base_link"/><child link="upper"/>'
            '<origin xyz="0.1 0 0.35"/><axis xyz="0 0 1"/><limit lower="-2" upper="2" '
            'effort="40" velocity="2"/></joint><link name="upper"><inertial><origin xyz="0.2 0 0"/>'
            f'<mass value="{arm_mass}"/><inertia ixx="0.002" iyy="0.02" izz="0.02" ixy="0" '
            'ixz="0" iyz="0"/></inertial></link><joint name="tool_joint" type="fixed">'
            '<parent link="upper"/><child link="tool"/><origin xyz="0.4 0 0"/></joint>'
            '<link name="tool"/></robot>')


def write_package(tmp_path, main=MAIN):
    pkg = tmp_path / "src" / "rover_pkg"
    (pkg / "urdf").mkdir(parents=True)
    (pkg / "urdf" / "wheel.xacro").write_text(MACROS)
    (pkg / "urdf" / "rover.urdf.xacro").write_text(main)
    (tmp_path / "rover.urdf").write_text(hand_expanded())
    doc = {"robot": {"name": "rover", "urdf": "package://rover_pkg/urdf/rover.urdf.xacro",
                     "wheel_joints": ["wheel_right_joint", "wheel_left_joint"],
                     "tool_frame": "tool"},
           "package_paths": {"rover_pkg": "src/rover_pkg"},
           "drive": base_doc()["drive"], "caster": [{"position": [0.3, 0.0]}]}
    return write_toml(tmp_path / "robot.toml", doc), doc


def test_macro_built_robot_equals_the_hand_expanded_urdf(tmp_path, rng):
    path, doc = write_package(tmp_path)
    from opspace.description._sources import expand_xacro
    packages = {"rover_pkg": tmp_path / "src" / "rover_pkg"}
    text = expand_xacro(tmp_path / "src/rover_pkg/urdf/rover.urdf.xacro", packages)
    assert urdf_elements(text) == urdf_elements(hand_expanded())
    macro = opspace.load_robot(path)
    doc["robot"]["urdf"] = "rover.urdf"
    hand = opspace.load_robot(write_toml(tmp_path / "hand.toml", doc))
    assert macro.description.base == hand.description.base
    assert macro.description.wheel == hand.description.wheel
    for _ in range(3):
        q = macro.configuration(arm=rng.uniform(-1, 1, 1))
        np.testing.assert_array_equal(opspace.joint_space(macro, q, np.zeros(3)).M,
                                      opspace.joint_space(hand, q, np.zeros(3)).M)


def test_xacro_args_and_missing_mesh_listed(tmp_path, capsys):
    path, doc = write_package(tmp_path)
    doc["robot"]["xacro_args"] = {"arm_mass": "2.5"}
    robot = opspace.load_robot(write_toml(path, doc))
    assert sum(i.mass for i in robot.description.arm_model.inertias) == 2.5
    assert cli_main(["check", str(path)]) == 0
    assert "meshes: 2 referenced, 2 not found (drawing only): " \
           "package://rover_pkg/meshes/wheel.stl (link 'wheel_right')" in capsys.readouterr().out


@pytest.mark.parametrize("main, expect", [
    (MAIN.replace('<xacro:wheel side="left"', '<xacro:wheeel side="left"'),
     r"rover\.urdf\.xacro: xacro expansion failed.*wheeel"),
    (MAIN.replace("${", "${undefined_width + ", 1).replace('value="0.08"', 'value="${nope}"'),
     r"rover\.urdf\.xacro: xacro expansion failed.*nope"),
    (MAIN.replace("$(find rover_pkg)", "$(find other_pkg)"),
     r"rover\.urdf\.xacro: \$\(find other_pkg\): package 'other_pkg' is not in "
     r"\[package_paths\] \(known packages: rover_pkg\)"),
])
def test_xacro_errors_are_one_line(tmp_path, capsys, main, expect):
    path, _ = write_package(tmp_path, main)
    with pytest.raises(opspace.ConfigError, match=expect) as err:
        opspace.load_robot(path)
    assert "\n" not in str(err.value)
    capsys.readouterr()
    assert cli_main(["check", str(path)]) == 2                 # the CLI: one line, exit 2
    out = capsys.readouterr()
    assert out.out == "" and out.err.count("\n") == 1
