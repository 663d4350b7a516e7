"""The sizing report: summary.json (every figure with its unit),
timeseries.csv, and a single self-contained HTML file with embedded figures.
Formats what `opspace.sizing` computed; no physics here.
"""

from __future__ import annotations

import numpy as np

from .._common import quantity as _q
from .._common import trapezoid_rms as _rms
from ..stability import lift_off_spans, support_model
from ._html import Page, fmt
from ._text import losses as _losses
from ._views import sizing_view

__all__ = ["ASSUMPTIONS", "CAUTIONS", "RUN_CAUTIONS", "sizing_html", "sizing_summary",
           "write_sizing_report", "write_timeseries_csv"]


ASSUMPTIONS = (
    "Rigid bodies; the arm URDF's inertias and the description's masses are taken as exact.",
    "Wheels roll without slip and without side slip; normal loads follow the robot's load "
    "model (named with the stability figures); contacts lift off when unloaded.",
    "Lateral ground force carried by the drive wheels in proportion to their normal loads "
    "(casters swivel freely and carry only their rolling resistance); each drive tyre's force "
    "includes the casters' rolling resistance it overcomes; traction limit is Coulomb friction "
    "|F_t| <= mu N (friction circle).",
    "Motor torque through the gearbox efficiency: divided by it when the drive delivers "
    "power, multiplied by it when the wheel back-drives the gearbox.",
    "Thermal RMS: the motor rests at zero torque between cycles (a brake holds the robot "
    "when parked); thermal time constants long against the cycle.",
    "Worst-case arm poses: the arm held still at the pose while the base goes through the "
    "cycle's most demanding instants, with the rated payload.",
    "The gyroscopic reaction of the motor rotors on the chassis is neglected.",
)

RUN_CAUTIONS = (
    "These figures are model estimates, not measurements.",
    "Apply service factors suited to the application.",
    "Verify efforts, tracking, traction and stability on the real hardware before relying "
    "on them.",
    "Follow the applicable safety standards for mobile robots and manipulators, local "
    "codes and licensed engineering practice; tip-over, traction and stopping figures must "
    "never be the only basis of a safety decision.",
)
"""The cautions of a simulated run (no duty cycle, no service factor of its own)."""

CAUTIONS = (
    "These figures are model estimates, not measurements.",
    "Apply service factors suited to the application; the cycle's service factor "
    "multiplies required torques only.",
    "Verify torques, temperatures, traction, stopping distances and stability on the "
    "real hardware before relying on them.",
    RUN_CAUTIONS[-1],
)
"""The cautions of a sizing (and of a sweep of sizings)."""


def _per_wheel(arr, unit):
    return {name: _q(float(v), unit) for name, v in zip(("right_wheel", "left_wheel"), arr)}


def _peak(x):
    """Column maxima ignoring nan (instants where the robot tips); nan if all are."""
    x = np.asarray(x, dtype=float)
    return np.array([np.nanmax(c) if np.any(~np.isnan(c)) else np.nan for c in x.T])


