"""What the URDF says that Pinocchio's parser does not check for us, read with
the standard XML parser: the `<mimic>` relations of the arm's joints and the
physical validity of every `<inertial>` (placeholder links included).

A mimic joint ``<mimic joint="leader" multiplier="k" offset="o"/>`` follows its
leader, q_f = k q_l + o (URDF specification, joint element); a chain of mimics
is folded into one relation to the independent joint at its end.

`check_urdf` checks the whole text before Pinocchio parses it:

- XML syntax (line and column), a root element other than <robot>;
- every numeric attribute parses (``<origin xyz>``, ``<axis xyz>``,
  ``<limit lower upper effort velocity>``, ``<dynamics damping friction>``,
  ``<mimic multiplier offset>``, ``<mass value>``, ``<inertia ixx ... iyz>``)
  and is finite;
- structure: unique link and joint names, names the base model reserves,
  known joint types, parent and child links that exist, one parent per link,
  exactly one root, every link connected to it;
- semantics: a moving joint has a non-zero axis and a <limit> (revolute and
  prismatic: with effort, velocity and lower < upper);
- magnitudes (common practice, no source; a larger value is a unit mistake,
  e.g. a file written in millimetres or grams): joint offsets and centre of
  mass offsets within `ROBOT_SIZE` m, link masses within `MAX_LINK_MASS` kg,
  inertia elements within `MAX_LINK_INERTIA` kg·m², efforts within 1e6 N·m
  (or N), velocities within 1e4 rad/s (or m/s).

Masses > 0 (or a placeholder) and physical inertias are checked by `check_inertials`;
a joint that moves no mass (massless links beyond it) by `robot`, once the
armature of [arm_joint] is known.
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
import tempfile
import xml.etree.ElementTree as ET
from dataclasses import dataclass

from ..errors import ConfigError
from ._toml import ROBOT_SIZE, check_inertia

__all__ = ["MAX_LINK_INERTIA", "MAX_LINK_MASS", "Mimic", "RESERVED", "check_inertials", "check_urdf",
           "parse_xml", "pinocchio_model", "read_mimic"]

INERTIA_KEYS = ("ixx", "iyy", "izz", "ixy", "ixz", "iyz")


@dataclass(frozen=True)
class Mimic:
    """A joint that follows `leader`: q = multiplier · q_leader + offset
    (rad or m; multiplier dimensionless when both joints are of one kind)."""

    leader: str
    multiplier: float = 1.0
    offset: float = 0.0


def parse_xml(text, file):
    """The URDF's XML root; ConfigError naming the file when it does not parse."""
    try:
        root = ET.fromstring(text)
    except ET.ParseError as exc:
        raise ConfigError(f"{file}: URDF does not parse (not well-formed XML: {exc})") from None
    if root.tag != "robot":
        raise ConfigError(f"{file}: the root element must be <robot>, got <{root.tag}>")
    return root


def pinocchio_model(text, file):
    """Pinocchio's model of a URDF text (fixed base); ConfigError naming the file
    with the parser's first line when it does not parse."""
    import pinocchio as pin

    with _stderr_caught() as said:   # the URDF parser writes its reasons to fd 2
        try:
            return pin.buildModelFromXML(text)
        except Exception as exc:  # Pinocchio raises ValueError/RuntimeError alike
            error = exc
    first = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
    reasons = [line.split(":", 1)[1].strip() for line in said()
               if line.strip().startswith("Error:")]
    raise ConfigError(f"{file}: URDF does not parse ({first}"
                      + (f": {reasons[0]}" if reasons else "") + ")")


@contextlib.contextmanager
def _stderr_caught():
    """Redirect the process's file descriptor 2 (C++ libraries write there) to a
    temporary file while the block runs; yields a callable returning its lines."""
    sys.stderr.flush()
    saved, lines = os.dup(2), []
    with tempfile.TemporaryFile(mode="w+b") as tmp:
        os.dup2(tmp.fileno(), 2)
        try:
            yield lambda: lines
        finally:
            os.dup2(saved, 2)
            os.close(saved)
            tmp.seek(0)
            lines += tmp.read().decode("utf-8", "replace").splitlines()


