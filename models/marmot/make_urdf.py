"""Write ``arm.urdf`` for the Marmot demo rover from simple solid shapes.

Marmot is a fictitious robot invented for the opspace demo; it is not a model
of any product.  An indoor differential-drive rover (about 60 kg) carrying a
vertical lift column with a six-joint arm on its carriage.

Each link is a union of simple shapes (solid box, solid cylinder, hollow
cylinder), each given by a density or by a mass.  The link's mass m, centre of
mass c and inertia about the centre of mass follow from

    m = Σ mᵢ,    c = Σ mᵢ cᵢ / m,
    I_c = Σ [ Iᵢ + mᵢ (|dᵢ|² E − dᵢ dᵢᵀ) ],   dᵢ = cᵢ − c       (parallel axes)

with the shape inertias Iᵢ about their own centres (all shapes here are
aligned with the link axes, so each Iᵢ is diagonal):

    solid box a×b×c:        Ixx = m (b² + c²)/12,  Iyy = m (a² + c²)/12,
                            Izz = m (a² + b²)/12
    solid cylinder r, h:    I_axial = m r²/2,      I_transverse = m (3 r² + h²)/12
    hollow cylinder ro, ri: I_axial = m (ro² + ri²)/2,
                            I_transverse = m (3 (ro² + ri²) + h²)/12

(standard table of mass moments of inertia of homogeneous bodies and the
parallel-axis theorem, as in Meriam & Kraige, Engineering Mechanics: Dynamics,
Appendix D; quoted from memory.)

The script also prints the chassis, wheel and payload figures that are copied
into ``robot.toml``.  Units: SI (m, kg, kg·m², rad, N, N·m, s).

Usage::

    python models/marmot/make_urdf.py        # writes arm.urdf beside this file

Running it again reproduces arm.urdf byte for byte.
"""

from dataclasses import dataclass
from pathlib import Path

import numpy as np

# Densities, kg/m³ (handbook values, from memory).
ALUMINIUM = 2700.0  # wrought aluminium alloy
STEEL = 7850.0  # carbon steel
RUBBER = 1200.0  # solid tyre tread

AXES = {"x": 0, "y": 1, "z": 2}


@dataclass(frozen=True)
class Body:
    """Rigid body: mass m (kg), centre of mass com (3,) m in the link frame,
    inertia (3, 3) kg·m² about com, in link-frame axes; shapes: the URDF
    <visual> geometry of its parts, (kind, sizes m, axis, centre m)."""

    mass: float
    com: np.ndarray
    inertia: np.ndarray
    shapes: tuple = ()


def _mass(volume, density, mass):
    """Mass from exactly one of density (kg/m³) or mass (kg)."""
    if (density is None) == (mass is None):
        raise ValueError("give exactly one of `density` or `mass`")
    return float(mass) if mass is not None else density * volume


def _axial(axis, I_axial, I_transverse):
    """Diagonal inertia of a body of revolution about `axis` ('x', 'y', 'z')."""
    d = np.full(3, I_transverse)
    d[AXES[axis]] = I_axial
    return np.diag(d)


def box(a, b, c, *, at, density=None, mass=None):
    """Solid box with edges a, b, c (m) along x, y, z, centred at `at` (m)."""
    m = _mass(a * b * c, density, mass)
    I = np.diag([b**2 + c**2, a**2 + c**2, a**2 + b**2]) * m / 12.0
    return Body(m, np.asarray(at, dtype=float), I,
                (("box", (a, b, c), "z", tuple(at)),))


def cylinder(r, h, *, axis, at, density=None, mass=None):
    """Solid cylinder of radius r and length h (m) along `axis`, centred at `at`."""
    m = _mass(np.pi * r**2 * h, density, mass)
    I = _axial(axis, m * r**2 / 2.0, m * (3.0 * r**2 + h**2) / 12.0)
    return Body(m, np.asarray(at, dtype=float), I,
                (("cylinder", (r, h), axis, tuple(at)),))


def tube(r_o, r_i, h, *, axis, at, density=None, mass=None):
    """Hollow cylinder, radii r_o > r_i and length h (m) along `axis`, centred at `at`."""
    m = _mass(np.pi * (r_o**2 - r_i**2) * h, density, mass)
    s = r_o**2 + r_i**2
    I = _axial(axis, m * s / 2.0, m * (3.0 * s + h**2) / 12.0)
    # drawn as its outer cylinder
    return Body(m, np.asarray(at, dtype=float), I,
                (("cylinder", (r_o, h), axis, tuple(at)),))


