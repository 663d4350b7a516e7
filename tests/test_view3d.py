"""The 3-D view of the reports: shapes read from a URDF (primitives, STL / OBJ /
DAE meshes, fallbacks), parts placed by the model's forward kinematics, and
the page drawn by headless Chromium offline (tests/browser.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest

import opspace
from browser import open_view3d, require_browser
from conftest import base_doc, make_robot, urdf, urdf_joint, urdf_link, write_toml
from opspace.description import read_shapes
from opspace.report import Marker, robot_scene, scene_html
from opspace.report import Page

L1, TOOL, D = 0.5, 0.4, 0.2   # link 1 length, link 2 to the tool, box centre on link 2 (m)

# a tetrahedron (4 vertices, 4 triangles), written by hand
STL = """solid tet
facet normal 0 0 -1
 outer loop
  vertex 0 0 0
  vertex 0 1 0
  vertex 1 0 0
 endloop
endfacet
facet normal 0 -1 0
 outer loop
  vertex 0 0 0
  vertex 1 0 0
  vertex 0 0 1
 endloop
endfacet
facet normal -1 0 0
 outer loop
  vertex 0 0 0
  vertex 0 0 1
  vertex 0 1 0
 endloop
endfacet
facet normal 1 1 1
 outer loop
  vertex 1 0 0
  vertex 0 1 0
  vertex 0 0 1
 endloop
