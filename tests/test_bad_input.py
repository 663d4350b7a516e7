"""Bad description input: one test each; errors name file, key, value, expectation."""

from __future__ import annotations

import subprocess
import sys

import pytest

import opspace
from conftest import DEMO, REPO, base_doc, make_robot, two_link_urdf, write_toml


def load(tmp_path, doc=None, urdf_text=None):
    (tmp_path / "arm.urdf").write_text(urdf_text or two_link_urdf())
    return opspace.load_robot(write_toml(tmp_path / "robot.toml", doc or base_doc()))


def test_missing_file(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"nope\.toml: file not found"):
        opspace.load_robot(tmp_path / "nope.toml")


def test_malformed_toml(tmp_path):
    (tmp_path / "robot.toml").write_text("[base\nmass = 3\n")
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: not valid TOML"):
        opspace.load_robot(tmp_path / "robot.toml")


def test_urdf_does_not_parse(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"arm\.urdf: URDF does not parse"):
        load(tmp_path, urdf_text="<robot name='x'><link name='a'></robot")


def test_urdf_missing(tmp_path):
    doc = base_doc(robot__arm_urdf="missing.urdf")
    with pytest.raises(opspace.ConfigError, match=r"\[robot\] arm_urdf: URDF file not found"):
        load(tmp_path, doc)


def test_unknown_tool_frame(tmp_path):
    with pytest.raises(opspace.ConfigError,
                       match=r"robot\.toml: \[robot\] tool_frame 'gripper' is not a link or frame of arm\.urdf"):
        load(tmp_path, base_doc(robot__tool_frame="gripper"))


@pytest.mark.parametrize("key,value,pattern", [
    ("base__mass", -3.0, r"\[base\] mass must be > 0 kg, got -3"),
    ("base__mass", 0.0, r"\[base\] mass must be > 0 kg, got 0"),
    ("base__wheel_radius", 0.0, r"\[base\] wheel_radius must be > 0 m, got 0"),
    ("base__half_track", -0.2, r"\[base\] half_track must be > 0 m, got -0.2"),
    ("wheel__mass", 0.0, r"\[wheel\] mass must be > 0 kg, got 0"),
    ("drive__gear_ratio", 0.0, r"\[drive\] gear_ratio must be > 0, got 0"),
    ("drive__efficiency", 1.2, r"\[drive\] efficiency must be <= 1, got 1.2"),
    ("ground", {"friction": 0.0}, r"\[ground\] friction must be > 0, got 0"),
])
def test_nonpositive_values(tmp_path, key, value, pattern):
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: " + pattern):
        load(tmp_path, base_doc(**{key: value}))


def test_inertia_not_positive_definite(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"\[base\] inertia must be positive definite, got \[1\.0, -1\.0"):
        load(tmp_path, base_doc(base__inertia=[1.0, -1.0, 1.0, 0.0, 0.0, 0.0]))


def test_inertia_triangle_inequality(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"\[base\] inertia violates the triangle inequality"):
        load(tmp_path, base_doc(base__inertia=[0.1, 0.1, 1.0, 0.0, 0.0, 0.0]))


def test_wheel_inertia_triangle_inequality(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"\[wheel\] spin_inertia must be <= 2 x diameter_inertia"):
        load(tmp_path, base_doc(wheel__spin_inertia=0.01, wheel__diameter_inertia=0.001))


def test_urdf_link_inertia_invalid(tmp_path):
    bad = two_link_urdf().replace('<mass value="1.5"/>', '<mass value="-1.5"/>')
    with pytest.raises(opspace.ConfigError, match=r"arm\.urdf: link 'link2' <inertial> <mass value> must be > 0 kg"):
        load(tmp_path, urdf_text=bad)


@pytest.mark.parametrize("key,value,pattern", [
    ("base__com", [0.0, 0.1], r"\[base\] com must be a list of 3 numbers m, got \[0\.0, 0\.1\]"),
    ("base__inertia", [1.0, 1.0, 1.0], r"\[base\] inertia must be a list of 6 numbers"),
    ("mount__xyz", [0.1, 0.0, 0.4, 1.0], r"\[mount\] xyz must be a list of 3 numbers m"),
    ("caster", [{"position": [0.3]}], r"\[caster 1\] position must be a list of 2 numbers"),
])
def test_wrong_vector_lengths(tmp_path, key, value, pattern):
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: " + pattern):
        load(tmp_path, base_doc(**{key: value}))