def _sweep_summary(sweep, result):
    from ..sizing import drive_margin, robot_level

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
            "criteria": [k.to_dict() for k in c.criteria if not robot_level(k.name)]})
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
    from .._version import __version__

    ev, robot, duty = result.evaluation, result.robot, result.duty
    st = ev.stability
    described = result.described
    P_wheel = ev.tau_out * ev.wheel_speed
    out = {
        "opspace_version": __version__,
        "status": result.status, "message": result.message,
        "verdict_basis": result.basis,
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
                   "peak_traction_use": _per_wheel(_peak(st.traction), "1")},
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
            "load_model": st.loads.model,
            "load_model_parameters": support_model(robot).to_dict(),
            "floor_and_friction": result.floor.to_dict() if result.floor else None,
            "lift_off": [{"contact": sp["contact"], "start": _q(sp["start"], "s"),
                          "end": _q(sp["end"], "s")}
                         for sp in lift_off_spans(ev.t, st.loads.lifted,
                                                  [c.name for c in robot.contacts])]},
        "planned_cycle": {"criteria": [c.to_dict() for c in result.cycle_criteria]},
        "candidates": [_sweep_summary(s, result) for s in result.sweeps],
        "assumptions": list(ASSUMPTIONS),
        "cautions": list(CAUTIONS),
    }
    rec = result.recommended
    if rec is not None:
        out["recommended"] = {"motor": rec[1].motor, "gearbox": rec[1].gearbox,
                              "ratio": _q(rec[1].ratio, "1")}
        # per wheel, when the catalogue gives the masses (the sweeps' size figure)
        m_motor = result.catalogue.motor(rec[1].motor).mass
        m_gear = result.catalogue.gearbox(rec[1].gearbox).mass
        if m_motor is not None:
            out["recommended"]["motor_mass"] = _q(m_motor, "kg")
        if m_gear is not None:
            out["recommended"]["gearbox_mass"] = _q(m_gear, "kg")
        if m_motor is not None and m_gear is not None:
            out["recommended"]["drive_mass"] = _q(m_motor + m_gear, "kg")
    if result.worst_torque is not None:
        names, units = robot.arm_joint_names, robot.arm_units
        out["worst_case"] = {"peak_wheel_torque": result.worst_torque.to_dict(names, units),
                             "tip_over": result.worst_tip.to_dict(names, units),
                             "traction_use": result.worst_traction.to_dict(names, units),
                             "instants": _q(len(result.instants), "1")}
        out["envelope_cases"] = [c.to_dict(names, units) for c in result.cases]
        out["shortest_stop"] = result.stop.to_dict(names, units)
    if result.contact is not None:
        from ._contact import contact_summary
        out["contact"] = contact_summary(result.contact)
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
    write_csv(path, cols)


def write_csv(path, cols):
    """Columns as CSV ("%.6g"); +inf (a traction use where the wheel has lifted
    off) is written "lift-off", nan (no load distribution: the robot tips) "tips"."""
    data = np.column_stack([np.asarray(v, dtype=float) for v in cols.values()])
    text = np.char.mod("%.6g", data)
    text = np.where(np.isposinf(data), "lift-off", np.where(np.isnan(data), "tips", text))
    lines = [",".join(cols)] + [",".join(row) for row in text]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("\n".join(lines) + "\n")


# --------------------------------------------------------------------------- HTML
def _segments(result):
    ev = result.evaluation
    out = []
    for seg in result.duty.segments:
        m = np.flatnonzero(ev.segment == seg.index)
        if m.size:
            out.append((float(ev.t[m[0]]), float(ev.t[min(m[-1] + 1, len(ev.t) - 1)]),
                        seg.label or seg.kind))
    return out


def _best_per_sweep(sweep):
    """The check of a sweep with the largest smallest drive margin (pass or not)."""
    from ..sizing import drive_margin
    return max(sweep.checks, key=drive_margin)


def _verdict_table(page, result):
    from ..sizing import margin_text, robot_level

    names = []
    for s in result.sweeps:
        for c in s.checks:
            for k in c.criteria:
                if k.name not in names:
                    names.append(k.name)
    drive_names = [n for n in names if not robot_level(n)]
    rows, classes = [], []
    for s in result.sweeps:
        for c in s.checks:
            ok = all(k.passed for k in c.criteria if not robot_level(k.name))
            row = [c.motor, c.gearbox, f"{c.ratio:g}", "pass" if ok else "FAIL"]
            cls = ["", "", "", "ok" if ok else "bad"]
            by = {k.name: k for k in c.criteria}
            for n in drive_names:
                k = by.get(n)
                row.append("–" if k is None else margin_text(k.margin))
                cls.append("na" if k is None else ("ok" if k.passed else "bad"))
            rows.append(row)
            classes.append(cls)
    page.table(["motor", "gearbox", "ratio", "drive verdict"] + drive_names, rows,
               left=(0, 1), classes=classes)


def _margin_class(margin):
    """CSS class of a margin cell (see report.html's palette)."""
    if not margin >= 0.0:
        return "bad"
    return "m1" if margin < 0.1 else ("m2" if margin < 0.3 else "m3")