endfacet
endsolid tet
"""

OBJ = """v 0 0 0
v 2 0 0
v 0 2 0
v 0 0 2
f 1 3 2
f 1 2 4
f 1 4 3
f 2 3 4
"""


def _visual(inner, xyz=(0, 0, 0), rpy=(0, 0, 0), tag="visual", material=""):
    return (f'<{tag}><origin xyz="{xyz[0]} {xyz[1]} {xyz[2]}" rpy="{rpy[0]} {rpy[1]} {rpy[2]}"/>'
            f"<geometry>{inner}</geometry>{material}</{tag}>")


def _arm_with_shapes(link2_shape=None, link1_extra=""):
    """The conftest two-link arm (axes −y, angles from the horizontal) with drawable
    shapes: link 1 a cylinder visual, link 2 a box visual at (D, 0, 0) unless given."""
    I = (0.03, 0.03, 0.03, 0, 0, 0)
    link1 = urdf_link("link1", 2.0, (0.25, 0, 0), I).replace(
        "</link>", _visual(f'<cylinder radius="0.03" length="{L1}"/>', (L1 / 2, 0, 0),
                           (0, math.pi / 2, 0)) + link1_extra + "</link>")
    shape = link2_shape or _visual('<box size="0.3 0.06 0.05"/>', (D, 0, 0), material=(
        '<material name="orange"><color rgba="0.9 0.6 0 1"/></material>'))
    link2 = urdf_link("link2", 1.5, (0.2, 0, 0), (0.02, 0.02, 0.02, 0, 0, 0)).replace(
        "</link>", shape + "</link>")
    return urdf(urdf_link("root"),
                urdf_joint("shoulder", "revolute", "root", "link1", axis=(0, -1, 0)), link1,
                urdf_joint("elbow", "revolute", "link1", "link2", xyz=(L1, 0, 0), axis=(0, -1, 0)),
                link2, urdf_joint("tool_joint", "fixed", "link2", "tool", xyz=(TOOL, 0, 0)),
                urdf_link("tool"))


def _part(scene, name):
    return next(j for j, p in enumerate(scene.parts) if p["name"].startswith(name))


def _rot_y(a):
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, 0, s], [0, 1, 0], [-s, 0, c]])


def _rot_z(a):
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])


def _quat_matrix(x, y, z, w):
    return np.array([[1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
                     [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
                     [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)]])


def test_parts_sit_where_the_planar_arm_closed_form_puts_them(tmp_path):
    # Forward kinematics of the two-link planar arm: Spong, Hutchinson &
    # Vidyasagar, Robot Modeling and Control (2006), §3.3 (recalled from memory):
    # a point at distance d along link 2 is (l1 c1 + d c12, l1 s1 + d s12) in the
    # arm's plane, here x-z of the base with angles from the horizontal; the base
    # places it in the world by (x0, y0) + R_z(θ) p_B.
    robot = make_robot(tmp_path, _arm_with_shapes())
    q1, q2, (x0, y0, th) = 0.7, -1.1, (0.3, -0.2, 0.9)
    q = robot.configuration(base_pose=(x0, y0, th), arm=[q1, q2])
    scene = robot_scene(robot, [q], labels=["a"], title="t")
    mount = np.array(base_doc()["mount"]["xyz"])
    p_B = mount + np.array([L1 * math.cos(q1) + D * math.cos(q1 + q2), 0.0,
                            L1 * math.sin(q1) + D * math.sin(q1 + q2)])
    p_W = np.array([x0, y0, 0.0]) + _rot_z(th) @ p_B
    pose = scene.poses[0, _part(scene, "link2 (visual box)")].astype(float)
    np.testing.assert_allclose(pose[:3], p_W, atol=1e-6)   # float32 in the page
    # the box turns with the arm: R = R_z(θ) R_y(−(q1 + q2)) (axes −y)
    np.testing.assert_allclose(_quat_matrix(*pose[3:7]), _rot_z(th) @ _rot_y(-(q1 + q2)),
                               atol=1e-6)
    assert pose[7] == 1.0
    assert scene.parts[_part(scene, "link2")]["color"] == "#e69900"   # its <material>
    # the wheels spin about their axle: the right wheel frame at (0, −b, r) in the base
    wheel = scene.poses[0, _part(scene, "wheel_right")].astype(float)
    b, r = base_doc()["base"]["half_track"], base_doc()["base"]["wheel_radius"]
    np.testing.assert_allclose(wheel[:3], [x0, y0, 0] + _rot_z(th) @ [0, -b, r], atol=1e-6)


def test_an_arm_without_shapes_is_drawn_as_stretched_segments(tmp_path):
    # no <visual>/<collision>: segments between mount, joint origins and tool; a
    # segment's stretch is the distance between its ends (closed form as above)
    robot = make_robot(tmp_path)
    q1, q2 = 0.4, 0.9
    scene = robot_scene(robot, [robot.configuration(arm=[q1, q2])], labels=["a"], title="t")
    assert "segments" in scene.notes[0]
    seg = [scene.poses[0, j].astype(float) for j, p in enumerate(scene.parts)
           if p["name"].startswith("segment")]
    assert len(seg) == 3                      # mount-shoulder, shoulder-elbow, elbow-tool
    assert seg[0][7] == 0.0                   # the shoulder sits on the mount: hidden
    np.testing.assert_allclose([seg[1][7], seg[2][7]], [L1, TOOL], rtol=1e-6)
    mount = np.array(base_doc()["mount"]["xyz"])
    elbow = mount + L1 * np.array([math.cos(q1), 0, math.sin(q1)])
    tool = elbow + TOOL * np.array([math.cos(q1 + q2), 0, math.sin(q1 + q2)])
    np.testing.assert_allclose(seg[2][:3], (elbow + tool) / 2, atol=1e-6)
    # the unit cylinder's z axis runs along the segment
    np.testing.assert_allclose(_quat_matrix(*seg[2][3:7])[:, 2], (tool - elbow) / TOOL,
                               atol=1e-6)


def test_meshes_load_and_missing_or_bad_shapes_fall_back_with_a_note(tmp_path):
    trimesh = pytest.importorskip("trimesh")
    meshes = tmp_path / "pkg" / "meshes"
    meshes.mkdir(parents=True)
    (meshes / "tet.stl").write_text(STL)
    (meshes / "tet.obj").write_text(OBJ)
    trimesh.creation.box(extents=(0.1, 0.2, 0.3)).export(meshes / "box.dae")
    urdf_dir = tmp_path / "pkg" / "urdf"
    urdf_dir.mkdir()
    extra = (_visual('<mesh filename="package://pkg/meshes/tet.stl" scale="0.1 0.2 0.3"/>')
             + _visual('<mesh filename="../meshes/tet.obj"/>')
             + _visual('<mesh filename="package://pkg/meshes/box.dae"/>'))
    missing = (_visual('<mesh filename="package://pkg/meshes/gone.stl"/>')
               + _visual('<sphere radius="0.05"/>', tag="collision"))
    bad = _visual('<box size="0.1 -2 0.1"/>')
    text = _arm_with_shapes(link2_shape=missing, link1_extra=extra + bad)
    (urdf_dir / "arm.urdf").write_text(text)
    found = read_shapes(urdf_dir / "arm.urdf")
    kinds = [(s.link, s.source, s.kind) for s in found.shapes]
    assert kinds == [("link1", "visual", "cylinder"), ("link1", "visual", "mesh"),
                     ("link1", "visual", "mesh"), ("link1", "visual", "mesh"),
                     ("link2", "collision", "sphere")]
    assert any("gone.stl" in n and "link2" in n for n in found.notes)
    assert any("<box>" in n and "-2" in n for n in found.notes)
    doc = base_doc(robot__arm_urdf="urdf/arm.urdf")
    robot = opspace.load_robot(write_toml(tmp_path / "pkg" / "robot.toml", doc))
    scene = robot_scene(robot, [robot.neutral()], labels=["a"], title="t")
    mesh = [g for g in scene.geometries if g["kind"] == "mesh"]
    assert len(mesh) == 3
    import base64
    V = np.frombuffer(base64.b64decode(mesh[0]["positions"]), np.float32).reshape(-1, 3)
    # the tetrahedron's corners, each scaled by <mesh scale>
    np.testing.assert_allclose(sorted(map(tuple, V)), sorted(
        [(0, 0, 0), (0.1, 0, 0), (0, 0.2, 0), (0, 0, 0.3)]), atol=1e-7)
    F = np.frombuffer(base64.b64decode(mesh[0]["indices"]), np.uint16)
    assert F.size == 12
    V = np.frombuffer(base64.b64decode(mesh[2]["positions"]), np.float32).reshape(-1, 3)
    np.testing.assert_allclose(V.max(axis=0) - V.min(axis=0), [0.1, 0.2, 0.3], atol=1e-6)
    # COLLADA 1.4.1 <asset><unit meter>: the same box written in millimetres
    from opspace.report._meshes import load_mesh
    mm = tmp_path / "mm.dae"
    trimesh.creation.box(extents=(100, 200, 300)).export(tmp_path / "plain.dae")
    mm.write_text((tmp_path / "plain.dae").read_text().replace(
        "<asset>", '<asset><unit meter="0.001" name="millimetre"/>'))
    V = load_mesh(mm)[0]
    np.testing.assert_allclose(V.max(axis=0) - V.min(axis=0), [0.1, 0.2, 0.3], atol=1e-6)


def _page(tmp_path, scene, name):
    page = Page("view")
    page.heading("3-D view")
    page.raw(scene_html(scene, "A robot."))
    path = tmp_path / name
    path.write_text(page.render(), encoding="utf-8")
    return path


def test_scene_pages_draw_offline_in_headless_chromium(tmp_path):
    require_browser()
    robot = make_robot(tmp_path, _arm_with_shapes())
    qs = [robot.configuration(arm=[a, -a]) for a in (0.0, 0.6, 1.2)]
    com = np.array([robot.com(q) for q in qs])
    poses = robot_scene(robot, qs, labels=["low", "mid", "high"], title="poses",
                        support=[[0.3, 0.0], [0.0, 0.25], [-0.3, 0.0], [0.0, -0.25]],
                        markers=[Marker("COM", "sphere", 0.03, "#D55E00", com)])
    moving = robot_scene(robot, [robot.configuration(base_pose=(0.1 * k, 0, 0), arm=[0.1 * k, 0])
                                 for k in range(8)], labels=[str(k) for k in range(8)],
                         times=np.arange(8) * 0.1, title="run")
    for scene, name in ((poses, "poses.html"), (moving, "run.html")):
        view = open_view3d(_page(tmp_path, scene, name),
                           screenshot=tmp_path / name.replace(".html", ".png"))
        assert view.ok, view.problems()
        v = view.evaluated
        assert v["state"] == "ready" and v["parts"] == len(scene.parts)
        assert v["frames"] == len(scene.labels)
        assert v["drawn"] > 0.01, v          # the robot covers part of the canvas
        assert v["empty"] < 1e-3, v          # and nothing but it does


def test_a_mimic_finger_is_drawn_where_its_leader_puts_it(tmp_path):
    # URDF <mimic>: follower = multiplier × leader + offset (the URDF joint
    # specification); the palm by the planar closed form as above
    from test_mimic import K, O, gripper_urdf

    box = _visual('<box size="0.02 0.01 0.04"/>')
    text = gripper_urdf().replace('<link name="fa">', f'<link name="fa">{box}').replace(
        '<link name="fb">', f'<link name="fb">{box}')
    robot = make_robot(tmp_path, text)
    q1, q2, qa = 0.3, -0.8, 0.03
    scene = robot_scene(robot, [robot.configuration(arm=[q1, q2, qa])], labels=["a"], title="t")
    mount = np.array(base_doc()["mount"]["xyz"])
    palm = mount + 0.4 * np.array([math.cos(q1), 0, math.sin(q1)])
    R = _rot_y(-(q1 + q2))
    for link, y in (("fa", 0.02 + qa), ("fb", -0.02 + K * qa + O)):
        pose = scene.poses[0, _part(scene, f"{link} (visual box)")].astype(float)
        np.testing.assert_allclose(pose[:3], palm + R @ [0.05, y, 0.0], atol=1e-6)


def test_a_fine_mesh_is_simplified_and_the_page_says_so(tmp_path):
    trimesh = pytest.importorskip("trimesh")
    from opspace.report._meshes import load_mesh

    fine = trimesh.creation.icosphere(subdivisions=5, radius=0.1)      # 20480 triangles
    fine.export(tmp_path / "ball.stl")
    V, F, _, note = load_mesh(tmp_path / "ball.stl", max_triangles=6000)
    assert len(F) == 12 and "bounding box" in note       # its hull is as fine: a box
    np.testing.assert_allclose(V.max(axis=0) - V.min(axis=0), [0.2] * 3, rtol=1e-3)
    cup = trimesh.creation.annulus(r_min=0.05, r_max=0.1, height=0.05, sections=1000)
    cup.export(tmp_path / "ring.stl")                     # not convex: the hull is coarser
    V, F, _, note = load_mesh(tmp_path / "ring.stl", max_triangles=6000)
    assert "convex hull" in note and len(F) <= 6000
    assert np.linalg.norm(V[:, :2], axis=1).max() == pytest.approx(0.1, rel=1e-3)


def test_a_urdf_that_draws_the_chassis_and_a_wheel_replaces_their_drawing(tmp_path):
    # shapes on links that are not the arm's (a whole-robot URDF's base link and
    # wheel) take the place of the chassis box and that wheel's cylinder
    from opspace.description import LinkShape, UrdfShapes

    robot = make_robot(tmp_path, _arm_with_shapes())
    plain = robot_scene(robot, [robot.neutral()], labels=["a"], title="t")
    names = [p["name"] for p in plain.parts]
    assert "chassis" in names and "wheel_left" in names
    own = UrdfShapes((LinkShape("base", "visual", "box", (0.6, 0.4, 0.2), (0, 0, 0.2)),
                      LinkShape("wheel_left", "visual", "cylinder", (0.1, 0.04))), ())
    scene = robot_scene(robot, [robot.neutral()], labels=["a"], title="t", shapes=own)
    names = [p["name"] for p in scene.parts]
    assert "chassis" not in names and "wheel_left" not in names and "wheel_right" in names
    assert "base (visual box)" in names and "wheel_left (visual cylinder)" in names
    # the arm's own root link rides on the base joint too, but is no chassis
    root = UrdfShapes((LinkShape("root", "visual", "sphere", (0.05,)),), ())
    names = [p["name"] for p in robot_scene(robot, [robot.neutral()], labels=["a"], title="t",
                                            shapes=root).parts]
    assert "chassis" in names and "root (visual sphere)" in names
