"""The identified robot as a description the other commands read.

The corrected parameters θ̂ (`_estimate`) are written into a copy of the robot
description (TOML) and its arm URDF:

- arm joint bodies: the change δπ_j = θ̂_j − θ₀_j (ten dynamic parameters in
  the joint frame, which is the child link's frame in URDF) is added to the
  child link's inertial (dynamic parameters add: Atkeson, An & Hollerbach 1986);
- the base body (the chassis and the arm's links fixed to it): δπ is added to
  `[base] mass, com, inertia`; the wheels: the mean change of the two wheel
  bodies to `[wheel]`;
- armature: `[drive] rotor_inertia` = a / G² (mean of the two wheels) and
  `[arm_joint.X] rotor_inertia`; friction: `[drive] coulomb, viscous` (mean of
  the wheels), `[arm_joint.X] coulomb, viscous` (a `stiction` keeps its ratio
  to `coulomb`: the static level cannot be identified from motion);
  `[base] rolling_resistance`;
- the payload: `[payload] mass, com, inertia` (tool frame).

A body whose corrected parameters are not physical keeps the description's
(listed in the report); negative friction, armature or rolling resistance are
kept at the description's value too.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pinocchio as pin

__all__ = ["corrected_description", "writable_parts"]


def _keep_static_ratio(table, old_coulomb):
    """A `stiction` (static level, not identifiable from motion) keeps its ratio
    to the identified kinetic level `coulomb`, and never falls below it."""
    if "stiction" not in table:
        return
    ratio = table["stiction"] / old_coulomb if old_coulomb > 0.0 else 1.0
    table["stiction"] = max(ratio * table["coulomb"], table["coulomb"])


def _params(theta, params, i):
    return np.asarray(theta[10 * i:10 * i + 10], float)


def _inertial_values(I):
    """(mass, com, [Ixx, Iyy, Izz, Ixy, Ixz, Iyz] about the COM) of a pin.Inertia."""
    J = I.inertia
    return (float(I.mass), [float(x) for x in I.lever],
            [float(J[0, 0]), float(J[1, 1]), float(J[2, 2]), float(J[0, 1]), float(J[0, 2]),
             float(J[1, 2])])


def _inertia(mass, com, values):
    from ..description import inertia_matrix
    return pin.Inertia(float(mass), np.asarray(com, float), inertia_matrix(values))


def _urdf_link_inertia(link):
    """pin.Inertia of a URDF <link>'s inertial in the link frame (zero if none)."""
    el = link.find("inertial")
    if el is None:
        return pin.Inertia.Zero()
    origin = el.find("origin")
    xyz = [float(v) for v in (origin.get("xyz", "0 0 0") if origin is not None else "0 0 0").split()]
    rpy = [float(v) for v in (origin.get("rpy", "0 0 0") if origin is not None else "0 0 0").split()]
    m = float(el.find("mass").get("value"))
    i = el.find("inertia")
    vals = [float(i.get(k, 0.0)) for k in ("ixx", "iyy", "izz", "ixy", "ixz", "iyz")]
    R = pin.rpy.rpyToMatrix(np.array(rpy))
    I_c = _inertia(m, np.zeros(3), vals)
    return pin.SE3(R, np.array(xyz)).act(I_c)


def _set_link_inertia(link, I):
    for el in link.findall("inertial"):
        link.remove(el)
    m, com, vals = _inertial_values(I)
    el = ET.SubElement(link, "inertial")
    ET.SubElement(el, "origin", xyz=" ".join(f"{c:.10g}" for c in com), rpy="0 0 0")
    ET.SubElement(el, "mass", value=f"{m:.10g}")
    ET.SubElement(el, "inertia", **{k: f"{v:.10g}" for k, v in
                                    zip(("ixx", "iyy", "izz", "ixy", "ixz", "iyz"), vals)})


def writable_parts(robot, params):
    """{body index: π (10,)} of the part of each body that the identified change
    is written into: the chassis of [base] (the base body minus the arm's links
    fixed to it), a wheel, an arm joint's child link (the joint body minus links
    fixed to it), the payload.  Only parts with mass are adjustable."""
    d = robot.description
    root = ET.fromstring(d.arm_urdf.read_text(encoding="utf-8"))
    links = {l.get("name"): l for l in root.findall("link")}
    child = {j.get("name"): j.find("child").get("link") for j in root.findall("joint")}
    out = {}
    for i, body in enumerate(params.bodies):
        if body == "base":
            b = d.base
            out[i] = _inertia(b.mass, b.com, b.inertia).toDynamicParameters()
        elif body in ("wheel_right", "wheel_left"):
            out[i] = params.prior[10 * i:10 * i + 10].copy()
        elif body in child and child[body] in links:
            out[i] = _urdf_link_inertia(links[child[body]]).toDynamicParameters()
    return {i: pi for i, pi in out.items() if pi[0] > 0.0}


