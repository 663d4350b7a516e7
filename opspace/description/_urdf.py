"""What the URDF says that Pinocchio's parser does not check for us, read with
the standard XML parser: the `<mimic>` relations of the arm's joints and the
physical validity of every `<inertial>` (placeholder links included).

A mimic joint ``<mimic joint="leader" multiplier="k" offset="o"/>`` follows its
leader, q_f = k q_l + o (URDF specification, joint element); a chain of mimics
is folded into one relation to the independent joint at its end.
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
from ._toml import check_inertia

__all__ = ["Mimic", "check_inertials", "parse_xml", "pinocchio_model", "read_mimic"]

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
