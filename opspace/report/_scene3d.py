"""The 3-D scene of a robot for the reports: what to draw and where, per frame.

Geometry, in order of preference, per arm link: the URDF's <visual> meshes
(STL, OBJ, DAE through trimesh) or primitives (box, cylinder, sphere), else
its <collision> ones; an arm with no drawable link is drawn as segments
between its joint origins.  The base is drawn from the description (chassis
outline, wheels of the given radius, casters) and the support polygon lies on
the ground under it.

Every placement comes from the robot model's forward kinematics
(`MobileManipulator.frame_placements`): a part attached to frame F with the
fixed offset X_F_part sits at X_W_part = X_W_F · X_F_part.  A segment
between the origins p_a, p_b of two frames is a unit cylinder along z placed
at (p_a + p_b)/2, turned so that z runs along p_b − p_a and stretched to
|p_b − p_a|.  Nothing physical is computed here.

A pose is stored as 8 numbers: position (m), unit quaternion (x, y, z, w),
and a stretch along the part's z (0 hides the part in that frame).
"""

from __future__ import annotations

import base64
import math
from dataclasses import dataclass

import numpy as np
import pinocchio as pin

__all__ = ["Marker", "Scene3D", "robot_scene", "scene_html"]

# Okabe & Ito, "Color Universal Design" (2008; hex values recalled from memory),
# the palette of opspace.plots, and greys for the structure.
_ARM = ("#5b7fa6", "#8a9bb0")
_CHASSIS, _WHEEL, _CASTER, _SPOKE = "#b9bec6", "#3a3a3a", "#6b6b6b", "#E69F00"
_SUPPORT = "#009E73"
#: stretch value that hides a part in a frame
HIDDEN = 0.0


@dataclass(frozen=True)
class Marker:
    """A point drawn per frame: name, kind "sphere" or "box", size m (radius
    or edge), colour "#rrggbb", positions (n_frames, 3) m in the world (a row
    of nan hides it in that frame)."""

    name: str
    kind: str
    size: float
    color: str
    positions: np.ndarray


@dataclass(frozen=True)
class Scene3D:
    """A scene ready for the page.

    title : str; labels : one per frame; times : s per frame or None (poses);
    geometries : dicts (kind and sizes; meshes as base64 float32 / uint32);
    parts : dicts (name, geometry index, colour, opacity);
    poses : (n_frames, n_parts, 8) float32, see the module docstring;
    notes : what was drawn from what, and what was left out.
    """

    title: str
    labels: tuple
    times: tuple | None
    geometries: tuple
    parts: tuple
    poses: np.ndarray
    notes: tuple

    def to_dict(self):
        """JSON-ready dict (the page's data)."""
        return {"title": self.title, "labels": list(self.labels),
                "times": None if self.times is None else [round(t, 4) for t in self.times],
                "geometries": list(self.geometries), "parts": list(self.parts),
                "poses": _b64(np.ascontiguousarray(self.poses, np.float32)),
                "shape": list(self.poses.shape), "notes": list(self.notes),
                "follow": 0}  # the base frame (the first part): an animation's camera follows it


def _b64(a):
    return base64.b64encode(np.ascontiguousarray(a).tobytes()).decode("ascii")


def _hex(rgba):
    return "#" + "".join(f"{int(round(255 * min(max(c, 0.0), 1.0))):02x}" for c in rgba[:3])


class _Builder:
    """Collects geometries and parts; each part knows how to place itself."""

    def __init__(self):
        self.geometries, self.parts, self.placers, self.notes = [], [], [], []
        self._meshes = {}
        self.triangles = 0   # kept by the meshes so far

    def geometry(self, g):
        self.geometries.append(g)
        return len(self.geometries) - 1

    def part(self, name, geometry, color, placer, opacity=1.0):
        self.parts.append({"name": name, "geometry": geometry, "color": color,
                           "opacity": opacity})
        self.placers.append(placer)

    def mesh(self, path, scale):
        """Geometry index of a mesh file (loaded once), or ValueError."""
        from ._meshes import MAX_MESH_TRIANGLES, MAX_PAGE_TRIANGLES, load_mesh

        key = (str(path), tuple(scale))
        if key not in self._meshes:
            left = max(12, MAX_PAGE_TRIANGLES - self.triangles)
            V, F, rgba, note = load_mesh(path, scale, max_triangles=min(MAX_MESH_TRIANGLES, left))
            self.triangles += len(F)
            if note:
                self.notes.append(note)
            index_type = "uint16" if len(V) < 65536 else "uint32"
            self._meshes[key] = (self.geometry({
                "kind": "mesh", "positions": _b64(V), "indices": _b64(F.astype(index_type)),
                "index_type": index_type}), rgba)
        return self._meshes[key]