def test_unknown_key_lists_valid_ones(tmp_path):
    doc = base_doc()
    doc["base"]["mas"] = 3.0
    with pytest.raises(opspace.ConfigError, match=r"\[base\] mas is not a known key \(valid keys: com, footprint, half_track"):
        load(tmp_path, doc)


def test_missing_key(tmp_path):
    doc = base_doc()
    del doc["wheel"]["spin_inertia"]
    with pytest.raises(opspace.ConfigError, match=r"robot\.toml: \[wheel\] spin_inertia is missing"):
        load(tmp_path, doc)


def test_wrong_type(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"\[base\] mass must be a number kg, got 'heavy'"):
        load(tmp_path, base_doc(base__mass="heavy"))


def test_pose_outside_limits(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"\[poses\] up puts joint 'elbow' at 4, outside its URDF limits \[-3, 3\]"):
        load(tmp_path, base_doc(poses={"up": [0.0, 4.0]}))


def test_unknown_arm_joint(tmp_path):
    with pytest.raises(opspace.ConfigError, match=r"\[arm_joint\.wrist\] is not a joint of the arm URDF \(joints: shoulder, elbow\)"):
        load(tmp_path, base_doc(arm_joint={"wrist": {"gear_ratio": 50.0}}))


def test_api_vector_shapes(tmp_path):
    robot = make_robot(tmp_path)
    with pytest.raises(ValueError, match=r"`arm` must have shape \(2,\), got \(3,\)"):
        robot.configuration(arm=[0, 0, 0])
    with pytest.raises(ValueError, match=r"`nu` must have shape \(4,\)"):
        opspace.joint_space(robot, robot.configuration(), [0.0, 0.0])


def run_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "opspace", *args], capture_output=True,
                          text=True, cwd=cwd or REPO, timeout=120)


def test_cli_bad_input_one_line_exit_2(tmp_path):
    (tmp_path / "arm.urdf").write_text(two_link_urdf())
    path = write_toml(tmp_path / "robot.toml", base_doc(base__mass=-3.0))
    res = run_cli("check", str(path))
    assert res.returncode == 2
    assert res.stdout == ""
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "[base] mass must be > 0 kg, got -3" in lines[0]
    assert "Traceback" not in res.stderr


def test_cli_check_demo():
    res = run_cli("check")
    assert res.returncode == 0, res.stderr
    for needle in ("reduced coordinates (9)", "wheel_right, wheel_left, lift", "side_reach",
                   "reflected rotor inertia per wheel", "model estimates"):
        assert needle in res.stdout


def test_loaders_take_parsed_documents_as_the_files(tmp_path):
    # the sweep hands the loaders parsed documents and the URDF's text: the
    # result is the same as from the files, and messages still name the file
    from opspace.description import read_toml
    from opspace.description import load_catalogue
    robot_path = DEMO
    doc = read_toml(robot_path)
    urdf = (robot_path.parent / doc["robot"]["arm_urdf"]).read_text()
    a = opspace.load_robot(robot_path)
    b = opspace.load_robot(tmp_path / "robot.toml", doc=doc, urdf_text=urdf)   # no such file
    assert a.model == b.model and a.total_mass() == b.total_mass()
    cat = DEMO.with_name("drives.toml")
    c1, c2 = load_catalogue(cat), load_catalogue(tmp_path / "drives.toml", doc=read_toml(cat))
    assert (c1.motors, c1.gearboxes) == (c2.motors, c2.gearboxes) and c2.path.name == cat.name
    bad = {**doc, "base": {**doc["base"], "mass": -1.0}}
    with pytest.raises(opspace.ConfigError, match=r"^robot\.toml: \[base\] mass"):
        opspace.load_robot(tmp_path / "robot.toml", doc=bad, urdf_text=urdf)
    with pytest.raises(opspace.ConfigError, match="arm.urdf: URDF does not parse"):
        opspace.load_robot(tmp_path / "robot.toml", doc=doc, urdf_text="<robot")
