"""The second bundled example: the Wren tricycle rover, a whole-robot URDF
written in xacro, with a mimic gripper and a camera on a mast.

Outside references: the PyPI xacro package expands the shipped .xacro (the
shipped .urdf must be its output); the derived chassis mass is the sum of the
URDF's own <mass> elements (checked by summing them here with the XML parser).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest

import opspace
from conftest import REPO, urdf_elements

WREN = REPO / "models" / "wren"


@pytest.fixture(scope="module")
def wren():
    return opspace.load_robot(WREN / "robot.toml")


def test_shipped_urdf_is_the_xacro_expansion(tmp_path):
    pytest.importorskip("xacro")
    from opspace.description import expand_xacro
    text = expand_xacro(WREN / "urdf" / "wren.urdf.xacro", {"wren_description": WREN})
    assert urdf_elements(text) == urdf_elements((WREN / "urdf" / "wren.urdf").read_text())
    doc = opspace.description.read_toml(WREN / "robot.toml")
    doc["robot"]["urdf"] = "package://wren_description/urdf/wren.urdf.xacro"
    from_xacro = opspace.load_robot(WREN / "robot.toml", doc=doc)
    shipped = opspace.load_robot(WREN / "robot.toml")
    d1, d2 = from_xacro.description, shipped.description
    assert (d1.base, d1.wheel, d1.mount_xyz, d1.casters, d1.mimic) == \
           (d2.base, d2.wheel, d2.mount_xyz, d2.casters, d2.mimic)


def test_tricycle_with_mimic_gripper_and_camera(wren):
    d = wren.description
    assert len(d.casters) == 1 and len(wren.contacts) == 3          # a tricycle
    assert wren.coordinate_names[-1] == "finger_left_joint"
    assert "finger_right_joint" not in wren.coordinate_names
    assert d.mimic["finger_right_joint"].leader == "finger_left_joint"
    # total mass = the sum of every <mass> of the URDF
    root = ET.parse(WREN / "urdf" / "wren.urdf").getroot()
    masses = sum(float(m.get("value")) for m in root.iter("mass"))
    assert wren.total_mass() == pytest.approx(masses, rel=1e-12)
    # the camera's optical frame: z along the view, which is the camera's x, pitched down 0.35 rad
    X = wren.frame_placement(wren.configuration(), "camera_optical_frame")
    np.testing.assert_allclose(X.rotation[:, 2], [np.cos(0.35), 0.0, -np.sin(0.35)], atol=1e-12)
    q = wren.configuration(arm="reach_forward")
    ia, ib = (wren.model.joints[wren.model.getJointId(n)].idx_q
              for n in ("finger_left_joint", "finger_right_joint"))
    assert q[ia] == q[ib] == 0.04


def test_sizing_runs_on_the_tricycle():
    result = opspace.size(WREN / "fetch.toml", search=False)
    assert result.status in ("pass", "fail")
    assert result.robot.description.whole is not None


def test_a_sweep_over_a_derived_value(tmp_path):
    """The sweep's documents carry the whole robot's URDF text (xacro expanded)
    to its workers, where the files are not: a point that sets [base] mass,
    which the URDF otherwise gives, moves the robot's mass by the same amount."""
    from opspace.sweep._docs import load_robot_doc, read_documents
    documents = read_documents(WREN / "fetch.toml", where="test")
    assert documents.urdf_name == "wren.urdf"
    base = load_robot_doc(documents, documents.docs["robot"])
    doc = dict(documents.docs["robot"], base=dict(documents.docs["robot"]["base"], mass=27.5))
    heavier = load_robot_doc(documents, doc)
    assert heavier.total_mass() - base.total_mass() == pytest.approx(27.5 - 23.5, rel=1e-12)
