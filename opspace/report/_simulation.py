"""Outputs of `opspace simulate`: CSV and NPZ of the run, summary.json (each
figure with its unit), a short text summary, the figures, the animation and a
self-contained HTML page of them all.  Formats what `opspace.simulate`
computed; no physics here."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ._sizing import RUN_CAUTIONS as CAUTIONS, _finite
from ._views import simulation_view

__all__ = ["SIMULATION_ASSUMPTIONS", "simulation_html", "simulation_text",
           "write_simulation_outputs"]

#: what the simulation assumes, for the page (the docstring of opspace.simulate)
SIMULATION_ASSUMPTIONS = (
    "Rigid bodies; wheels roll without slip or side slip (the reduced, nonholonomic model); "
    "the chassis stays on the ground (the ZMP and loads are checked afterwards, not fed back).",
    "Friction: stick-slip (Karnopp 1985, decided at each step's start: static level "
    "`stiction`, kinetic level `coulomb`, a stuck coordinate held exactly), viscous f_v ν, "
    "and rolling resistance with the static contact loads of each step.",
    "Joint position limits are inelastic hard stops (a plastic impulse, then held while "
    "pushed); hitting one, a speed above its limit, a negative tip-over margin, traction use "
    "above 1 (slip is found, not simulated) or a fast pick make the status say so.",
    "Pick: a soft, perfectly plastic catch of a payload at rest (generalized momentum kept), "
    "its weight taken up at once or over the scenario's load_transfer time; release: the "
    "velocities are kept.",
    "Efforts are clipped to their limits; the controller is sampled at its rate and its "
    "output held (zero-order hold).",
)


def tracking_targets(scenario):
    """{label: m} of the scenario's tool tracking targets (`tracking_rms`,
    `tracking_peak`), for the error figure's lines; empty when none is given."""
    out = {}
    if scenario.tracking_rms is not None:
        out[f"{scenario.tracking_rms * 1e3:g} mm RMS target"] = scenario.tracking_rms
    if scenario.tracking_peak is not None:
        out[f"{scenario.tracking_peak * 1e3:g} mm peak target"] = scenario.tracking_peak
    return out


def _against(value, target):
    if target is None:
        return ""
    return f" (target {target * 1e3:g} mm: {'met' if value <= target else 'MISSED'})"


