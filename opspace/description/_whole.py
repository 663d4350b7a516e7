"""A whole-robot URDF as the description: the base, the wheels, the casters and
the arm's mount derived from the one file a robot software stack already has.

The base frame B (DESIGN.md) is placed from the two wheel joints: y_B from the
right wheel centre to the left one, z_B the URDF root link's z (up), x_B =
y_B × z_B, origin on the ground (one wheel radius below the axle) under the
midpoint of the wheel centres.  Every link is placed at the zero position of
every joint.

Chassis: the links rigidly fixed to the root link, plus the sub-trees of
moving joints that are neither wheels nor the arm (caster swivels, a head),
held at zero.  Their inertials merge into one body (any dynamics text, e.g.
Meriam & Kraige, Engineering Mechanics: Dynamics, the parallel-axis theorem):

    m = Σ m_i,   c = Σ m_i c_i / m,
    I_c = Σ [R_i I_i R_iᵀ + m_i (|d_i|² E − d_i d_iᵀ)],   d_i = c_i − c.

Wheels: each wheel joint's child and its fixed links merged the same way about
the wheel centre; spin inertia aᵀ I a about the axle a, diameter inertia the
mean of the two moments about axes ⊥ a.  The arm: the sub-tree of the first
moving joint on the path from the root to the tool frame, cut out as its own
URDF rooted at the arm root link (its inertial counted with the chassis).
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ._toml import inertia_matrix

__all__ = ["Derived", "WholeRobot", "matrix_rpy", "rpy_matrix"]

MOVING = ("revolute", "continuous", "prismatic")


@dataclass(frozen=True)
class Derived:
    """One value of the description taken from the URDF (or given): `key` as in
    the TOML (``[base] mass``), `value` as printed, `source` in words."""

    key: str
    value: str
    source: str


def rpy_matrix(rpy):
    """R = Rz(yaw) Ry(pitch) Rx(roll), URDF's fixed-axis roll-pitch-yaw."""
    r, p, y = rpy
    cr, sr, cp, sp, cy, sy = (math.cos(r), math.sin(r), math.cos(p), math.sin(p),
                              math.cos(y), math.sin(y))
    return np.array([[cy * cp, cy * sp * sr - sy * cr, cy * sp * cr + sy * sr],
                     [sy * cp, sy * sp * sr + cy * cr, sy * sp * cr - cy * sr],
                     [-sp, cp * sr, cp * cr]])


def matrix_rpy(R):
    """(roll, pitch, yaw) with rpy_matrix(rpy) = R (yaw = 0 at pitch ±π/2)."""
    pitch = math.atan2(-R[2, 0], math.hypot(R[0, 0], R[1, 0]))
    if math.hypot(R[0, 0], R[1, 0]) < 1e-12:       # R = Ry(±π/2) Rx(roll): R[1,1] = cos roll
        return math.atan2(-R[1, 2], R[1, 1]), pitch, 0.0
    return math.atan2(R[2, 1], R[2, 2]), pitch, math.atan2(R[1, 0], R[0, 0])


def _origin(element):
    """4x4 transform of an <origin> child (identity if absent)."""
    X = np.eye(4)
    o = element.find("origin") if element is not None else None
    if o is not None:
        X[:3, :3] = rpy_matrix([float(v) for v in o.get("rpy", "0 0 0").split()])
        X[:3, 3] = [float(v) for v in o.get("xyz", "0 0 0").split()]
    return X


@dataclass(frozen=True)
class _Joint:
    name: str
    kind: str
    parent: str
    child: str
    X: np.ndarray      # parent link -> child link at zero joint position
    axis: np.ndarray   # in the child (joint) frame