def _float(element, attr, default, where):
    raw = element.get(attr)
    if raw is None:
        return default
    try:
        value = float(raw)
    except ValueError:
        value = math.nan
    if not math.isfinite(value):
        raise ConfigError(f"{where} {attr}=\"{raw}\" must be a finite number")
    return value


def read_mimic(root, file, moving):
    """{follower: Mimic(independent leader, k, o)} for the `<mimic>` elements of
    the joints named in `moving` (the arm's moving joints, in chain order).

    Raises ConfigError (file, joint, element) for a leader that is not one of
    `moving`, a joint that mimics itself, or a cycle of mimics.
    """
    direct = {}
    for joint in root.iter("joint"):
        element = joint.find("mimic")
        name = joint.get("name")
        if element is None or name not in moving:
            continue
        where = f"{file}: joint '{name}' <mimic>"
        leader = element.get("joint")
        if leader not in moving or leader == name:
            raise ConfigError(f"{where} joint=\"{leader}\" must name another moving joint of "
                              f"the arm ({', '.join(n for n in moving if n != name)})")
        direct[name] = Mimic(leader, _float(element, "multiplier", 1.0, where),
                             _float(element, "offset", 0.0, where))
    resolved = {}
    for name in direct:
        k, o, seen, lead = 1.0, 0.0, [name], name
        while lead in direct:                 # q = k_1 (k_2 q + o_2) + o_1 ...
            m = direct[lead]
            k, o, lead = k * m.multiplier, k * m.offset + o, m.leader
            if lead in seen:
                raise ConfigError(f"{file}: joint '{name}' <mimic> forms a cycle "
                                  f"({' -> '.join(seen + [lead])})")
            seen.append(lead)
        resolved[name] = Mimic(lead, k, o)
    return resolved


def check_inertials(root, file):
    """Every `<inertial>` physical, or a placeholder.

    A link with ``<mass value="0"/>`` and no or an all-zero `<inertia>` is a
    massless frame (sensor and tool frames).  Otherwise the mass must be > 0
    and the rotational inertia about the COM positive definite with principal
    moments obeying the triangle inequality (`check_inertia`); the message
    names the link.
    """
    for link in root.iter("link"):
        inertial = link.find("inertial")
        if inertial is None:
            continue
        where = f"{file}: link '{link.get('name')}' <inertial>"
        mass_el = inertial.find("mass")
        if mass_el is None:
            raise ConfigError(f"{where} has no <mass>")
        mass = _float(mass_el, "value", math.nan, f"{where} <mass>")
        inertia_el = inertial.find("inertia")
        values = ([0.0] * 6 if inertia_el is None else
                  [_float(inertia_el, k, 0.0, f"{where} <inertia>") for k in INERTIA_KEYS])
        if mass == 0.0 and not any(values):
            continue                                   # placeholder: a massless frame
        if not mass > 0.0:
            raise ConfigError(f"{where} <mass value> must be > 0 kg (or 0 with a zero "
                              f"<inertia> for a massless frame), got {mass:g}")
        if inertia_el is None:
            raise ConfigError(f"{where} has <mass value=\"{mass:g}\"> but no <inertia>: "
                              f"give the rotational inertia about the COM (kg·m²)")
        check_inertia(values, f"{where} <inertia>")


# ---------------------------------------------------------------------------
# the whole file, before Pinocchio reads it
# ---------------------------------------------------------------------------
#: largest plausible mass of one arm link, kg
MAX_LINK_MASS = 1000.0
#: largest plausible inertia element of one arm link, kg·m²
MAX_LINK_INERTIA = 1000.0
MAX_EFFORT = 1e6
#: largest plausible revolute joint limit, rad (about 160 turns)
MAX_ANGLE = 1e3
MAX_VELOCITY = 1e4
#: joint and link names of the base model the arm is appended to
RESERVED = ("base_planar", "base", "wheel_right", "wheel_left", "universe")
MOVING = ("revolute", "continuous", "prismatic")
TYPES = MOVING + ("fixed", "floating", "planar")