def simulation_text(run, result, *, compare=None):
    """The short text summary (str): verdict-style first lines, then figures.

    compare: (payload_mass_error, SimulationResult) of a second run, or None.
    """
    sc = run.scenario
    s = result.summary()
    lines = [f"{sc.name}: {result.status.upper().replace('_', '-')} "
             f"({s['duration']['value']:.2f} s simulated, "
             f"{result.integrator}, step {result.dt * 1e3:g} ms, control {1 / result.control_period:g} Hz, "
             f"{s['loop']} loop)"]
    if result.status != "completed":
        lines.append(result.message)
    lines.append(_switches(s))
    pick = s.get("pick_relative_speed")
    if pick:
        lim = pick["limit"]["value"]
        lines.append(f"tool speed relative to the payload at the pick (t = "
                     f"{pick['time']['value']:.3f} s): {pick['speed']['value']:.3g} m/s"
                     + (f" (limit {lim:g} m/s)" if lim is not None else ""))
    e = s.get("tool_position_error")
    if e:
        lines.append(f"tool position error: RMS {e['rms']['value'] * 1e3:.2f} mm"
                     f"{_against(e['rms']['value'], sc.tracking_rms)}, peak "
                     f"{e['peak']['value'] * 1e3:.2f} mm"
                     f"{_against(e['peak']['value'], sc.tracking_peak)}")
    o = s.get("tool_orientation_error")
    if o:
        lines.append(f"tool orientation error: RMS {o['rms']['value'] * 1e3:.1f} mrad, peak "
                     f"{o['peak']['value'] * 1e3:.1f} mrad")
    if compare is not None:
        err, other = compare
        c = other.summary().get("tool_position_error")
        if c:
            lines.append(f"  with a {err:+.0%} payload-mass error in the "
                         f"controller: RMS {c['rms']['value'] * 1e3:.2f} mm, peak "
                         f"{c['peak']['value'] * 1e3:.2f} mm")
    sat = [n for n, v in s["efforts"].items() if v["saturated_share"]["value"] > 0]
    lines.append("effort limits reached by: " + (", ".join(sat) if sat else "none"))
    for f in s["limit_flags"]:
        lines.append(f"LIMIT PASSED: {f['coordinate']} {f['kind']} {f['peak']['value']:.3g} "
                     f"{f['peak']['unit']} > {f['limit']['value']:.3g} {f['limit']['unit']} "
                     f"(first at t = {f['first_t']['value']:.2f} s)")
    if "min_tip_over_margin" in s:
        lines.append(f"least tip-over margin {s['min_tip_over_margin']['value'] * 1e3:.0f} mm; "
                     f"largest traction use {s['max_traction_use']['value']:.2f} (slip at 1)")
        for sp in s["drive_wheel_lift_off"][:3]:
            lines.append(f"lift-off: {sp['wheel']} from t = {sp['start']['value']:.2f} s to "
                         f"{sp['end']['value']:.2f} s (no grip: traction use unbounded)")
        lines.append(f"load model: {s['load_model']}")
    lines.append("")
    lines.append(f"{'coordinate':<16}{'peak':>12}{'RMS':>12}{'limit':>12}  unit")
    for name, v in s["efforts"].items():
        lim = v["limit"]["value"]
        lines.append(f"{name:<16}{v['peak']['value']:>12.3f}{v['rms']['value']:>12.3f}"
                     f"{('%.1f' % lim) if lim is not None else '–':>12}  {v['peak']['unit']}")
    for name, v in s["wheel_energy_drawn"].items():
        lines.append(f"energy drawn by {name}: {v['value']:.1f} J")
    lines.append("")
    lines += CAUTIONS
    return "\n".join(lines)


def _switches(s):
    """One line: which friction ran in the plant and in the controller."""
    plant = {True: "stick-slip friction on", False: "friction off", None: "friction ?"}
    ff = {True: "friction feed-forward on", False: "friction feed-forward off",
          None: "no friction feed-forward"}
    stops = {True: "joint stops on", False: "joint stops off", None: "joint stops ?"}
    return (f"plant: {plant[s.get('plant_friction')]}, {stops[s.get('joint_stops')]} "
            f"(impulse loss {s['impulse_loss']['value']:.3g} J); controller: "
            f"{ff[s.get('friction_feedforward')]}")