class WholeRobot:
    """The URDF's tree at zero joint positions, in its root link's frame.

    Parameters
    ----------
    root : xml Element   the URDF's <robot>
    file : str           the URDF's name (messages)
    toml : str           the description's name (messages)
    """

    def __init__(self, root, file, toml):
        self.root_el, self.file, self.toml = root, file, toml
        self.links = {el.get("name"): el for el in root.findall("link")}
        self.joints, self.parent_joint, self.children = {}, {}, {n: [] for n in self.links}
        for el in root.findall("joint"):
            parent, child = el.find("parent"), el.find("child")
            axis = el.find("axis")
            j = _Joint(el.get("name"), el.get("type"), parent.get("link"), child.get("link"),
                       _origin(el), np.array([float(v) for v in (axis.get("xyz", "1 0 0")
                                              if axis is not None else "1 0 0").split()]))
            self.joints[j.name] = j
            self.parent_joint[j.child] = j
            self.children[j.parent].append(j)
        roots = [n for n in self.links if n not in self.parent_joint]
        if len(roots) != 1:
            raise ConfigError(f"{file}: the URDF must have one root link, got {roots}")
        self.root = roots[0]
        while len(self.children[self.root]) == 1 and \
                self.children[self.root][0].kind in ("floating", "planar"):
            self.root = self.children[self.root][0].child   # a "world" link above the base
        self.X = {}                                 # root frame <- link frame
        stack = [(self.root, np.eye(4))]
        while stack:
            name, X = stack.pop()
            self.X[name] = X
            stack += [(j.child, X @ j.X) for j in self.children[name]]

    # ------------------------------------------------------------ structure
    def subtree(self, link):
        """Links of the sub-tree rooted at `link` (itself first)."""
        out, queue = [], [link]                    # breadth first, in the file's order
        while queue:
            name = queue.pop(0)
            out.append(name)
            queue += [j.child for j in self.children[name]]
        return out

    def fixed_group(self, link):
        """`link` and the links rigidly fixed to it below (fixed joints only)."""
        out, queue = [], [link]
        while queue:
            name = queue.pop(0)
            out.append(name)
            queue += [j.child for j in self.children[name] if j.kind == "fixed"]
        return out

    def path_up(self, link):
        """Joints from `link` up to the root, nearest first."""
        out = []
        while link in self.parent_joint:
            out.append(self.parent_joint[link])
            link = out[-1].parent
        return out

    def link_of(self, frame, where):
        """The link named `frame`, or the child link of a joint named `frame`."""
        if frame in self.links:
            return frame
        if frame in self.joints:
            return self.joints[frame].child
        raise ConfigError(f"{where} '{frame}' is not a link or joint of {self.file}")

    # ------------------------------------------------------------ inertia
    def inertial(self, link, X_F_root):
        """(m, c, I_c) of a link's <inertial> in frame F (X_F_root: F <- root)."""
        el = self.links[link].find("inertial")
        if el is None:
            return 0.0, np.zeros(3), np.zeros((3, 3))
        mass = float(el.find("mass").get("value"))
        ie = el.find("inertia")
        I = inertia_matrix([float(ie.get(k, "0")) for k in ("ixx", "iyy", "izz", "ixy", "ixz",
                                                            "iyz")]) if ie is not None else 0.0
        X = X_F_root @ self.X[link] @ _origin(el)
        return mass, X[:3, 3].copy(), X[:3, :3] @ I @ X[:3, :3].T

    def merged(self, links, X_F_root):
        """(m, c, I_c): the links' inertials merged in frame F (module docstring)."""
        parts = [self.inertial(n, X_F_root) for n in links]
        m = sum(p[0] for p in parts)
        if m <= 0.0:
            return 0.0, np.zeros(3), np.zeros((3, 3))
        c = sum(p[0] * p[1] for p in parts) / m
        I = np.zeros((3, 3))
        for mi, ci, Ii in parts:
            d = ci - c
            I += Ii + mi * (d.dot(d) * np.eye(3) - np.outer(d, d))
        return m, c, I

    # ------------------------------------------------------------ wheels
    def wheel_joints(self, names, where):
        """(right, left) joints, checked: moving about an axis, coaxial, horizontal."""
        joints = []
        for name in names:
            j = self.joints.get(name)
            if j is None:
                raise ConfigError(f"{where}: '{name}' is not a joint of {self.file}")
            if j.kind not in ("continuous", "revolute"):
                raise ConfigError(f"{where}: joint '{name}' of {self.file} is {j.kind}; a wheel "
                                  f"joint must be continuous or revolute")
            joints.append(j)
        (pr, ar), (pl, al) = (self.axle(j) for j in joints)
        d = pl - pr
        if np.linalg.norm(d) < 1e-9 or np.linalg.norm(np.cross(ar, al)) > 1e-6 \
                or np.linalg.norm(np.cross(ar, d / np.linalg.norm(d))) > 1e-6:
            raise ConfigError(f"{where}: wheel joints '{names[0]}' and '{names[1]}' of "
                              f"{self.file} are not coaxial (axes {_v(ar)} and {_v(al)}, "
                              f"centres {_v(pr)} and {_v(pl)} m in link '{self.root}')")
        if abs(d[2]) > 1e-9 * max(1.0, np.linalg.norm(d)):
            raise ConfigError(f"{where}: the axle of '{names[0]}' and '{names[1]}' of "
                              f"{self.file} is not horizontal in root link '{self.root}' "
                              f"(z up): centres {_v(pr)} and {_v(pl)} m")
        return joints

    def axle(self, joint):
        """(centre, unit axis) of a joint in the root frame."""
        X = self.X[joint.child]
        a = X[:3, :3] @ joint.axis
        return X[:3, 3].copy(), a / np.linalg.norm(a)

    def wheel_radius(self, joint):
        """(radius, source) from the wheel's collision cylinder or sphere, or None."""
        for link in self.fixed_group(joint.child):
            for col in self.links[link].findall("collision"):
                for shape in ("cylinder", "sphere"):
                    g = col.find(f"geometry/{shape}")
                    if g is not None and g.get("radius"):
                        return (float(g.get("radius")),
                                f"link '{link}' <collision> <{shape} radius>")
        return None