def combine(*bodies):
    """Union of bodies: total mass, common COM and inertia about it (parallel axes)."""
    m = sum(b.mass for b in bodies)
    c = sum(b.mass * b.com for b in bodies) / m
    I = np.zeros((3, 3))
    for b in bodies:
        d = b.com - c
        I += b.inertia + b.mass * (d @ d * np.eye(3) - np.outer(d, d))
    return Body(m, c, I, sum((b.shapes for b in bodies), ()))


# --------------------------------------------------------------------------
# Links, root first.  Link frames at q = 0 are all parallel to column_base
# (x forward, y left, z up).  The arm is planar at q = 0: every joint axis
# passes through the plane y = 0.
# --------------------------------------------------------------------------
LINKS = {
    # Fixed housing of the lift column: aluminium tube, 6 mm wall, 0.72 m tall.
    "column_base": tube(0.060, 0.054, 0.72, axis="z", at=(0, 0, 0.36), density=ALUMINIUM),
    # Slide carriage in front of the column (x = 0.06 .. 0.22 m: linear
    # bearings and the shoulder-pan actuator under the turret); 2.5 kg lumped
    # in a uniform block.
    "carriage": box(0.16, 0.14, 0.16, at=(0.14, 0, 0.08), mass=2.5),
    # Turret: aluminium housing around the pan axis plus the shoulder-lift
    # actuator (motor + strain-wave gear) lying along y at the top.
    "shoulder": combine(
        tube(0.055, 0.049, 0.10, axis="z", at=(0, 0, 0.05), density=ALUMINIUM),
        cylinder(0.050, 0.10, axis="y", at=(0, 0, 0.10), mass=1.8),
    ),
    # Upper arm: aluminium tube 0.40 m long with the elbow actuator at its end.
    "upper_arm": combine(
        tube(0.040, 0.035, 0.40, axis="x", at=(0.20, 0, 0), density=ALUMINIUM),
        cylinder(0.045, 0.09, axis="y", at=(0.40, 0, 0), mass=1.3),
    ),
    # Forearm: aluminium tube 0.35 m long with the wrist-pitch actuator at its end.
    "forearm": combine(
        tube(0.035, 0.031, 0.35, axis="x", at=(0.175, 0, 0), density=ALUMINIUM),
        cylinder(0.035, 0.07, axis="y", at=(0.35, 0, 0), mass=0.8),
    ),
    # Wrist bracket and the wrist-yaw actuator (axis z).
    "wrist_pitch_link": combine(
        box(0.05, 0.05, 0.03, at=(0.025, 0, 0), density=ALUMINIUM),
        cylinder(0.030, 0.07, axis="z", at=(0.07, 0, 0), mass=0.5),
    ),
    # Wrist-roll actuator (axis x).
    "wrist_yaw_link": cylinder(0.030, 0.06, axis="x", at=(0.03, 0, 0), mass=0.45),
    # Tool flange: aluminium disc, 15 mm thick.
    "flange": cylinder(0.045, 0.015, axis="x", at=(0.0075, 0, 0), density=ALUMINIUM),
}

