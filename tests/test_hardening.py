"""One test per class of bad input (issue: every file and argument a user can
give, no traceback and no silent nonsense), each with its exact message."""

from __future__ import annotations

import contextlib
import io
import os
import re
import shutil
from pathlib import Path

import pytest

import opspace
from conftest import base_doc, two_link_urdf, urdf, urdf_joint, urdf_link, write_toml
from opspace.cli import main as cli_main

REPO = Path(__file__).resolve().parent.parent
MARMOT = REPO / "models" / "marmot"


def robot_files(tmp_path, doc=None, urdf_text=None):
    (tmp_path / "arm.urdf").write_text(urdf_text or two_link_urdf())
    return write_toml(tmp_path / "robot.toml", doc or base_doc())


def refused(tmp_path, match, doc=None, urdf_text=None):
    path = robot_files(tmp_path, doc, urdf_text)
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(match)):
        opspace.load_robot(path)


def cli(argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli_main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


# ---------------------------------------------------------------- 1. encodings
def test_a_file_that_is_not_utf8_names_the_byte(tmp_path):
    path = robot_files(tmp_path)
    path.write_bytes(b"# caf\xe9\n" + path.read_bytes())
    with pytest.raises(opspace.ConfigError, match=re.escape(
            "robot.toml: is not UTF-8 text: byte 0xe9 at offset 5 (line 1) cannot be decoded; "
            "save the file as UTF-8")):
        opspace.load_robot(path)
    path.write_bytes(path.read_bytes()[8:].decode().encode("utf-16"))
    with pytest.raises(opspace.ConfigError, match=re.escape(
            "robot.toml: is UTF-16 text; save it as UTF-8")):
        opspace.load_robot(path)


def test_a_urdf_that_is_not_utf8(tmp_path):
    text = two_link_urdf().replace("<robot", "<!-- caf\xe9 --><robot", 1)
    path = robot_files(tmp_path)
    (tmp_path / "arm.urdf").write_bytes(text.encode("latin-1"))
    with pytest.raises(opspace.ConfigError, match=r"^arm\.urdf: is not UTF-8 text: byte 0xe9 "
                                                  r"at offset \d+ \(line \d+\)"):
        opspace.load_robot(path)


# ---------------------------------------------------------------- 2. paths
@pytest.mark.parametrize("how,problem", [("loop", "is a symbolic link loop"),
                                         ("directory", "is a directory, not a file"),
                                         ("missing", "not found")])
def test_a_referenced_file_names_the_key_and_the_referring_file(tmp_path, how, problem):
    path = robot_files(tmp_path)
    urdf_path = tmp_path / "arm.urdf"
    urdf_path.unlink()
    if how == "loop":
        os.symlink("arm.urdf", urdf_path)
    elif how == "directory":
        urdf_path.mkdir()
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(
            f"robot.toml: [robot] arm_urdf: URDF file {problem}: {urdf_path}") + "$"):
        opspace.load_robot(path)


def test_a_duty_cycle_names_its_missing_robot(tmp_path):
    shutil.copy(MARMOT / "shift.toml", tmp_path)
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(
            f"shift.toml: [cycle] robot: robot description not found: {tmp_path / 'robot.toml'}")):
        opspace.load_duty_cycle(tmp_path / "shift.toml")


# ---------------------------------------------------------------- 3. types and magnitudes
@pytest.mark.parametrize("value,shown", [(["carry", "stowed"], "['carry', 'stowed']"),
                                         ({"a": 1.0}, "{'a': 1.0}"), (3, "3")])
def test_a_pose_reference_of_the_wrong_type(tmp_path, value, shown):
    doc = opspace.description.read_toml(MARMOT / "shift.toml")
    doc["cycle"]["arm_start"] = value
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(
            f"shift.toml: [cycle] arm_start must be a pose name or a list of joint values "
            f"(rad or m), got {shown}")):
        opspace.load_duty_cycle(MARMOT / "shift.toml", doc=doc)


@pytest.mark.parametrize("element,attr,value,where", [
    ('<limit lower="-3.0" upper="3.0" effort="100.0"', "effort", "2,5",
     "joint 'shoulder' <limit effort> must be a number, got '2,5'"),
    ('<mass value="1.5"/>', "value", "0.04kg",
     "link 'link2' <inertial> <mass value> must be a number, got '0.04kg'"),
])
def test_urdf_numbers_that_do_not_parse(tmp_path, element, attr, value, where):
    text = two_link_urdf()
    assert element in text
    bad = text.replace(element, re.sub(f'{attr}="[^"]*"', f'{attr}="{value}"', element), 1)
    refused(tmp_path, f"arm.urdf: {where}", urdf_text=bad)