def _v(x):
    return "[" + ", ".join(f"{float(v):.4g}" for v in x) + "]"


def base_frame(tree, right, left, radius):
    """X_B_root (4x4): the base frame placed from the wheel joints (module doc)."""
    (pr, _), (pl, _) = tree.axle(right), tree.axle(left)
    y = (pl - pr) / np.linalg.norm(pl - pr)
    z = np.array([0.0, 0.0, 1.0])
    x = np.cross(y, z)
    X_root_B = np.eye(4)
    X_root_B[:3, :3] = np.column_stack([x, y, z])
    X_root_B[:3, 3] = (pr + pl) / 2 - radius * z
    return np.linalg.inv(X_root_B)


def wheel_inertia(tree, joint, X_B_root):
    """(mass, spin_inertia, diameter_inertia, links) of one wheel about its centre."""
    links = tree.subtree(joint.child)
    m, c, I_c = tree.merged(links, X_B_root)
    centre, a = tree.axle(joint)
    R = X_B_root[:3, :3]
    d = c - (X_B_root[:3, :3] @ centre + X_B_root[:3, 3])
    I_o = I_c + m * (d.dot(d) * np.eye(3) - np.outer(d, d))   # about the wheel centre
    a = R @ a
    u = np.cross(a, [0.0, 0.0, 1.0])
    u /= np.linalg.norm(u)
    w = np.cross(a, u)
    return m, float(a @ I_o @ a), float((u @ I_o @ u + w @ I_o @ w) / 2), links


def arm_cut(tree, tool, arm_root, chassis, where):
    """(entry joint, arm root link, path links): the arm's first moving joint on
    the way from the root to the tool's link, and the chassis link the arm is
    cut at (given, or the entry joint's parent)."""
    link = tree.link_of(tool, f"{where} tool_frame")
    path = tree.path_up(link)
    moving = [j for j in path if j.kind in MOVING]
    if not moving:
        raise ConfigError(f"{where} tool_frame '{tool}' is rigidly fixed to the base link "
                          f"'{tree.root}' of {tree.file}: no arm joint between them")
    entry = moving[-1]
    if entry.parent not in chassis:
        raise ConfigError(f"{where} tool_frame '{tool}' hangs from joint '{entry.name}', "
                          f"whose parent '{entry.parent}' is not fixed to the base")
    if arm_root is None:
        return entry, entry.parent, []
    if arm_root not in tree.links:
        raise ConfigError(f"{where} arm_root '{arm_root}' is not a link of {tree.file}")
    above = [j.parent for j in tree.path_up(entry.parent)]
    if arm_root != entry.parent and arm_root not in above:
        raise ConfigError(f"{where} tool_frame '{tool}' is not under the arm: arm_root "
                          f"'{arm_root}' is not above its first joint '{entry.name}'")
    between = [entry.parent] + above[:above.index(arm_root)] if arm_root != entry.parent else []
    return entry, arm_root, between


def arm_text(tree, entry, arm_root, between, name):
    """URDF text of the arm alone: the arm root and the fixed links down to the
    entry joint (inertials dropped: they count with the chassis), then the
    entry joint's sub-tree as written."""
    out = ET.Element("robot", {"name": name})
    for link in [arm_root] + between:
        el = ET.SubElement(out, "link", {"name": link})
        for child in tree.links[link]:
            if child.tag != "inertial":
                el.append(child)
    for link in between:
        out.append(_joint_el(tree, tree.parent_joint[link].name))
    out.append(_joint_el(tree, entry.name))
    for link in tree.subtree(entry.child):
        out.append(tree.links[link])
        for j in tree.children[link]:
            out.append(_joint_el(tree, j.name))
    return ET.tostring(out, encoding="unicode")


def _joint_el(tree, name):
    return next(el for el in tree.root_el.findall("joint") if el.get("name") == name)