def _numbers(where, el, attr, count, default=None):
    """The attribute `attr` of element `el` as `count` finite floats."""
    text = el.get(attr)
    if text is None:
        return default
    parts = text.split()
    try:
        values = [float(p) for p in parts]
    except ValueError:
        values = None
    if values is None or len(values) != count:
        want = "a number" if count == 1 else f"{count} numbers separated by spaces"
        raise ConfigError(f"{where} <{el.tag} {attr}> must be {want}, got {text!r}")
    if not all(math.isfinite(v) for v in values):
        raise ConfigError(f"{where} <{el.tag} {attr}> must be finite, got {text!r}")
    return values


def _bound(where, el, attr, values, cap, hint):
    for v in values or ():
        if abs(v) > cap:
            raise ConfigError(f"{where} <{el.tag} {attr}> = {el.get(attr)!r} is implausible for "
                              f"a robot arm (beyond ±{cap:g} {hint})")


_LENGTH_HINT = "m: URDF lengths are metres; was the file written in millimetres?"


def check_urdf(text, name, *, reserved=RESERVED):
    """Check an arm URDF's text (see the module docstring); `name` is the
    file name used in messages; `reserved`: the names no link or joint may take
    (a whole-robot URDF passes none: only its arm is appended to the base model,
    and its arm is checked again on its own).  Returns the parsed XML root."""
    root = parse_xml(text, name)
    links = _check_links(root, name, reserved)
    joints = _check_joints(root, name, links, reserved)
    _check_tree(name, links, joints)
    return root


def _named(name, el, kind, seen, reserved):
    n = el.get("name")
    if not n or not n.strip():
        raise ConfigError(f"{name}: a <{kind}> has no name attribute")
    if n in seen:
        raise ConfigError(f"{name}: two <{kind}> elements are named '{n}' (names must be unique)")
    if n in reserved:
        raise ConfigError(f"{name}: <{kind}> '{n}' uses a name the base model reserves "
                          f"({', '.join(reserved)}): rename it")
    seen.append(n)
    return n


def _check_links(root, name, reserved):
    links = []
    for link in root.findall("link"):
        lname = _named(name, link, "link", links, reserved)
        inertial = link.find("inertial")
        if inertial is None:
            continue
        where = f"{name}: link '{lname}' <inertial>"
        origin = inertial.find("origin")
        if origin is not None:
            _bound(where, origin, "xyz", _numbers(where, origin, "xyz", 3), ROBOT_SIZE, _LENGTH_HINT)
            _numbers(where, origin, "rpy", 3)
        mass = inertial.find("mass")
        if mass is not None:
            value = _numbers(where, mass, "value", 1)
            _bound(where, mass, "value", value, MAX_LINK_MASS,
                   "kg: URDF masses are kilograms; was it written in grams?")
        inertia = inertial.find("inertia")
        if inertia is not None:
            for attr in ("ixx", "iyy", "izz", "ixy", "ixz", "iyz"):
                _bound(where, inertia, attr, _numbers(where, inertia, attr, 1), MAX_LINK_INERTIA,
                       "kg·m²: URDF inertias are kg·m²; was it written in mm or g?")
    return links