# Joints in chain order.  Units: m and rad for origin/limits; effort in N
# (prismatic) or N·m (revolute); velocity m/s or rad/s; damping N·s/m or
# N·m·s/rad; friction N or N·m.
#
# Neutral pose q = 0 is "reach forward": carriage at the bottom of its
# travel, arm stretched horizontally forward along +x, tool axis +x.
# Sign convention of the pitch joints (axis +y): a positive angle tips the
# arm DOWN, a negative angle raises it.
#
# Limits:
# - shoulder_pan ±2.5 rad: the pan axis stands 0.17 m in front of the column
#   axis; at 2.5 rad the stretched arm's centre line passes 0.17·sin(2.5) =
#   0.10 m from the column axis = column radius 0.06 + arm tube radius 0.04.
# - shoulder_lift -1.70 .. +1.40 rad: upward the arm may lean back past
#   vertical by asin((0.17 - 0.06 - 0.04) / 0.40) = 0.176 rad before the
#   upper-arm tube touches the column, so -(π/2 + 0.13) keeps a margin;
#   downward 80° keeps the elbow actuator off the chassis deck.
# - elbow ±2.5 rad, wrist_pitch/wrist_yaw ±2.0 rad, wrist_roll ±3.0 rad:
#   self-collision and cable limits (common practice, no source).
JOINTS = [
    # name,          type,        parent,            child,              origin xyz,         axis,      lower,  upper, effort, velocity, damping, friction
    ("lift",          "prismatic", "column_base",      "carriage",         (0.0, 0.0, 0.0),    (0, 0, 1), 0.0,   0.55,  800.0,  0.25,  40.0, 10.0),
    ("shoulder_pan",  "revolute",  "carriage",         "shoulder",         (0.17, 0.0, 0.16),  (0, 0, 1), -2.5,  2.5,   100.0,  2.0,   0.5,  2.0),
    ("shoulder_lift", "revolute",  "shoulder",         "upper_arm",        (0.0, 0.0, 0.10),   (0, 1, 0), -1.70, 1.40,  120.0,  1.5,   0.5,  2.0),
    ("elbow",         "revolute",  "upper_arm",        "forearm",          (0.40, 0.0, 0.0),   (0, 1, 0), -2.5,  2.5,   60.0,   2.0,   0.3,  1.0),
    ("wrist_pitch",   "revolute",  "forearm",          "wrist_pitch_link", (0.35, 0.0, 0.0),   (0, 1, 0), -2.0,  2.0,   25.0,   3.0,   0.05, 0.3),
    ("wrist_yaw",     "revolute",  "wrist_pitch_link", "wrist_yaw_link",   (0.07, 0.0, 0.0),   (0, 0, 1), -2.0,  2.0,   20.0,   3.0,   0.05, 0.3),
    ("wrist_roll",    "revolute",  "wrist_yaw_link",   "flange",           (0.06, 0.0, 0.0),   (1, 0, 0), -3.0,  3.0,   10.0,   3.0,   0.02, 0.1),
]  # fmt: skip

# Tool centre point: 5 cm beyond the flange face (flange is 15 mm thick).
TOOL_OFFSET = (0.065, 0.0, 0.0)


def fmt(x):
    """Deterministic short decimal for the URDF (6 significant digits, no -0)."""
    x = float(x)
    if abs(x) < 1e-12:
        return "0"
    return f"{x:.6g}"


def vec(v):
    return " ".join(fmt(x) for x in v)


HEADER = """\
<?xml version="1.0"?>
<!--
  Marmot demo arm: lift column + six-joint arm.
  Fictitious robot invented for the opspace demo; not a model of any product.
  Generated by make_urdf.py (mass properties from simple shapes, which are
  also its <visual> geometry); do not edit by hand, edit the script and run it
  again.
  Units: SI (m, kg, kg m^2, rad, N, N m, s).
  Neutral pose (all joints zero) = "reach forward": carriage at the bottom of
  its travel, arm stretched horizontally forward along +x, tool axis +x.
  Pitch joints (axis +y): a positive angle tips the arm down.
-->
"""


#: rpy turning a URDF cylinder (axis z) onto each link axis, rad
_AXIS_RPY = {"x": "0 1.5708 0", "y": "1.5708 0 0", "z": "0 0 0"}


def visual_xml(shape):
    kind, size, axis, at = shape
    tag = (f'box size="{vec(size)}"' if kind == "box" else
           f'cylinder radius="{fmt(size[0])}" length="{fmt(size[1])}"')
    return ("    <visual>\n"
            f'      <origin xyz="{vec(at)}" rpy="{_AXIS_RPY[axis]}"/>\n'
            f"      <geometry><{tag}/></geometry>\n"
            "    </visual>\n")


def link_xml(name, body):
    I = body.inertia
    return (
        f'  <link name="{name}">\n'
        "    <inertial>\n"
        f'      <origin xyz="{vec(body.com)}" rpy="0 0 0"/>\n'
        f'      <mass value="{fmt(body.mass)}"/>\n'
        f'      <inertia ixx="{fmt(I[0, 0])}" ixy="{fmt(I[0, 1])}" ixz="{fmt(I[0, 2])}"'
        f' iyy="{fmt(I[1, 1])}" iyz="{fmt(I[1, 2])}" izz="{fmt(I[2, 2])}"/>\n'
        "    </inertial>\n"
        + "".join(visual_xml(shape) for shape in body.shapes)
        + "  </link>\n"
    )