def _candidate_matrix(page, result):
    """Per gearbox family, motors × catalogue ratios: each cell the tightest
    drive criterion and its margin, shaded by margin; the recommended cell framed."""
    from ..sizing import margin_text, robot_level

    rec = result.recommended
    families = []
    for s in result.sweeps:
        if s.gearbox not in families:
            families.append(s.gearbox)
    for family in families:
        sweeps = [s for s in result.sweeps if s.gearbox == family]
        ratios = sorted({c.ratio for s in sweeps for c in s.checks})
        rows, classes = [], []
        for s in sweeps:
            row, cls = [s.motor], [""]
            by_ratio = {c.ratio: c for c in s.checks}
            for G in ratios:
                c = by_ratio.get(G)
                if c is None:
                    row.append("–")
                    cls.append("na")
                    continue
                k = min((k for k in c.criteria if not robot_level(k.name)),
                        key=lambda k: k.margin)
                row.append(f"{margin_text(k.margin)} {k.name}")
                mark = " rec" if rec is not None and rec[1] is c else ""
                cls.append(_margin_class(k.margin) + mark)
            rows.append(row)
            classes.append(cls)
        page.heading(f"{family}: motor × ratio", level=3)
        page.table(["motor"] + [f"{G:g}:1" for G in ratios], rows, left=(0,), classes=classes)


def _ratio_table(page, result):
    rows = []
    for s in result.sweeps:
        iv = "; ".join(f"{a:.1f}–{b:.1f}" for a, b in s.pass_intervals) or "none"
        rows.append([s.motor, s.gearbox, ", ".join(f"{g:g}" for g in s.passing_ratios) or "none",
                     iv, f"{s.rms_optimal_ratio:.1f}" + (" (bound)" if s.rms_optimum_at_bound else ""),
                     fmt(s.rms_optimal_torque), fmt(s.inertia_matching_ratio)])
    page.table(["motor", "gearbox", "catalogue ratios that pass", "continuous range that passes",
                "RMS-optimal ratio", "its thermal RMS [N·m]", "inertia-matching ratio"],
               rows, left=(0, 1, 2, 3))


def _criteria_table(page, criteria):
    from ..sizing import margin_text

    rows, cls = [], []
    for k in criteria:
        unit = "" if k.unit in ("", "1") else f" {k.unit}"
        rows.append([k.name, f"{fmt(k.value)}{unit}", f"{fmt(k.limit)}{unit}",
                     margin_text(k.margin, "unbounded"), "pass" if k.passed else "FAIL", k.note])
        cls.append(["", "", "", "", "ok" if k.passed else "bad", ""])
    page.table(["criterion", "required", "limit", "margin", "verdict", "where"], rows,
               left=(0, 5), classes=cls)