def simulation_html(run, result, images, *, compare=None):
    """The HTML page (str) of a run: verdict, tracking, efforts against their
    limits, stability, energy, the figures and the animation, the assumptions
    and the cautions.  images: [(file name, bytes)] in the order to show."""
    from ._html import Page, fmt

    sc, s = run.scenario, result.summary()
    page = Page(f"opspace simulation: {sc.name}")
    page.heading(f"Simulation: {sc.name}", 1)
    page.para(f"scenario {sc.path.name}; robot {run.robot.description.name}; "
              f"{s['duration']['value']:.2f} s, {result.integrator}, step "
              f"{result.dt * 1e3:g} ms, control {1 / result.control_period:g} Hz, "
              f"{s['loop']} loop", cls="meta")
    if result.status == "completed":
        e = s.get("tool_position_error")
        sat = [n for n, v in s["efforts"].items() if v["saturated_share"]["value"] > 0]
        message = "the run completed" + (
            f"; tool position error RMS {e['rms']['value'] * 1e3:.2f} mm, peak "
            f"{e['peak']['value'] * 1e3:.2f} mm" if e else "") + (
            f"; effort limits reached by: {', '.join(sat) if sat else 'none'}")
        page.verdict("completed", message, cls="fail" if sat else "pass")
    else:
        page.verdict(result.status.replace("_", "-"), result.message, cls="fail")
    page.para(_switches(s), cls="meta")
    page.caution(CAUTIONS)

    page.heading("Tracking")
    rows = []
    model = ("perfect model" if not run.payload_mass_error else
             f"the controller's payload mass off by {run.payload_mass_error:+.0%}")
    e = s.get("tool_position_error")
    if e:
        rows.append([f"tool position error ({model})", fmt(e["rms"]["value"] * 1e3),
                     fmt(e["peak"]["value"] * 1e3), "mm"])
    o = s.get("tool_orientation_error")
    if o:
        rows.append([f"tool orientation error ({model})", fmt(o["rms"]["value"] * 1e3),
                     fmt(o["peak"]["value"] * 1e3), "mrad"])
    if compare is not None:
        err, other = compare
        c = other.summary().get("tool_position_error")
        if c:
            rows.append([f"with a {err:+.0%} payload-mass error in the controller",
                         fmt(c["rms"]["value"] * 1e3), fmt(c["peak"]["value"] * 1e3), "mm"])
    if rows:
        page.table(["", "RMS", "peak", "unit"], rows)
    else:
        page.para("no task error was recorded (no controller information)")

    page.heading("Efforts against their limits")
    rows, classes = [], []
    for name, v in s["efforts"].items():
        lim = v["limit"]["value"]
        share = v["saturated_share"]["value"]
        use = v["peak"]["value"] / lim if lim else None
        rows.append([name, fmt(v["peak"]["value"]), fmt(v["rms"]["value"]),
                     fmt(lim), fmt(None if use is None else 100 * use, 3),
                     fmt(100 * share, 3), v["peak"]["unit"]])
        bad = share > 0 or (use is not None and use >= 1.0)
        classes.append(["", "", "", "", "bad" if bad else "ok", "bad" if share > 0 else "", ""])
    page.table(["coordinate", "peak", "RMS", "limit", "peak / limit %", "time saturated %",
                "unit"], rows, classes=classes)
    page.table(["wheel", "energy drawn"],
               [[name, f"{fmt(v['value'])} J"] for name, v in s["wheel_energy_drawn"].items()])

    if "min_tip_over_margin" in s:
        page.heading("Stability")
        m, u = s["min_tip_over_margin"]["value"], s["max_traction_use"]["value"]
        page.table(["figure", "value", "limit"],
                   [["least tip-over margin (ZMP to the support edge)", f"{fmt(m * 1e3)} mm",
                     "> 0"],
                    ["largest traction use (tyre force / friction limit)", fmt(u), "< 1"]],
                   classes=[["", "ok" if m > 0 else "bad", ""],
                            ["", "ok" if u < 1 else "bad", ""]])
        page.para(f"Load model: {s['load_model']}.")
        for sp in s["drive_wheel_lift_off"]:
            page.para(f"Lift-off: {sp['wheel']} from t = {sp['start']['value']:.2f} s to "
                      f"{sp['end']['value']:.2f} s (no grip there: traction use unbounded).")

    page.heading("3-D view")
    page.raw(simulation_view(run, result))
    page.heading("Figures")
    captions = {
        "tracking_error.png": "Tool position (and orientation) error over the run, with the "
                              "pick and release instants.",
        "efforts.png": "Efforts per coordinate with their limits.",
        "base_path.png": "Base path in the plane with the robot outline at a few instants, the "
                         "tool and its target.",
        "support_zmp.png": "Support polygon, the ZMP over the run and the least margin.",
        "pick.gif": "The robot from the side and from above during the run.",
    }
    for name, data in images:
        page.figure(data, captions.get(name, name),
                    mime="image/gif" if name.endswith(".gif") else "image/png")

    contact = result.extra.get("contact")
    if contact is not None:
        from ._contact import contact_section
        contact_section(page, contact)
    page.heading("Assumptions")
    page.items(SIMULATION_ASSUMPTIONS)
    return page.render()