# ---------------------------------------------------------------------------
# the description's side: which values come from where
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class WholeForm:
    """What a whole-robot URDF gives the description.

    urdf : Path            the URDF (or xacro) file
    tables : dict          derived {"base": {...}, "wheel": {...}, "mount": {...}} in
                           the TOML's keys and units, before the TOML's overrides
    derived : tuple[Derived]   each derived value and where it came from
    arm_text : str         the arm cut out as its own URDF
    frames : dict          {link: (parent, xyz, R)}: the chassis links (parent "base",
                           base frame) and the wheel links (parent "wheel_right" or
                           "wheel_left", in the wheel joint's frame at the wheel centre)
    meshes : tuple         (link, uri, path or None, exists) per <mesh>
    contacts : dict        {link: (x, y)} ground point below every link, base frame
    """

    urdf: object
    tables: dict
    derived: tuple
    arm_text: str
    frames: dict
    meshes: tuple
    contacts: dict


def load_whole(path, doc, s, urdf_text=None):
    """Read the [robot] keys of the whole-robot form from Section `s` and derive
    the base, wheels and mount from the URDF (see the module docstring)."""
    from ._sources import mesh_files, read_package_paths, urdf_source
    from ._urdf import check_inertials, check_urdf, pinocchio_model

    toml = path.name
    packages = read_package_paths(path, doc.get("package_paths", {}))
    uri = s.string("urdf")
    names = s.raw("wheel_joints")
    if not (isinstance(names, list) and len(names) == 2 and all(isinstance(n, str) for n in names)):
        s.fail("wheel_joints", f"must name two joints [right, left], got {names!r}")
    arm_root = s.string("arm_root", required=False)
    args = s.raw("xacro_args", {}, required=False)
    if not (isinstance(args, dict) and all(isinstance(v, str) for v in args.values())):
        s.fail("xacro_args", f"must be a table of strings, got {args!r}")
    tool = s.string("tool_frame")
    s.finish()
    where = f"{toml}: [robot] urdf"
    if urdf_text is None:
        file, urdf_text = urdf_source(path, uri, packages, args, where)
    else:
        from ._sources import resolve_uri
        file = resolve_uri(uri, packages, path.parent, where)
    root = check_urdf(urdf_text, file.name, reserved=())   # before urdfdom sees it
    pinocchio_model(urdf_text, file.name)                  # the whole URDF parses
    check_inertials(root, file.name)
    tree = WholeRobot(root, file.name, toml)
    right, left = tree.wheel_joints(names, f"{toml}: [robot] wheel_joints")
    radius, r_src = _radius(tree, right, left, _given_radius(path, doc))
    X_B = base_frame(tree, right, left, radius)
    chassis = tree.fixed_group(tree.root)
    for j in (right, left):
        if j.parent not in chassis:
            raise ConfigError(f"{toml}: [robot] wheel_joints: joint '{j.name}' of {file.name} "
                              f"hangs from '{j.parent}', which is not fixed to the root link")
    entry, arm_root, between = arm_cut(tree, tool, arm_root, chassis, f"{toml}: [robot]")
    passive = [j for n in chassis for j in tree.children[n]
               if j.kind != "fixed" and j.name not in (right.name, left.name, entry.name)]
    body = chassis + [n for j in passive for n in tree.subtree(j.child)]
    tables, derived = _derive(tree, X_B, body, passive, right, left, arm_root, radius, r_src)
    frames = _frames(tree, X_B, [n for n in body if n != arm_root and n not in between],
                     right, left, radius, tables["base"]["half_track"])
    contacts = {n: _contact(tree, n, X_B) for n in tree.X}
    return WholeForm(file, tables, tuple(derived), arm_text(tree, entry, arm_root, between,
                                                             root.get("name", "arm")),
                     frames, tuple(mesh_files(root, packages, file.parent)), contacts)


def _frames(tree, X_B, chassis, right, left, radius, half_track):
    """Placements of the links that become frames of the model (WholeForm.frames)."""
    out = {}
    for n in chassis:
        X = X_B @ tree.X[n]
        out[n] = ("base", tuple(X[:3, 3]), X[:3, :3])
    for joint, name, y in ((right, "wheel_right", -half_track), (left, "wheel_left", half_track)):
        for n in tree.subtree(joint.child):            # at zero: the wheel centre's axes are B's
            X = X_B @ tree.X[n]
            out[n] = (name, tuple(X[:3, 3] - [0.0, y, radius]), X[:3, :3])
    return out


def _given_radius(path, doc):
    """The given [base] wheel_radius (validated), or None."""
    from ._toml import Section
    table = doc.get("base", {})
    if not isinstance(table, dict) or "wheel_radius" not in table:
        return None
    return Section(path, "base", table).number("wheel_radius", unit="m", lo=0.0, lo_open=True)