def _figures(result, progress):
    from .. import plots

    robot, ev = result.robot, result.evaluation
    st = ev.stability
    segs = _segments(result)
    figs = []
    step = [0]

    def add(fig, caption):
        figs.append((plots.figure_to_png_bytes(fig), caption))
        step[0] += 1
        if progress:
            progress(step[0], 7)

    rec = result.recommended
    if result.sweeps:
        bars = []
        from ..sizing import robot_level
        for s in result.sweeps:
            c = _best_per_sweep(s)
            k = min((k for k in c.criteria if not robot_level(k.name)), key=lambda k: k.margin)
            bars.append({"label": f"{c.motor} + {c.gearbox} {c.ratio:g}:1 — {k.name}",
                         "margin": k.margin, "passed": c.passed})
        add(plots.margins_bar(bars, title="Tightest drive margin per motor and gearbox"),
            "Each motor with each gearbox family at the ratio that leaves the largest margin; "
            "the bar is its tightest criterion (fraction of the limit; below zero fails).")
        chosen = rec[1] if rec else _best_per_sweep(max(result.sweeps, key=lambda s: max(
            c.worst.margin for c in s.checks)))
        cat = result.catalogue
        envelopes = []
        for m in cat.motors:
            P = m.envelope_points()
            same = [c for s in result.sweeps if s.motor == m.name and s.gearbox == chosen.gearbox
                    for c in s.checks if c.ratio == chosen.ratio]
            envelopes.append({"label": m.name, "speed": P[:, 0], "torque": P[:, 1],
                              "rated_torque": m.rated_torque,
                              "passed": bool(same and same[0].passed)})
        f = chosen.figures
        T, W = np.abs(f.torque), np.abs(f.speed)
        i = np.unravel_index(int(np.argmax(T)), T.shape)
        operating = [{"label": f"{name} ({chosen.motor})", "speed": W[:, k], "torque": T[:, k]}
                     for k, name in enumerate(("right wheel", "left wheel"))]
        operating[0]["peak"] = (float(W[i]), float(T[i]))
        operating[0]["rms_torque"] = float(np.max(np.atleast_1d(f.thermal_rms_torque)))
        add(plots.torque_speed_plane(envelopes, operating, title=(
            f"Torque-speed plane: {chosen.gearbox} {chosen.ratio:g}:1, points of {chosen.motor}")),
            f"Intermittent envelopes (solid) and rated torques (dashed) of every motor; the "
            f"cycle's operating points with {chosen.motor} (unfactored; the service factor "
            f"{result.duty.service_factor:g} applies to the checks). Thermal RMS marked.")
        motor = cat.motor(chosen.motor)
        add(plots.drive_time_series(ev.t, f.torque, f.speed, f.power, where="motor",
                                    torque_limits={"peak": motor.peak_torque,
                                                   "rated": motor.rated_torque},
                                    speed_limit=motor.max_speed, segments=segs),
            f"Motor torque, speed and mechanical power of {chosen.motor} through {chosen.gearbox} "
            f"at {chosen.ratio:g}:1.")
    else:
        step[0] += 3
    lim = robot.description.drive.torque_limit
    add(plots.drive_time_series(ev.t, ev.tau_out, ev.wheel_speed, ev.tau_out * ev.wheel_speed,
                                where="wheel", segments=segs,
                                torque_limits=None if not np.isfinite(lim) else {"torque_limit": lim},
                                speed_limit=robot.velocity_limit[0] if np.isfinite(
                                    robot.velocity_limit[0]) else None),
        "Torque the gearbox delivers to each wheel (rotor excluded), wheel speed and power.")
    j = int(np.argmin(st.margin))
    P = np.array([c.position for c in robot.contacts])
    fp = robot.description.base.footprint
    add(plots.support_polygon_zmp(st.polygon.vertices, P, [c.name for c in robot.contacts],
                                  st.zmp, com=st.wrench.com[:, :2], worst_index=j,
                                  worst_label=f"min margin {st.margin[j] * 1000:.0f} mm at t = {ev.t[j]:.2f} s",
                                  footprint=fp, driven=[c.driven for c in robot.contacts],
                                  t=ev.t, worst_edge=int(st.edge[j])),
        "Support polygon (wheels and casters), ZMP track over the cycle and the COM's ground "
        "projection; the instant of least tip-over margin is marked.")
    add(plots.loads_and_traction(ev.t, st.loads.N, [c.name for c in robot.contacts], st.traction,
                                 segments=segs),
        f"Normal load per contact ({st.loads.model}) and traction use per drive wheel "
        f"(μ = {robot.ground_friction:g}).")
    if result.worst_torque is not None:
        add(plots.robot_poses(_pose_drawings(result), footprint=fp, wheel_radius=robot.wheel_radius,
                              half_track=robot.half_track, casters=P[2:]),
            "The arm poses found by the worst-case search, with the rated payload.")
    return figs


def _stability_paragraphs(page, result):
    """The load model and every lift-off, in words."""
    from ..stability import describe_lift_off, support_model

    robot, ev = result.robot, result.evaluation
    page.para(f"Load model: {support_model(robot).describe()}.")
    fr = result.floor
    if fr is not None:
        page.para(f"The cycle's {fr.samples} critical instants on the floors the description "
                  f"allows: friction μ = {fr.mu_worst:g} (nominal {fr.mu_nominal:g}) and a "
                  f"{fr.unevenness * 1000:g} mm dip or step under each contact in turn (chassis "
                  f"tilt included in the tip-over margin).")
        trac = "lift-off" if fr.lift_off else fmt(fr.traction_worst)
        page.table(["figure", "nominal (flat, nominal μ)", "worst floor", "worst case"], [
            ["largest traction use [-]", fmt(fr.traction_nominal), trac,
             f"{fr.traction_wheel}, {fr.traction_case}, t = {fr.traction_t:.2f} s"],
            ["least tip-over margin [mm]", fmt(fr.margin_nominal * 1000),
             fmt(fr.margin_worst * 1000), f"{fr.margin_case}, t = {fr.margin_t:.2f} s"]],
            left=(0, 3))
    spans = lift_off_spans(ev.t, ev.stability.loads.lifted, [c.name for c in robot.contacts])
    driven = {c.name for c in robot.contacts if c.driven}
    if spans:
        text = f"Lift-off: {describe_lift_off(spans, limit=8)}."
        if any(sp["contact"] in driven for sp in spans):
            text += (" A lifted drive wheel has no grip: its traction use is unbounded (shown "
                     "as lift-off in the figure, null with bound +inf in summary.json, "
                     "\"lift-off\" in timeseries.csv).")
        else:
            text += " No drive wheel lifts off (a lifted caster's load goes to the others)."
        page.para(text)