def write_simulation_outputs(run, result, out_dir, *, compare=None, animate=True,
                             progress=None):
    """Write run.csv, run.npz, summary.json, summary.txt, the figures (PNG),
    pick.gif and report.html (all of them on one self-contained page) into
    out_dir; files appear under their names only once complete.
    compare: (payload_mass_error, SimulationResult) of a second run, or None.

    Returns dict name -> Path.
    """
    from .. import plots
    from .. import plots as sp

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    sc, robot = run.scenario, run.robot
    paths = {}

    def put(name, write):
        """write(tmp) then rename: tmp keeps the suffix (formats follow it)."""
        path = out / name
        tmp = path.with_name(f"{path.stem}.part{path.suffix}")
        write(tmp)
        os.replace(tmp, path)
        paths[name] = path

    put("run.csv", result.to_csv)
    put("run.npz", result.to_npz)
    summary = result.summary()
    if compare is not None:
        err, other = compare
        summary["with_payload_mass_error"] = {
            "payload_mass_error": {"value": err, "unit": "1"},
            **{k: v for k, v in other.summary().items() if k == "tool_position_error"}}
    if "step_check" in result.extra:
        summary["step_check"] = result.extra["step_check"]
    if result.extra.get("contact") is not None:
        from ._contact import contact_summary
        summary["contact"] = contact_summary(result.extra["contact"])
    summary["cautions"] = list(CAUTIONS)
    put("summary.json", lambda p: p.write_text(json.dumps(_finite(summary), indent=2,
                                                          ensure_ascii=False, allow_nan=False)))
    put("summary.txt", lambda p: p.write_text(simulation_text(run, result, compare=compare) + "\n"))
    figs = []
    err = result.error
    orient = np.linalg.norm(err[:, 3:6], axis=1) if err.shape[1] >= 6 else None
    figs.append(("tracking_error.png", sp.tracking_error(
        result.t, result.position_error, orientation_error=orient, pick=sc.pick,
        release=sc.release, limits=tracking_targets(sc) or None)))
    units = ["N·m", "N·m"] + ["N" if u == "m" else "N·m" for u in robot.arm_units]
    figs.append(("efforts.png", sp.efforts(result.t, result.Q, list(result.coordinate_names),
                                           result.effort_limit, saturated=result.saturated,
                                           units=units)))
    poses = np.array([robot.base_pose(q) for q in result.q])
    marks = [0.0, sc.pick, sc.release, result.t[-1]] + [w.t for w in sc.waypoints]
    instants = sorted({int(np.argmin(np.abs(result.t - m))) for m in marks if m is not None})
    if len(instants) > 7:
        instants = [instants[i] for i in np.linspace(0, len(instants) - 1, 7).astype(int)]
    figs.append(("base_path.png", sp.base_path(
        poses[:, 0], poses[:, 1], poses[:, 2], footprint=robot.description.base.footprint,
        instants=instants, tool=result.tool_position, target=result.target_position,
        payload_position=sc.payload_position, wheel_radius=robot.wheel_radius,
        half_track=robot.half_track, t=result.t)))
    if result.stability is not None:
        st = result.stability
        j = int(np.nanargmin(st.margin))
        P = np.array([c.position for c in robot.contacts])
        figs.append(("support_zmp.png", plots.support_polygon_zmp(
            st.polygon.vertices, P, [c.name for c in robot.contacts], st.zmp,
            com=st.wrench.com[:, :2], worst_index=j, t=result.t,
            worst_label=f"min margin {st.margin[j] * 1000:.0f} mm at t = {result.t[j]:.2f} s",
            footprint=robot.description.base.footprint,
            driven=[c.driven for c in robot.contacts], worst_edge=int(st.edge[j]))))
    for k, (name, fig) in enumerate(figs):
        put(name, lambda p, fig=fig: plots.save(fig, p))
        if progress:
            progress(k + 1, len(figs) + 1)
    if animate:
        frames = sp.frames_from_result(robot, result, max_frames=90)
        put("pick.gif", lambda p: sp.animation(frames, p,
                                               footprint=robot.description.base.footprint,
                                               payload_position=sc.payload_position,
                                               wheel_radius=robot.wheel_radius,
                                               half_track=robot.half_track, max_frames=90))
    shown = [name for name, _ in figs] + (["pick.gif"] if animate else [])
    images = [(name, paths[name].read_bytes()) for name in shown]
    put("report.html", lambda p: p.write_text(simulation_html(run, result, images,
                                                              compare=compare),
                                              encoding="utf-8"))
    if progress:
        progress(len(figs) + 1, len(figs) + 1)
    return paths