@pytest.mark.parametrize("key,value,message", [
    ("drive__gear_ratio", 1e30, "[drive] gear_ratio must be <= 10000, got 1e+30"),
    ("base__half_track", 1e30, "[base] half_track must be <= 5 m, got 1e+30"),
    ("base__inertia", [1e30, 1e30, 1e30, 0.0, 0.0, 0.0],
     "[base] inertia must be within ±100000 kg·m² (a plausible bound for a mobile manipulator: "
     "check the units), got 1e+30"),
    ("mount__xyz", [150.0, 0.0, 400.0],
     "[mount] xyz must be within ±10 m (a plausible bound for a mobile manipulator: check the "
     "units), got 150"),
])
def test_implausible_magnitudes(tmp_path, key, value, message):
    refused(tmp_path, f"robot.toml: {message}", doc=base_doc(**{key: value}))


def test_a_duty_cycle_value_of_1e30(tmp_path):
    doc = opspace.description.read_toml(MARMOT / "shift.toml")
    doc["segment"][0]["distance"] = 1e30
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(
            "shift.toml: [segment 1 (straight)] distance must be within ±10000 m (a plausible "
            "bound for a mobile manipulator: check the units), got 1e+30")):
        opspace.load_duty_cycle(MARMOT / "shift.toml", doc=doc)


# ---------------------------------------------------------------- 4. URDF semantics
def _arm(*joint_kwargs, last_mass=1.5, extra=""):
    return urdf(urdf_link("base_link"), urdf_link("link1", 2.0, (0.25, 0, 0), (0.01, 0.03, 0.03, 0, 0, 0)),
                urdf_link("link2", last_mass, (0.2, 0, 0),
                          (0.01, 0.02, 0.02, 0, 0, 0) if last_mass else (0,) * 6),
                urdf_joint("shoulder", "revolute", "base_link", "link1", **joint_kwargs[0]),
                urdf_joint("elbow", "revolute", "link1", "link2", xyz=(0.5, 0, 0),
                           **joint_kwargs[1]), extra)


def test_a_zero_joint_axis(tmp_path):
    refused(tmp_path, "arm.urdf: joint 'elbow' <axis xyz> is zero: a revolute joint needs a "
                      "direction (e.g. \"0 0 1\")", urdf_text=_arm({}, {"axis": (0, 0, 0)}),
            doc=base_doc(robot__tool_frame="link2"))


def test_a_link_and_a_joint_sharing_a_name_load(tmp_path):
    # legal URDF: the tool frame is the link of that name
    text = two_link_urdf().replace('name="elbow"', 'name="link2"')
    robot = opspace.load_robot(robot_files(tmp_path, base_doc(robot__tool_frame="link2"), text))
    import pinocchio as pin

    assert robot.model.frames[robot.tool_frame_id].type == pin.FrameType.BODY
    assert robot.model.frames[robot.tool_frame_id].name == "link2"


def test_a_massless_last_link_is_caught_at_load(tmp_path):
    refused(tmp_path, "arm.urdf: joint 'elbow' moves no mass (the links beyond it have no mass "
                      "or inertia about its axis): the mass matrix would be singular; give its "
                      "child link an <inertial>, or the joint a rotor in robot.toml "
                      "[arm_joint.elbow] rotor_inertia", urdf_text=_arm({}, {}, last_mass=0.0),
            doc=base_doc(robot__tool_frame="link2"))
    # a rotor on that joint gives it inertia: accepted
    doc = base_doc(robot__tool_frame="link2",
                   arm_joint={"elbow": {"rotor_inertia": 1e-5, "gear_ratio": 100.0}})
    opspace.load_robot(robot_files(tmp_path, doc, _arm({}, {}, last_mass=0.0)))


def test_a_urdf_in_millimetres(tmp_path):
    text = two_link_urdf().replace('<origin xyz="0.5 0 0"/>', '<origin xyz="500 0 0"/>')
    assert text != two_link_urdf()
    refused(tmp_path, "arm.urdf: joint 'elbow' <origin xyz> = '500 0 0' is implausible for a "
                      "robot arm (beyond ±10 m: URDF lengths are metres; was the file written "
                      "in millimetres?)", urdf_text=text)


def test_a_missing_limit_and_two_roots_are_one_line(tmp_path, capfd):
    no_limit = re.sub(r'<limit [^>]*/>', "", two_link_urdf(), count=1)
    refused(tmp_path, "arm.urdf: joint 'shoulder' is revolute but has no <limit lower upper "
                      "effort velocity>", urdf_text=no_limit)
    two_roots = two_link_urdf().replace("</robot>", '<link name="stray"/></robot>')
    refused(tmp_path, "arm.urdf: the arm must have exactly one root link (a link that is no "
                      "joint's child), found 2: 'root', 'stray'", urdf_text=two_roots)
    assert capfd.readouterr().err == ""          # nothing from the URDF parser's own printing