def _pose_drawings(result):
    robot = result.robot
    out = []
    payload = robot.description.payload
    with robot.kept():
        if payload is not None:
            robot.attach_payload()
        for wp, what in ((result.worst_torque, "peak wheel torque"),
                         (result.worst_tip, "least tip-over margin"),
                         (result.worst_traction, "highest traction use")):
            q = robot.configurations(wp.q[None])[0]
            unit = "" if wp.unit == "1" else f" {wp.unit}"
            d = {"label": f"{what}: {wp.value:.3g}{unit}", "points": robot.arm_points(q),
                 "com": robot.com(q)}
            if payload is not None:
                d["payload"] = robot.frame_placement(q, robot.tool_frame).act(np.array(payload.com))
            out.append(d)
    return out


def _basis_words(result):
    if result.basis == "envelope":
        return ("Verdict basis: the planned cycle AND the arm's envelope — the cycle's base "
                "motions repeated with the arm held still at each worst-case pose found below "
                "(peak wheel torque, least tip-over margin, highest traction use), with the rated "
                "payload. Each row below is the worst over all of them; its note names the case.")
    return ("Verdict basis: the planned cycle only (the arm moves as planned). "
            + ("" if result.envelope_sweeps is not None else
               "The arm's envelope was not checked (no worst-case search)."))


def sizing_html(result, *, progress=None):
    """The report page (str): verdict first, then figures and details."""
    robot, ev, duty = result.robot, result.evaluation, result.duty
    page = Page(f"opspace sizing — {duty.name}")
    page.heading(f"Drive sizing: {duty.name}", level=1)
    page.para(f"Robot: {robot.name} ({robot.description.path.name}), {robot.total_mass():.1f} kg"
              f"{'' if robot.description.payload is None else f' + {robot.description.payload.mass:g} kg payload'}; "
              f"cycle {ev.duration:.1f} s ({duty.path.name}), {duty.cycles_per_hour:g} cycles per hour, "
              f"service factor {duty.service_factor:g}; losses: {_losses(robot)}.", cls="meta")
    page.verdict(result.status, result.message)
    page.caution(CAUTIONS)
    figs = _figures(result, progress)
    fig_iter = iter(figs)
    page.para(_basis_words(result), cls="meta")
    page.heading("Robot-level criteria (the same for every drive)")
    _criteria_table(page, result.robot_criteria)
    if result.sweeps:
        rec = result.recommended
        page.heading("Verdict per candidate")
        if rec is not None:
            page.para(f"Recommended (smallest motor passing every drive criterion): {rec[1].motor} "
                      f"with {rec[1].gearbox} at {rec[1].ratio:g}:1"
                      + (" — the robot itself fails a robot-level criterion above: no drive "
                         "fixes that." if any(not c.passed for c in result.robot_criteria)
                         else "."))
        page.para("Margins are fractions of each limit after the service factor (below zero "
                  "fails). Robot-level rows (traction, tip-over, arm limits) are listed above.")
        page.para("At a glance: each cell is a motor at a catalogue ratio, showing its tightest "
                  "drive criterion and that margin (orange: fails; deeper blue: more margin; "
                  "framed: recommended). The full table follows.")
        _candidate_matrix(page, result)
        page.heading("All candidates and criteria", level=3)
        _verdict_table(page, result)
        page.figure(*next(fig_iter))
        page.heading("Gear ratio")
        _ratio_table(page, result)
        page.para(f"Inertia-matching ratio sqrt(J_load / J_motor) with J_load = "
                  f"{result.load_inertia:.4g} kg·m² per wheel (straight-line equivalent, rotor "
                  f"excluded), for comparison: with friction and gravity loads the RMS-optimal "
                  f"ratio differs from it.")
        page.heading("Torque-speed plane")
        page.figure(*next(fig_iter))
        page.figure(*next(fig_iter))
    page.heading("Wheels over the cycle")
    page.figure(*next(fig_iter))
    page.heading("Stability: ZMP, normal loads and traction")
    _stability_paragraphs(page, result)
    page.figure(*next(fig_iter))
    page.figure(*next(fig_iter))
    if result.worst_torque is not None:
        page.heading("Worst case of the arm")
        names = robot.arm_joint_names
        rows = []
        for wp in result.worst:
            unit = "" if wp.unit == "1" else f" {wp.unit}"
            rows.append([wp.objective, f"{wp.value:.4g}{unit}", f"{wp.grid_value:.4g}{unit}",
                         ", ".join(f"{n} {v:.2f}" for n, v in zip(names, wp.q)),
                         f"t = {result.instants[wp.instant].t:.2f} s"])
        page.table(["objective", "refined", "best grid point", "pose (rad or m)", "instant"], rows,
                   left=(0, 3, 4))
        wp = result.worst_torque
        page.para(f"Only physical poses are searched: {wp.excluded} grid poses reaching below "
                  f"the floor or into the chassis footprint box were left out, checked on "
                  f"{wp.geometry}.")
        page.figure(*next(fig_iter))
        s = result.stop
        if s.deceleration > 0:
            page.para(f"Shortest stop from {s.speed:g} m/s with the arm in the least-margin pose "
                      f"and the payload: deceleration {s.deceleration:.2f} m/s², {s.time:.2f} s, "
                      f"{s.distance:.2f} m (limited by {s.limited_by}), on flat ground. Braking "
                      f"harder makes the robot slip or tip.")
        else:
            page.para(f"Shortest stop from {s.speed:g} m/s with the arm in the least-margin pose "
                      f"and the payload: none; no deceleration keeps the robot upright with "
                      f"grip ({s.limited_by}).")
    page.heading("3-D view")
    page.raw(sizing_view(result))
    page.heading("Drive as described (robot file)")
    d = result.described
    page.table(["figure", "right wheel", "left wheel", "unit"], [
        [name, *(fmt(v) for v in np.atleast_1d(getattr(d, key))), unit]
        for name, key, unit in (("peak motor torque", "peak_torque", "N·m"),
                                ("RMS motor torque", "rms_torque", "N·m"),
                                ("thermal RMS motor torque", "thermal_rms_torque", "N·m"),
                                ("peak motor speed", "peak_speed", "rad/s"),
                                ("peak power", "peak_power", "W"),
                                ("energy per cycle", "energy", "J"),
                                ("regenerable share", "regenerated_share", ""))],
        left=(0,))
    if result.contact is not None:
        from ._contact import contact_section
        contact_section(page, result.contact)
    page.heading("Assumptions")
    page.items(ASSUMPTIONS + (f"Normal loads: {ev.stability.loads.model}.",))
    page.heading("Cautions")
    page.items(CAUTIONS)
    return page.render()


