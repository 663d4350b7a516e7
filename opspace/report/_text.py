"""The `check` command's text summary of a robot description."""

from __future__ import annotations

import numpy as np

from ..dynamics import drive_inertia
from ..stability import support_model

__all__ = ["CAUTION", "check_summary", "losses"]

CAUTION = ("Results are model estimates. Apply service factors, verify on hardware, "
           "and follow the applicable safety standards for mobile robots, local codes "
           "and licensed engineering practice.")


def losses(robot):
    """Which losses the model includes, in words."""
    parts = []
    if np.any(robot.coulomb) or np.any(robot.viscous):
        parts.append("joint/wheel Coulomb and viscous friction"
                     + (" (static above kinetic on some: the simulation's stick-slip)"
                        if np.any(robot.stiction > robot.coulomb) else ""))
    if robot.rolling_resistance:
        parts.append(f"rolling resistance C_rr = {robot.rolling_resistance:g}")
    return ", ".join(parts) if parts else "none (pure rigid-body model)"


def _mimic_lines(robot):
    return [f"mimic: {f} = {m.multiplier:g} x {m.leader} {'-' if m.offset < 0 else '+'} "
            f"{abs(m.offset):g} (follows its leader; not a coordinate)"
            for f, m in robot.mimic.items()]


def _whole_lines(d):
    """What the whole-robot URDF gave: each value and where it came from, and
    the meshes that were not found (they only matter for drawing)."""
    w = d.whole
    if w is None:
        return []
    lines = ["", f"derived from {w.urdf.name} (override any of them in {d.path.name}):"]
    width = max(len(x.key) for x in w.derived)
    lines += [f"  {x.key:<{width}} = {x.value}   <- {x.source}" for x in w.derived]
    missing = [(link, uri) for link, uri, _, ok in w.meshes if not ok]
    lines.append(f"meshes: {len(w.meshes)} referenced, {len(missing)} not found"
                 + (" (drawing only): " + ", ".join(f"{uri} (link '{link}')"
                                                    for link, uri in missing) if missing else ""))
    return lines


def check_summary(robot):
    """Text summary of a loaded robot for a drive engineer (the `check` command).

    The locked-arm drive inertia (see `opspace.dynamics.DriveInertia`) at the
    neutral configuration and at every named pose of the description.
    """
    d = robot.description
    urdf = f"arm {d.arm_urdf.name}" if d.whole is None else f"whole-robot URDF {d.arm_urdf.name}"
    lines = [f"{robot.name}: description OK ({d.path.name}, {urdf})", ""]
    lines.append(f"reduced coordinates ({robot.nv}): " + ", ".join(robot.coordinate_names))
    lines.append(f"Pinocchio model: nq = {robot.model.nq}, nv = {robot.model.nv}; "
                 f"tool frame '{robot.tool_frame}'")
    arm_mass = robot.total_mass() - d.base.mass - 2 * d.wheel.mass
    lines.append(f"mass: total {robot.total_mass():.2f} kg = chassis {d.base.mass:.2f} + "
                 f"wheels 2 x {d.wheel.mass:.3f} + arm {arm_mass:.2f} kg")
    if d.payload is not None:
        lines.append(f"rated payload: {d.payload.mass:.2f} kg at the tool (not included above)")
    lines.append(f"wheel radius {robot.wheel_radius:.4f} m, half track {robot.half_track:.4f} m, "
                 f"{len(d.casters)} caster(s); ground friction {robot.ground_friction:g}")
    lines.append(f"reflected rotor inertia per wheel: J_rotor G^2 = {d.drive.rotor_inertia:.3g} x "
                 f"{d.drive.gear_ratio:g}^2 = {d.drive.reflected_inertia:.4g} kg m^2")
    lines.append(f"losses included: {losses(robot)}")
    lines.append(f"load model: {support_model(robot).describe()}")
    lo, hi = d.friction_range
    lines.append(f"floor: friction {lo:g} to {hi:g} (nominal {robot.ground_friction:g}); "
                 f"unevenness {d.support.unevenness * 1000:g} mm under any one contact")
    lines += _mimic_lines(robot) + _whole_lines(d)
    lines.append("")
    poses = [("neutral (arm at zero)", robot.configuration())]
    poses += [(name, robot.configuration(arm=name)) for name in d.poses]
    r2 = robot.wheel_radius ** 2
    header = (f"{'arm pose':<24}{'COM x,y,z [m]':>24}{'m_line R / L [kg]':>20}"
              f"{'I_P [kg m^2]':>14}{'a':>7}   M_w [kg m^2]")
    lines.append("what the drive wheels accelerate with the arm locked:")
    lines.append("  m_line: straight-line mass per wheel, (M_w[i,0] + M_w[i,1]) / r^2: the mass "
                 "each wheel drives when both accelerate alike (its share of the robot plus "
                 "its own spin and rotor inertia over r^2)")
    lines.append("  I_P: yaw inertia of the whole robot about the pivot (the midpoint of the "
                 "wheel axle)")
    lines.append("  a = I_P / (m b^2): how the yaw inertia compares with the mass at the "
                 "half track b (1: the wheels are independent)")
    lines.append("  M_w: the 2x2 wheel inertia matrix, wheel torques = M_w x wheel accelerations "
                 "(right, left)")
    lines.append(header)
    for name, q in poses:
        di = drive_inertia(robot, q)
        com = ", ".join(f"{v:+.3f}" for v in di.com)
        Mw = di.M_w
        line = (Mw[0, 0] + Mw[0, 1]) / r2, (Mw[1, 0] + Mw[1, 1]) / r2
        M_text = f"[[{Mw[0, 0]:.4f}, {Mw[0, 1]:.4f}], [{Mw[1, 0]:.4f}, {Mw[1, 1]:.4f}]]"
        lines.append(f"{name:<24}{com:>24}{f'{line[0]:.1f} / {line[1]:.1f}':>20}"
                     f"{di.yaw_inertia:>14.3f}{di.distribution:>7.3f}   {M_text}")
    if not d.poses:
        lines.append("(no [poses] in the description: add e.g. a side-reach pose to see "
                     "how the arm changes these figures)")
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines)