def _check_joints(root, name, links, reserved):
    joints, names = [], []
    for joint in root.findall("joint"):
        jname = _named(name, joint, "joint", names, reserved)
        where = f"{name}: joint '{jname}'"
        kind = joint.get("type")
        if kind not in TYPES:
            raise ConfigError(f"{where} type must be one of {', '.join(TYPES)}, got {kind!r}")
        ends = []
        for tag in ("parent", "child"):
            el = joint.find(tag)
            link = el.get("link") if el is not None else None
            if link is None:
                raise ConfigError(f"{where} has no <{tag} link=...>")
            if link not in links:
                raise ConfigError(f"{where} <{tag} link> '{link}' is not a link of the file")
            ends.append(link)
        origin = joint.find("origin")
        if origin is not None:
            _bound(where, origin, "xyz", _numbers(where, origin, "xyz", 3), ROBOT_SIZE, _LENGTH_HINT)
            _numbers(where, origin, "rpy", 3)
        if kind in MOVING:
            _check_motion(where, joint, kind)
        for tag, attrs in (("dynamics", ("damping", "friction")), ("mimic", ("multiplier", "offset"))):
            el = joint.find(tag)
            for attr in attrs if el is not None else ():
                _bound(where, el, attr, _numbers(where, el, attr, 1), MAX_EFFORT, "")
        for attr in ("damping", "friction"):
            el = joint.find("dynamics")
            value = _numbers(where, el, attr, 1) if el is not None else None
            if value is not None and value[0] < 0:
                raise ConfigError(f"{where} <dynamics {attr}> must be >= 0, got {value[0]:g}")
        joints.append((jname, ends[0], ends[1]))
    return joints


def _check_motion(where, joint, kind):
    axis = joint.find("axis")
    xyz = _numbers(where, axis, "xyz", 3) if axis is not None else [1.0, 0.0, 0.0]
    if xyz is not None and math.hypot(*xyz) < 1e-9:
        raise ConfigError(f"{where} <axis xyz> is zero: a {kind} joint needs a direction "
                          f"(e.g. \"0 0 1\")")
    limit = joint.find("limit")
    if limit is None:
        if kind == "continuous":
            return
        raise ConfigError(f"{where} is {kind} but has no <limit lower upper effort velocity>")
    values = {a: _numbers(where, limit, a, 1) for a in ("lower", "upper", "effort", "velocity")}
    for attr, cap, unit in (("effort", MAX_EFFORT, "N·m or N"),
                            ("velocity", MAX_VELOCITY, "rad/s or m/s")):
        v = values[attr]
        if v is None and kind != "continuous":
            raise ConfigError(f"{where} <limit> has no {attr} (URDF requires it)")
        if v is not None and v[0] < 0:
            raise ConfigError(f"{where} <limit {attr}> must be >= 0, got {v[0]:g}")
        _bound(where, limit, attr, v, cap, unit)
    if kind == "continuous":
        return
    lo, hi = (values[a][0] if values[a] else 0.0 for a in ("lower", "upper"))
    if not lo < hi:
        raise ConfigError(f"{where} <limit> must have lower < upper, got lower = {lo:g}, "
                          f"upper = {hi:g} (both default to 0)")
    attr = "lower" if abs(lo) > abs(hi) else "upper"
    if kind == "prismatic":
        _bound(where, limit, attr, [lo, hi], ROBOT_SIZE, _LENGTH_HINT)
    else:
        _bound(where, limit, attr, [lo, hi], MAX_ANGLE,
               "rad: a joint without limits is of type continuous")


def _check_tree(name, links, joints):
    parent = {}
    for jname, p, c in joints:
        if c in parent:
            raise ConfigError(f"{name}: link '{c}' is the child of two joints ('{parent[c][0]}' "
                              f"and '{jname}'): a URDF is a tree")
        if p == c:
            raise ConfigError(f"{name}: joint '{jname}' has link '{p}' as parent and child")
        parent[c] = (jname, p)
    roots = [l for l in links if l not in parent]
    if len(roots) != 1:
        which = ", ".join(f"'{r}'" for r in roots) or "none"
        raise ConfigError(f"{name}: the arm must have exactly one root link (a link that is no "
                          f"joint's child), found {len(roots)}: {which}")
    for link in links:
        seen, node = set(), link
        while node in parent:
            if node in seen:
                raise ConfigError(f"{name}: the joints form a loop through link '{node}'")
            seen.add(node)
            node = parent[node][1]