def _finite(obj):
    """JSON has no infinities: a {"value": ±inf, "unit"} figure becomes
    {"value": null, "unit", "bound": "+inf" / "-inf"} (e.g. an envelope margin
    of a point beyond the motor's speed range)."""
    if isinstance(obj, dict):
        out = {k: _finite(v) for k, v in obj.items()}
        v = obj.get("value")
        if isinstance(v, float) and not np.isfinite(v):
            out["value"], out["bound"] = None, ("+inf" if v > 0 else ("-inf" if v < 0 else "nan"))
        return out
    if isinstance(obj, list):
        return [_finite(v) for v in obj]
    if isinstance(obj, float) and not np.isfinite(obj):
        return None
    return obj


def write_sizing_report(result, out_dir, *, progress=None):
    """Write report.html, summary.json and timeseries.csv into `out_dir`.

    Everything is rendered first and each file is written under a temporary
    name then renamed, so an interrupted run leaves no half-written result.

    Returns
    -------
    dict name -> Path
    """
    import json
    import os
    from pathlib import Path

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    html_text = sizing_html(result, progress=progress)
    summary = json.dumps(_finite(sizing_summary(result)), indent=2, ensure_ascii=False,
                         allow_nan=False)
    paths = {"report": out / "report.html", "summary": out / "summary.json",
             "timeseries": out / "timeseries.csv"}
    tmp = {k: p.with_name(p.name + ".part") for k, p in paths.items()}
    tmp["report"].write_text(html_text, encoding="utf-8")
    tmp["summary"].write_text(summary + "\n", encoding="utf-8")
    write_timeseries_csv(result, tmp["timeseries"])
    for k in paths:
        os.replace(tmp[k], paths[k])
    return paths