def _radius(tree, right, left, given):
    if given is not None:
        return given, "given"
    found = [tree.wheel_radius(j) for j in (right, left)]
    if found[0] is None or found[1] is None:
        j = right if found[0] is None else left
        raise ConfigError(f"{tree.toml}: [base] wheel_radius is not given and wheel joint "
                          f"'{j.name}' of {tree.file} has no <collision> cylinder or sphere "
                          f"to take it from")
    if abs(found[0][0] - found[1][0]) > 1e-9 * found[0][0]:
        raise ConfigError(f"{tree.toml}: the wheels of {tree.file} differ in radius "
                          f"({found[0][1]}: {found[0][0]:g} m, {found[1][1]}: {found[1][0]:g} m): "
                          f"give [base] wheel_radius")
    return found[0][0], found[0][1]


def _derive(tree, X_B, body, passive, right, left, arm_root, radius, r_src):
    """({"base", "wheel", "mount"} tables, [Derived]) from the tree."""
    m, c, I = tree.merged(body, X_B)
    listed = ", ".join(body)
    (pr, _), (pl, _) = tree.axle(right), tree.axle(left)
    wheels = [wheel_inertia(tree, j, X_B) for j in (right, left)]
    mw, spin, diam = (float(np.mean([w[k] for w in wheels])) for k in range(3))
    X_mount = X_B @ tree.X[arm_root]
    tables = {
        "base": {"mass": m, "com": [float(v) for v in c],
                 "inertia": [I[0, 0], I[1, 1], I[2, 2], I[0, 1], I[0, 2], I[1, 2]],
                 "half_track": float(np.linalg.norm(pl - pr) / 2), "wheel_radius": radius},
        "wheel": {"mass": mw, "spin_inertia": spin, "diameter_inertia": diam},
        "mount": {"xyz": [float(v) for v in X_mount[:3, 3]],
                  "rpy": list(matrix_rpy(X_mount[:3, :3]))},
    }
    held = (f"; moving joints held at zero: {', '.join(j.name for j in passive)}"
            if passive else "")
    both = (f"'{right.child}' and '{left.child}' sub-trees" +
            (" (mean of the two)" if any(abs(wheels[0][k] - wheels[1][k]) > 1e-12 * (1 + abs(
                wheels[0][k])) for k in range(3)) else ""))
    t, f = tables, _fmt
    derived = [
        Derived("chassis links", listed, f"fixed to the root link '{tree.root}'{held}"),
        Derived("[base] mass", f(t["base"]["mass"], "kg"), "sum of the chassis links' "
                "<inertial> masses"),
        Derived("[base] com", f(t["base"]["com"], "m"), "mass-weighted mean of the chassis "
                "links' <inertial> origins, base frame"),
        Derived("[base] inertia", f(t["base"]["inertia"], "kg·m²"), "the chassis links' "
                "<inertia> rotated to the base frame and moved to the COM (parallel-axis "
                "theorem)"),
        Derived("[base] half_track", f(t["base"]["half_track"], "m"), f"half the distance "
                f"between the origins of joints '{right.name}' and '{left.name}'"),
        Derived("[base] wheel_radius", f(radius, "m"), r_src),
        Derived("[wheel] mass", f(mw, "kg"), f"<inertial> of the {both}"),
        Derived("[wheel] spin_inertia", f(spin, "kg·m²"), f"about the axle through the wheel "
                f"centre, {both}"),
        Derived("[wheel] diameter_inertia", f(diam, "kg·m²"), f"mean of the moments about "
                f"two diameters, {both}"),
        Derived("[mount] xyz", f(t["mount"]["xyz"], "m"), f"origin of link '{arm_root}' in "
                f"the base frame"),
        Derived("[mount] rpy", f(t["mount"]["rpy"], "rad"), f"orientation of link "
                f"'{arm_root}' in the base frame"),
    ]
    return tables, derived


def _fmt(x, unit):
    if isinstance(x, (list, tuple)):
        return "[" + ", ".join(f"{v + 0.0:.6g}" for v in x) + f"] {unit}"
    return f"{x + 0.0:.6g} {unit}"


def _contact(tree, link, X_B):
    """(x, y) below a link in the base frame: its collision sphere's or
    cylinder's centre if it has one, else its origin."""
    X = X_B @ tree.X[link]
    for col in tree.links[link].findall("collision"):
        if col.find("geometry/sphere") is not None or col.find("geometry/cylinder") is not None:
            X = X @ _origin(col)
            break
    return float(X[0, 3]), float(X[1, 3])