def _attached(frame_id, X_F_part):
    """Placer of a part fixed to a frame: X_W_part = X_W_F · X_F_part."""
    def place(X):
        M = X[frame_id] * X_F_part
        return (*M.translation, *pin.Quaternion(M.rotation).coeffs(), 1.0)
    return place


def _segment(a, b):
    """Placer of a unit cylinder (axis z) from frame a's origin point to b's.
    a, b: (frame id, point in that frame)."""
    def place(X):
        pa, pb = X[a[0]].act(np.asarray(a[1], float)), X[b[0]].act(np.asarray(b[1], float))
        d = pb - pa
        length = float(np.linalg.norm(d))
        if length < 1e-9:
            return (*pa, 0.0, 0.0, 0.0, 1.0, HIDDEN)
        quat = pin.Quaternion.FromTwoVectors(np.array([0.0, 0.0, 1.0]), d / length)
        return (*(0.5 * (pa + pb)), *quat.coeffs(), length)
    return place


def _frame(robot, name, kind=pin.FrameType.BODY):
    model = robot.model
    if not model.existFrame(name, kind):
        return None
    return model.getFrameId(name, kind)


def _se3(xyz, rpy=(0.0, 0.0, 0.0)):
    return pin.SE3(pin.rpy.rpyToMatrix(np.asarray(rpy, float)), np.asarray(xyz, float))


def _drawn_joints(robot, shapes):
    """Joints (ids) that carry a link the URDF draws, other than the arm's own
    links: a whole-robot URDF that draws its chassis or wheels replaces the
    drawing from the description (the arm's root link also rides on the base
    joint, but it is not the chassis)."""
    arm = getattr(robot.description, "arm_model", None)
    arm_links = set() if arm is None else {f.name for f in arm.frames}
    out = set()
    for s in shapes.shapes:
        fid = _frame(robot, s.link)
        if fid is not None and s.link not in arm_links:
            out.add(robot.model.frames[fid].parentJoint)
    return out


def _base_parts(b, robot, support, drawn):
    """Anchor (hidden; the camera follows it), chassis, wheels, casters and the
    support polygon, in the base frame; the chassis and each wheel only when
    the URDF does not draw them (joints in `drawn`)."""
    r, half = robot.wheel_radius, robot.half_track
    base = _frame(robot, "base")
    anchor = b.geometry({"kind": "sphere", "radius": 1e-3})
    b.part("base frame", anchor, "#000000",
           lambda X: (*X[base].translation, *pin.Quaternion(X[base].rotation).coeffs(), HIDDEN))
    base_drawn = robot.model.frames[base].parentJoint in drawn
    fp = robot.description.base.footprint
    casters = [c.position for c in robot.contacts if not c.driven]
    if fp is None:  # no outline given: a plate over the contacts, up to the mount
        P = np.array([c.position for c in robot.contacts])
        fp = (P[:, 0].min() - r, P[:, 0].max() + r, -half + 0.6 * r, half - 0.6 * r,
              max(robot.description.mount_xyz[2], 2.2 * r))
    x0, x1, y0, y1, top = fp[:5]
    bottom = min(0.5 * r, 0.5 * top)
    if not base_drawn:
        g = b.geometry({"kind": "box", "size": [x1 - x0, y1 - y0, top - bottom]})
        b.part("chassis", g, _CHASSIS, _attached(base, _se3(((x0 + x1) / 2, (y0 + y1) / 2,
                                                              (top + bottom) / 2))), opacity=0.45)
    width = min(0.5 * r, 0.35 * half)
    tyre = b.geometry({"kind": "cylinder", "radius": r, "length": width})
    spoke = b.geometry({"kind": "box", "size": [1.7 * r, 1.04 * width, 0.16 * r]})
    axle_to_z = _se3((0.0, 0.0, 0.0), (math.pi / 2, 0.0, 0.0))
    for name in ("wheel_right", "wheel_left"):
        fid = _frame(robot, name)
        if fid is None or robot.model.frames[fid].parentJoint in drawn:
            continue
        b.part(name, tyre, _WHEEL, _attached(fid, axle_to_z))
        b.part(f"{name} marker", spoke, _SPOKE, _attached(fid, pin.SE3.Identity()))
    rc = 0.3 * r
    ball = b.geometry({"kind": "sphere", "radius": rc})
    for k, (x, y) in enumerate(casters):
        b.part(f"caster_{k + 1}", ball, _CASTER, _attached(base, _se3((x, y, rc))))
    if support is not None:
        V = np.asarray(support, float)
        g = b.geometry({"kind": "polygon", "points": np.round(V, 5).tolist()})
        b.part("support polygon", g, _SUPPORT, _attached(base, _se3((0.0, 0.0, 0.002))),
               opacity=0.6)


