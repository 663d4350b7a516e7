"""Human-readable output: the `check` summary (text), and later the HTML
report, JSON and CSV writers.  Formats what the physics modules computed; it
computes no physics of its own.
"""

from __future__ import annotations

import numpy as np

from .dynamics import drive_inertia

__all__ = ["CAUTION", "check_summary"]

CAUTION = ("Results are model estimates. Apply service factors, verify on hardware, "
           "and follow the applicable safety standards for mobile robots, local codes "
           "and licensed engineering practice.")


def _losses(robot):
    parts = []
    if np.any(robot.coulomb) or np.any(robot.viscous):
        parts.append("joint/wheel Coulomb and viscous friction")
    if robot.rolling_resistance:
        parts.append(f"rolling resistance C_rr = {robot.rolling_resistance:g}")
    return ", ".join(parts) if parts else "none (pure rigid-body model)"


def check_summary(robot):
    """Text summary of a loaded robot for a drive engineer (the `check` command).

    The locked-arm drive inertia (see `opspace.dynamics.DriveInertia`) at the
    neutral configuration and at every named pose of the description.
    """
    d = robot.description
    lines = [f"{robot.name}: description OK ({d.path.name}, arm {d.arm_urdf.name})", ""]
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
    lines.append(f"losses included: {_losses(robot)}")
    lines.append("")
    poses = [("neutral (arm at zero)", robot.configuration())]
    poses += [(name, robot.configuration(arm=name)) for name in d.poses]
    header = (f"{'arm pose':<24}{'COM x,y,z [m]':>24}{'I_P [kg m^2]':>14}{'a [-]':>8}"
              f"{'M_w [kg m^2]':>30}{'wheel mass R/L [kg]':>22}")
    lines.append("locked-arm inertia seen by the drive wheels "
                 "(a = I_P/(m b^2): yaw inertia about the pivot over m b^2)")
    lines.append(header)
    for name, q in poses:
        di = drive_inertia(robot, q)
        com = ", ".join(f"{v:+.3f}" for v in di.com)
        Mw = di.M_w
        lines.append(f"{name:<24}{com:>24}{di.yaw_inertia:>14.3f}{di.distribution:>8.3f}"
                     f"{f'[[{Mw[0, 0]:.4f}, {Mw[0, 1]:.4f}], [{Mw[1, 0]:.4f}, {Mw[1, 1]:.4f}]]':>30}"
                     f"{f'{di.wheel_mass[0]:.1f} / {di.wheel_mass[1]:.1f}':>22}")
    if not d.poses:
        lines.append("(no [poses] in the description: add e.g. a side-reach pose to see "
                     "how the arm changes these figures)")
    lines.append("")
    lines.append("wheel mass = M_w[i, i] / r^2: the translational mass each wheel accelerates; "
                 "it includes the reflected rotor inertia and the wheel's spin inertia.")
    lines.append(CAUTION)
    return "\n".join(lines)


# --------------------------------------------------------------------------- sizing
ASSUMPTIONS = (
    "Rigid bodies; the arm URDF's inertias and the description's masses are taken as exact.",
    "Wheels roll without slip and without side slip; the support is a rigid chassis on "
    "contacts of equal vertical stiffness (no suspension), contacts lift off when unloaded.",
    "Lateral ground force carried by the drive wheels in proportion to their normal loads "
    "(casters swivel freely); traction limit is Coulomb friction |F_t| <= mu N (friction circle).",
    "Motor torque through the gearbox efficiency: divided by it when the drive delivers "
    "power, multiplied by it when the wheel back-drives the gearbox.",
    "Thermal RMS: the motor rests at zero torque between cycles (a brake holds the robot "
    "when parked); thermal time constants long against the cycle.",
    "Worst-case arm poses: the arm held still at the pose while the base goes through the "
    "cycle's most demanding instants, with the rated payload.",
    "The gyroscopic reaction of the motor rotors on the chassis is neglected.",
)