# ---------------------------------------------------------------- 5. the CLI
def test_cli_output_folder_checked_before_computing(tmp_path, monkeypatch):
    import importlib

    sizing = importlib.import_module("opspace.sizing")
    monkeypatch.setattr(sizing, "size", lambda *a, **k: pytest.fail("sized before checking -o"))
    blocker = tmp_path / "report"
    blocker.write_text("")
    code, out, err = cli(["size", "-o", blocker / "sub", "--no-search", "-q"])
    assert (code, out) == (2, "")
    assert err == f"opspace: error: -o {blocker / 'sub'}: {blocker} exists and is not a directory\n"


def test_cli_options_are_validated_like_keys(tmp_path):
    code, out, err = cli(["simulate", "--payload-error", "-2", "-o", tmp_path / "o"])
    assert (code, out, err) == (2, "", "opspace: error: --payload-error must be within "
                                       "[-0.9, 10], got -2\n")
    code, out, err = cli(["simulate", "--integrator", "rk5"])
    assert (code, out) == (2, "")
    assert err == ("opspace simulate: error: argument --integrator: invalid choice: 'rk5' "
                   "(choose from 'rk4', 'euler') (see opspace simulate --help)\n")
    assert not (tmp_path / "o").exists()


def test_cli_workers_0_is_refused_before_the_base_design(tmp_path, monkeypatch):
    import importlib

    sweep = importlib.import_module("opspace.sweep")
    monkeypatch.setattr(sweep, "load_sweep", lambda *a: pytest.fail("loaded before --workers"))
    code, out, err = cli(["sweep", "--workers", "0", "-o", tmp_path / "o"])
    assert (code, out, err) == (2, "", "opspace: error: --workers must be a number of processes "
                                       "from 1 to 1024, got 0\n")


def test_cli_an_unexpected_failure_is_one_line_exit_3(monkeypatch):
    import opspace.cli

    def boom(args):
        raise TypeError("unexpected\n  second line")

    monkeypatch.setattr(opspace.cli, "_cmd_check", boom)
    code, out, err = cli(["check"])
    assert (code, out) == (3, "")
    assert err == ("opspace: internal error: TypeError: unexpected second line (a defect of "
                   "opspace: please report it; OPSPACE_TRACEBACK=1 shows where)\n")
    monkeypatch.setenv("OPSPACE_TRACEBACK", "1")
    with pytest.raises(TypeError):
        cli(["check"])


def test_cli_a_read_only_output_place(tmp_path):
    # /proc refuses new files to everybody (root included, unlike permission bits)
    if not Path("/proc/self").is_dir():
        pytest.skip("needs /proc")
    code, out, err = cli(["size", "-o", "/proc/opspace-report", "--no-search", "-q"])
    assert (code, out) == (2, "")
    assert err.startswith("opspace: error: -o /proc/opspace-report: cannot write in /proc (")


# ---------------------------------------------------------------- 7. sweep specifications
SMALL = """[sweep]
name = "small"
duty_cycle = "shift.toml"
figures = ["robot.mass"]

[fixed]
"cycle.sample_rate" = 50.0

[[parameter]]
key = "robot.base.mass"
{values}
"""


def sweep_files(tmp_path, values):
    for name in ("robot.toml", "arm.urdf", "drives.toml", "shift.toml"):
        shutil.copy(MARMOT / name, tmp_path / name)
    path = tmp_path / "small.toml"
    path.write_text(SMALL.format(values=values))
    return path


def test_a_sweep_value_is_checked_before_any_point(tmp_path):
    path = sweep_files(tmp_path, "values = [42.0, -5.0]")
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(
            "small.toml: [[parameter]] 1 'robot.base.mass' values: -5.0 is not valid there: "
            "robot.toml: [base] mass must be > 0 kg, got -5")):
        opspace.sweep.load_sweep(path)


def test_a_billion_values_are_refused_before_they_are_built(tmp_path):
    path = sweep_files(tmp_path, "range = { start = 40.0, stop = 50.0, step = 1e-8 }")
    with pytest.raises(opspace.ConfigError, match="^" + re.escape(
            "small.toml: [[parameter]] 1 'robot.base.mass' range {start, stop, step} makes "
            "1e+09 values (more than 100000): check step = 1e-08")):
        opspace.sweep.load_sweep(path)
    path.write_text(SMALL.format(values="range = { start = 40.0, stop = 50.0, num = 1000000000 }"))
    with pytest.raises(opspace.ConfigError, match=re.escape("num = 1000000000 is more than 100000")):
        opspace.sweep.load_sweep(path)