def _arm_shapes(b, robot, found):
    """Parts from the URDF's shapes (UrdfShapes); returns how many were drawn."""
    b.notes += list(found.notes)
    links, drawn = [], 0
    for s in found.shapes:
        fid = _frame(robot, s.link)
        if fid is None:
            b.notes.append(f"link '{s.link}' is not a frame of the model; its {s.source} "
                           f"{s.kind} is not drawn")
            continue
        if s.link not in links:
            links.append(s.link)
        color = _ARM[links.index(s.link) % 2] if s.rgba is None else _hex(s.rgba)
        opacity = 1.0 if s.rgba is None else max(0.15, float(s.rgba[3]))
        if s.kind == "mesh":
            try:
                g, own = b.mesh(s.mesh, s.size)
            except ValueError as exc:
                b.notes.append(f"link '{s.link}' {s.source} mesh not drawn: {exc}")
                continue
            if s.rgba is None and own is not None:
                color, opacity = _hex(own), max(0.15, own[3])
        elif s.kind == "box":
            g = b.geometry({"kind": "box", "size": list(s.size)})
        elif s.kind == "cylinder":
            g = b.geometry({"kind": "cylinder", "radius": s.size[0], "length": s.size[1]})
        else:
            g = b.geometry({"kind": "sphere", "radius": s.size[0]})
        b.part(f"{s.link} ({s.source} {s.kind})", g, color,
               _attached(fid, _se3(s.xyz, s.rpy)), opacity=opacity)
        drawn += 1
    return drawn


def _arm_segments(b, robot, reach):
    """The arm as segments: mount, each joint origin, the tool frame."""
    base = _frame(robot, "base")
    chain = [(base, robot.description.mount_xyz)]
    chain += [(_frame(robot, n, pin.FrameType.JOINT), (0.0, 0.0, 0.0))
              for n in robot.arm_joint_names]
    chain.append((robot.tool_frame_id, (0.0, 0.0, 0.0)))
    radius = min(max(0.02 * reach, 0.004), 0.04)
    rod = b.geometry({"kind": "cylinder", "radius": radius, "length": 1.0})
    knob = b.geometry({"kind": "sphere", "radius": 1.5 * radius})
    for k in range(len(chain) - 1):
        b.part(f"segment {k + 1}", rod, _ARM[k % 2], _segment(chain[k], chain[k + 1]))
    for k, (fid, p) in enumerate(chain):
        b.part(f"joint {k}", knob, "#444444", _attached(fid, _se3(p)))


def _marker_parts(b, markers):
    placers = []
    for m in markers:
        g = b.geometry({"kind": "sphere", "radius": m.size} if m.kind == "sphere"
                       else {"kind": "box", "size": [m.size] * 3})
        b.part(m.name, g, m.color, None)
        b.parts[-1]["marker"] = True
        placers.append(np.asarray(m.positions, float))
    return placers