def joint_xml(name, kind, parent, child, xyz, axis, lower, upper, effort, velocity, damping, friction):
    return (
        f'  <joint name="{name}" type="{kind}">\n'
        f'    <parent link="{parent}"/>\n'
        f'    <child link="{child}"/>\n'
        f'    <origin xyz="{vec(xyz)}" rpy="0 0 0"/>\n'
        f'    <axis xyz="{vec(axis)}"/>\n'
        f'    <limit lower="{fmt(lower)}" upper="{fmt(upper)}" effort="{fmt(effort)}"'
        f' velocity="{fmt(velocity)}"/>\n'
        f'    <dynamics damping="{fmt(damping)}" friction="{fmt(friction)}"/>\n'
        "  </joint>\n"
    )


def urdf_text():
    """The whole arm.urdf as a string (deterministic)."""
    parts = [HEADER, '<robot name="marmot_arm">\n']
    parts.append(link_xml("column_base", LINKS["column_base"]))
    for j in JOINTS:
        parts.append(joint_xml(*j))
        parts.append(link_xml(j[3], LINKS[j[3]]))
    parts.append(
        '  <joint name="tool_fixed" type="fixed">\n'
        '    <parent link="flange"/>\n'
        '    <child link="tool"/>\n'
        f'    <origin xyz="{vec(TOOL_OFFSET)}" rpy="0 0 0"/>\n'
        "  </joint>\n"
        '  <link name="tool"/>\n'
    )
    parts.append("</robot>\n")
    return "".join(parts)


# --------------------------------------------------------------------------
# Figures for robot.toml (printed, copied by hand).  Base frame: origin on the
# ground below the axle midpoint, x forward, z up.
# --------------------------------------------------------------------------
def chassis():
    """Chassis without wheels: frame/body shell as a uniform box 0.70 × 0.50 ×
    0.30 m spanning z = 0.04 .. 0.34 m, plus a battery block low and behind
    the axle."""
    return combine(
        box(0.70, 0.50, 0.30, at=(0.0, 0.0, 0.19), mass=24.0),
        box(0.30, 0.30, 0.12, at=(-0.12, 0.0, 0.12), mass=18.0),
    )


def wheel():
    """Drive wheel, radius 0.08 m, axle along y: rubber tread ring on an
    aluminium hub disc."""
    return combine(
        tube(0.080, 0.060, 0.045, axis="y", at=(0, 0, 0), density=RUBBER),
        cylinder(0.060, 0.035, axis="y", at=(0, 0, 0), density=ALUMINIUM),
    )


def payload():
    """Rated payload: a 3 kg tote-sized box 0.10 (x) × 0.30 (y) × 0.20 (z) m."""
    return box(0.10, 0.30, 0.20, at=(0.05, 0, 0), mass=3.0)


def _inertia6(I):
    """[Ixx, Iyy, Izz, Ixy, Ixz, Iyz] as TOML text."""
    v = [I[0, 0], I[1, 1], I[2, 2], I[0, 1], I[0, 2], I[1, 2]]
    return "[" + ", ".join(fmt(x) for x in v) + "]"


def main():
    out = Path(__file__).resolve().parent / "arm.urdf"
    out.write_text(urdf_text(), encoding="utf-8")
    print(f"wrote {out.name}")
    for name, b in LINKS.items():
        print(f"  {name:17s} m = {b.mass:7.4f} kg  com = [{vec(b.com)}]")
    moving = sum(b.mass for n, b in LINKS.items() if n != "column_base")
    column = LINKS["column_base"].mass
    print(f"  arm moving mass (carriage and beyond) = {moving:.3f} kg")
    c, w, p = chassis(), wheel(), payload()
    print("[base]")
    print(f"  mass = {fmt(c.mass)}")
    print(f"  com = [{', '.join(fmt(x) for x in c.com)}]")
    print(f"  inertia = {_inertia6(c.inertia)}")
    print("[wheel]")
    print(f"  mass = {fmt(w.mass)}")
    print(f"  spin_inertia = {fmt(w.inertia[1, 1])}")
    print(f"  diameter_inertia = {fmt(w.inertia[0, 0])}")
    print("[payload]")
    print(f"  inertia = {_inertia6(p.inertia)}")
    total = c.mass + 2.0 * w.mass + column + moving
    print(f"total robot without payload = {total:.3f} kg")


if __name__ == "__main__":
    main()