def corrected_description(ident, doc, urdf_text):
    """(doc, urdf_text, kept) of the identified robot.

    doc: the description's parsed TOML (a dict, modified copy returned);
    urdf_text: the arm URDF's text; kept: bodies/parameters left at the
    description's values (not physical, or not identified).
    """
    import copy

    robot, params, fit = ident.robot, ident.params, ident.fit
    theta, prior = ident.theta, params.prior
    bad = {b for b, _ in ident.consistency}
    kept = sorted(bad)
    doc = copy.deepcopy(doc)
    root = ET.fromstring(urdf_text)
    links = {l.get("name"): l for l in root.findall("link")}
    child = {j.get("name"): j.find("child").get("link") for j in root.findall("joint")}

    def delta(i):
        return pin.Inertia.FromDynamicParameters(_params(theta, params, i) - _params(prior, params, i))

    for i, body in enumerate(params.bodies):
        if body in bad:
            continue
        d = delta(i)
        if body == "base":
            b = doc["base"]
            new = _inertia(b["mass"], b["com"], b["inertia"]) + d
            m, com, vals = _inertial_values(new)
            b.update(mass=m, com=com, inertia=vals)
        elif body in ("wheel_right", "wheel_left"):
            continue                                   # both together below
        elif body in child and child[body] in links:
            link = links[child[body]]
            _set_link_inertia(link, _urdf_link_inertia(link) + d)
    wheels = [params.bodies.index(w) for w in ("wheel_right", "wheel_left")]
    if not bad & {"wheel_right", "wheel_left"}:
        dv = 0.5 * sum(_params(theta, params, i) - _params(prior, params, i) for i in wheels)
        w = doc["wheel"]
        new = _inertia(w["mass"], np.zeros(3), [w["diameter_inertia"], w["spin_inertia"],
                                               w["diameter_inertia"], 0, 0, 0]) \
            + pin.Inertia.FromDynamicParameters(dv)
        m, _, vals = _inertial_values(new)
        w.update(mass=m, spin_inertia=vals[1], diameter_inertia=0.5 * (vals[0] + vals[2]))
    _drive_terms(ident, doc, kept)
    if params.payload is not None and "payload" not in bad:
        frame = robot.model.frames[robot.tool_frame_id]
        I_tool = frame.placement.actInv(pin.Inertia.FromDynamicParameters(
            np.asarray(theta[params.payload], float)))
        m, com, vals = _inertial_values(I_tool)
        doc["payload"] = {"mass": m, "com": com, "inertia": vals}
    return doc, ET.tostring(root, encoding="unicode"), kept


def _drive_terms(ident, doc, kept):
    """Armature, friction and rolling resistance into [drive], [arm_joint.X], [base]."""
    robot, params, theta = ident.robot, ident.params, ident.theta

    def value(name):
        v = float(theta[params.names.index(name)])
        if v < 0.0:
            kept.append(name)
            return float(params.prior[params.names.index(name)])
        return v

    drive = doc["drive"]
    G = robot.description.drive.gear_ratio
    arm_names = {params.names[col].rsplit(".", 1)[0]: col for _, col in params.armature}
    wheel_a = [value(f"{w}.armature") for w in ("wheel_right", "wheel_left")]
    drive["rotor_inertia"] = 0.5 * sum(wheel_a) / G ** 2
    old = float(drive.get("coulomb", 0.0))
    for kind in ("coulomb", "viscous"):
        drive[kind] = 0.5 * sum(value(f"{w}.{kind}") for w in ("wheel_right", "wheel_left"))
    _keep_static_ratio(drive, old)
    joints = doc.setdefault("arm_joint", {})
    for k, name in enumerate(robot.arm_joint_names):
        entry = joints.setdefault(name, {})
        old = float(entry.get("coulomb", robot.coulomb[2 + k]))
        for kind in ("coulomb", "viscous"):
            entry[kind] = value(f"{name}.{kind}")
        _keep_static_ratio(entry, old)
        if name in arm_names:
            a = value(f"{name}.armature")
            ratio = float(entry.get("gear_ratio", 1.0))
            if a > 0.0 or "rotor_inertia" in entry:
                entry["rotor_inertia"] = a / ratio ** 2
                entry.setdefault("gear_ratio", ratio)
    if params.rolling is not None:
        doc["base"]["rolling_resistance"] = value("rolling_resistance")