CAUTIONS = (
    "These figures are model estimates, not measurements.",
    "Apply service factors suited to the application; the cycle's service factor "
    "multiplies required torques only.",
    "Verify torques, temperatures, traction, stopping distances and stability on the "
    "real hardware before relying on them.",
    "Follow the applicable safety standards for mobile robots and manipulators, local "
    "codes and licensed engineering practice; tip-over, traction and stopping figures must "
    "never be the only basis of a safety decision.",
)


def _q(value, unit):
    """A figure with its unit, as every number of summary.json is written."""
    if isinstance(value, np.ndarray):
        value = value.tolist()
    elif isinstance(value, np.generic):
        value = value.item()
    return {"value": value, "unit": unit}


def _per_wheel(arr, unit):
    return {name: _q(float(v), unit) for name, v in zip(("right_wheel", "left_wheel"), arr)}


def _rms(t, x):
    w = np.zeros_like(t)
    dt = np.diff(t)
    w[:-1] += dt / 2
    w[1:] += dt / 2
    return np.sqrt((w[:, None] * x**2).sum(axis=0) / (t[-1] - t[0]))


def _sweep_summary(sweep, result):
    from .sizing.run import ROBOT_CRITERIA, drive_margin

    checks = []
    for c in sweep.checks:
        f = c.figures
        checks.append({
            "ratio": _q(c.ratio, "1"), "passed": c.passed, "failed": list(c.failed),
            "drive_margin": _q(drive_margin(c), "1"),
            "peak_motor_torque": _per_wheel(np.atleast_1d(f.peak_torque), "N·m"),
            "thermal_rms_motor_torque": _per_wheel(np.atleast_1d(f.thermal_rms_torque), "N·m"),
            "peak_motor_speed": _per_wheel(np.atleast_1d(f.peak_speed), "rad/s"),
            "energy_per_cycle": _per_wheel(np.atleast_1d(f.energy), "J"),
            "criteria": [k.to_dict() for k in c.criteria if k.name not in ROBOT_CRITERIA]})
    return {"motor": sweep.motor, "gearbox": sweep.gearbox,
            "passing_ratios": _q(list(sweep.passing_ratios), "1"),
            "passing_ratio_intervals": _q([list(iv) for iv in sweep.pass_intervals], "1"),
            "rms_optimal_ratio": _q(sweep.rms_optimal_ratio, "1"),
            "rms_optimal_thermal_torque": _q(sweep.rms_optimal_torque, "N·m"),
            "rms_optimum_at_bound": sweep.rms_optimum_at_bound,
            "inertia_matching_ratio": _q(sweep.inertia_matching_ratio, "1"),
            "motor_inertia": _q(sweep.motor_inertia, "kg·m²"),
            "checks": checks}