def robot_scene(robot, qs, *, labels, title, times=None, support=None, markers=(),
                shapes=None):
    """The scene of `robot` at each configuration of `qs`.

    Parameters
    ----------
    robot : MobileManipulator
    qs : (n_frames, model.nq)   full configurations (base pose, wheels, arm)
    labels : n_frames str       what each frame shows
    title : str
    times : (n_frames,) s, optional   a time axis (animation with a slider)
    support : (k, 2) m, optional      support polygon in the base frame
    markers : sequence of Marker      points placed per frame (payload, COM)
    shapes : UrdfShapes, optional     the URDF's shapes (default: read from the file)

    Returns
    -------
    Scene3D
    """
    qs = np.atleast_2d(np.asarray(qs, float))
    if len(labels) != len(qs) or (times is not None and len(times) != len(qs)):
        raise ValueError(f"`labels` and `times` need one entry per configuration ({len(qs)})")
    if shapes is None:
        from ..description import read_shapes

        d = robot.description
        shapes = read_shapes(d.arm_urdf, package_paths=getattr(d, "package_paths", None))
    b = _Builder()
    _base_parts(b, robot, support, _drawn_joints(robot, shapes))
    if _arm_shapes(b, robot, shapes) == 0:
        pts = [robot.frame_placements(qs[0], [robot.tool_frame_id])[0].translation]
        reach = float(np.linalg.norm(pts[0] - np.r_[robot.description.mount_xyz]))
        _arm_segments(b, robot, max(reach, robot.wheel_radius))
        b.notes.insert(0, "the arm's URDF has no drawable <visual> or <collision> "
                          "geometry: its links are drawn as segments between joint origins")
    n_body = len(b.placers)
    marks = _marker_parts(b, markers)
    frame_ids = list(range(len(robot.model.frames)))  # X[i] is frame i's placement
    poses = np.zeros((len(qs), len(b.parts), 8), np.float32)
    for k, q in enumerate(qs):
        X = robot.frame_placements(q, frame_ids)
        for j in range(n_body):
            poses[k, j] = b.placers[j](X)
        for j, P in enumerate(marks):
            p = P[k]
            poses[k, n_body + j] = ((*p, 0, 0, 0, 1, 1.0) if np.all(np.isfinite(p))
                                    else (0, 0, 0, 0, 0, 0, 1, HIDDEN))
    return Scene3D(title=title, labels=tuple(labels),
                   times=None if times is None else tuple(float(t) for t in times),
                   geometries=tuple(b.geometries), parts=tuple(b.parts), poses=poses,
                   notes=tuple(b.notes))


_CSS = """
.view3d { margin: 1em 0; border: 1px solid #ddd; border-radius: 6px; overflow: hidden; }
.view3d canvas { display: block; width: 100%; touch-action: none; cursor: grab; }
.view3d .v3d-bar { display: flex; gap: 0.6em; align-items: center; padding: 0.45em 0.7em;
                   background: #f5f5f5; font-size: 0.9em; flex-wrap: wrap; }
.view3d .v3d-bar input[type=range] { flex: 1; min-width: 12em; }
.view3d button { font: inherit; padding: 0.15em 0.7em; border: 1px solid #bbb;
                 border-radius: 4px; background: #fff; cursor: pointer; }
.view3d button.on { background: #0072B2; color: #fff; border-color: #0072B2; }
.view3d .v3d-label { font-weight: 600; }
"""


def _asset(name):
    from importlib.resources import files

    return files(__package__).joinpath(name).read_text(encoding="utf-8")


def _script(text):
    """Inline script text: a '</' would end the <script> element early."""
    return text.replace("</", "<\\/")


def scene_html(scene, caption):
    """The HTML block of a scene (str): the canvas, a pose selector or a time
    slider, the caption and notes, the data and the viewer (three.js inlined:
    the page needs no network and no server)."""
    import html
    import json

    if scene.times is None:
        controls = "".join(f"<button type=\"button\">{html.escape(label)}</button>"
                           for label in scene.labels)
        bar = f'<span>Pose:</span>{controls}<span class="v3d-label"></span>'
    else:
        bar = ('<button type="button">Play</button><input type="range" min="0" value="0" '
               'step="1" aria-label="time"><span class="v3d-label"></span>')
    data = json.dumps(scene.to_dict(), separators=(",", ":"), allow_nan=False)
    notes = "".join(f"<li>{html.escape(n)}</li>" for n in scene.notes)
    return (f"<style>{_CSS}</style>"
            f'<div class="view3d" data-view3d="loading"><canvas></canvas>'
            f'<div class="v3d-bar">{bar}</div>'
            f'<script type="application/json">{_script(data)}</script></div>'
            f"<figcaption>{html.escape(caption)} Drag to turn, scroll to zoom, right-drag "
            f"to pan.</figcaption>"
            + (f'<ul class="small">{notes}</ul>' if notes else "")
            + f"<script>{_script(_asset('_three.min.js'))}</script>"
            f"<script>{_script(_asset('_view3d.js'))}</script>")