def sizing_summary(result):
    """Every figure of a SizingResult as JSON-ready data, each number with its unit."""
    from . import __version__

    ev, robot, duty = result.evaluation, result.robot, result.duty
    st = ev.stability
    described = result.described
    P_wheel = ev.tau_out * ev.wheel_speed
    out = {
        "opspace_version": __version__,
        "status": result.status, "message": result.message,
        "cycle": {"name": duty.name, "file": duty.path.name,
                  "duration": _q(ev.duration, "s"), "samples": _q(len(ev.t), "1"),
                  "sample_rate": _q(duty.sample_rate, "Hz"),
                  "cycles_per_hour": _q(duty.cycles_per_hour, "1/h"),
                  "duty_factor": _q(result.wheel_duty.duty_factor, "1"),
                  "service_factor": _q(duty.service_factor, "1"),
                  "top_speed": _q(float(np.max(np.abs(ev.v))), "m/s")},
        "robot": {"name": robot.name, "file": robot.description.path.name,
                  "mass": _q(robot.total_mass(), "kg"),
                  "payload": _q(robot.description.payload.mass if robot.description.payload else 0.0, "kg"),
                  "losses": _losses(robot),
                  "load_inertia_per_wheel": _q(result.load_inertia, "kg·m²")},
        "wheels": {"peak_torque": _per_wheel(np.abs(ev.tau_out).max(axis=0), "N·m"),
                   "rms_torque": _per_wheel(_rms(ev.t, ev.tau_out), "N·m"),
                   "peak_speed": _per_wheel(np.abs(ev.wheel_speed).max(axis=0), "rad/s"),
                   "peak_power": _per_wheel(P_wheel.max(axis=0), "W"),
                   "peak_traction_use": _per_wheel(np.max(st.traction, axis=0), "1")},
        "described_drive": {
            "gear_ratio": _q(described.gear_ratio, "1"),
            "peak_motor_torque": _per_wheel(np.atleast_1d(described.peak_torque), "N·m"),
            "rms_motor_torque": _per_wheel(np.atleast_1d(described.rms_torque), "N·m"),
            "thermal_rms_motor_torque": _per_wheel(np.atleast_1d(described.thermal_rms_torque), "N·m"),
            "peak_motor_speed": _per_wheel(np.atleast_1d(described.peak_speed), "rad/s"),
            "peak_mechanical_power": _per_wheel(np.atleast_1d(described.peak_power), "W"),
            "energy_per_cycle": _per_wheel(np.atleast_1d(described.energy), "J"),
            "regenerable_share": _per_wheel(np.atleast_1d(described.regenerated_share), "1"),
            "power_basis": described.power_basis},
        "stability": {
            "criteria": [c.to_dict() for c in result.robot_criteria],
            "min_tip_over_margin": _q(float(st.margin.min()), "m"),
            "min_normal_load": {c.name: _q(float(np.nanmin(st.loads.N[:, k])), "N")
                                for k, c in enumerate(robot.contacts)},
            "load_model": st.loads.model},
        "candidates": [_sweep_summary(s, result) for s in result.sweeps],
        "assumptions": list(ASSUMPTIONS),
        "cautions": list(CAUTIONS),
    }
    rec = result.recommended
    if rec is not None:
        out["recommended"] = {"motor": rec[1].motor, "gearbox": rec[1].gearbox,
                              "ratio": _q(rec[1].ratio, "1")}
    if result.worst_torque is not None:
        names = robot.arm_joint_names
        out["worst_case"] = {"peak_wheel_torque": result.worst_torque.to_dict(names),
                             "tip_over": result.worst_tip.to_dict(names),
                             "instants": len(result.instants)}
        out["shortest_stop"] = result.stop.to_dict(names)
    return out


def write_timeseries_csv(result, path):
    """One row per sample: time, segment, base motion, wheel and stability figures."""
    ev = result.evaluation
    st = ev.stability
    f = result.described
    cols = {"t [s]": ev.t, "segment": ev.segment + 1, "x [m]": ev.x, "y [m]": ev.y,
            "theta [rad]": ev.theta, "v [m/s]": ev.v, "a [m/s^2]": ev.a,
            "omega [rad/s]": ev.omega, "alpha [rad/s^2]": ev.alpha,
            "payload": ev.payload.astype(int), "grade": ev.grade}
    for i, w in enumerate(("right", "left")):
        cols[f"{w} wheel torque [N m]"] = ev.tau_out[:, i]
        cols[f"{w} wheel speed [rad/s]"] = ev.wheel_speed[:, i]
        cols[f"{w} tyre force [N]"] = ev.wheel_force[:, i]
        cols[f"{w} motor torque (described drive) [N m]"] = f.torque[:, i]
        cols[f"{w} motor speed [rad/s]"] = f.speed[:, i]
        cols[f"{w} traction use"] = st.traction[:, i]
    cols["zmp x [m]"], cols["zmp y [m]"] = st.zmp[:, 0], st.zmp[:, 1]
    cols["tip-over margin [m]"] = st.margin
    for k, c in enumerate(result.robot.contacts):
        cols[f"{c.name} normal load [N]"] = st.loads.N[:, k]
    for k, name in enumerate(result.robot.arm_joint_names):
        cols[f"{name} effort"] = ev.Q[:, 2 + k]
    data = np.column_stack([np.asarray(v, dtype=float) for v in cols.values()])
    header = ",".join(cols)
    np.savetxt(path, data, delimiter=",", header=header, comments="", fmt="%.6g")
