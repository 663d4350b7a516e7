"""The motion-limits report: limits.html (heat maps, named poses, cautions),
limits.json and limits.csv (a lookup table a planner can load).  Formats what
`opspace.limits` computed; no physics here."""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np

from ..limits import CAUTIONS, NAMES, UNITS
from ._html import Page, fmt

__all__ = ["write_limits_report"]

_TITLES = {"acceleration": "Forward acceleration", "deceleration": "Braking deceleration",
           "yaw_acceleration": "Yaw acceleration",
           "lateral_acceleration": "Lateral acceleration in a turn"}


def _num(x):
    x = float(x)
    return None if math.isnan(x) else (x if math.isfinite(x) else ("inf" if x > 0 else "-inf"))


def _grid(a):
    return [[_num(x) for x in row] for row in np.asarray(a, float)]


def _options(study):
    o = dict(study.options)
    payload = o.get("payload")
    o["payload"] = "as attached" if payload is None else (
        bool(payload) if isinstance(payload, bool) else "given")
    o.pop("candidate", None)
    return o


def limits_document(study, robot):
    """The JSON document of a study (plain types; nan -> null)."""
    poses = []
    for k, name in enumerate(study.poses.names):
        row = {"name": name, "status": study.poses.status[k],
               "arm": dict(zip(robot.arm_joint_names, study.poses.arm[k].tolist()))}
        for n in NAMES:
            row[n] = {"value": _num(study.poses.values[n][k]), "unit": UNITS[n],
                      "limited_by": study.poses.limited_by[n][k]}
        if study.stopping_length is not None:
            row["protective_speed"] = {"value": _num(study.field_speed(
                study.poses.values["deceleration"][k])), "unit": "m/s"}
        poses.append(row)
    maps = [{"view": m.view, "axes": list(m.axes), "level": m.level,
             "level_axis": "y" if m.view == "side" else "z", "unit": "m",
             "u": m.u.tolist(), "v": m.v.tolist(), "rule": m.rule,
             "values": {n: _grid(m.values[n]) for n in NAMES},
             "limited_by": {n: m.limited_by[n].tolist() for n in NAMES},
             "status": m.status.tolist()} for m in study.maps]
    return {"robot": study.robot, "status": study.status, "options": _options(study),
            "policy": study.policy, "drive": study.drive,
            "units": {**UNITS, "protective_speed": "m/s", "grid": "m"},
            "protective_field": None if study.stopping_length is None else {
                "stopping_length": study.stopping_length, "reaction_time": study.reaction_time,
                "top_speed": _num(study.top_speed),
                "model": "v t_r + v² / (2 a_d) <= stopping length, a_d the braking limit"},
            "poses": poses, "maps": maps, "cautions": list(CAUTIONS)}


def _write_csv(study, robot, path):
    header = ["source", "name", "x", "y", "z", "status"]
    header += [f"{n} [{UNITS[n]}]" for n in NAMES] + [f"{n} limited_by" for n in NAMES]
    field = study.stopping_length is not None
    if field:
        header.append("protective_speed [m/s]")
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        for k, name in enumerate(study.poses.names):
            row = ["pose", name, *(f"{x:.6g}" for x in study.poses.tool[k]),
                   study.poses.status[k]]
            row += [fmt(study.poses.values[n][k], 8) for n in NAMES]
            row += [study.poses.limited_by[n][k] for n in NAMES]
            if field:
                row.append(fmt(study.field_speed(study.poses.values["deceleration"][k]), 8))
            w.writerow(row)
        for m in study.maps:
            for (i, j), status in np.ndenumerate(m.status):
                xyz = ((m.u[j], m.level, m.v[i]) if m.view == "side" else
                       (m.u[j], m.v[i], m.level))
                row = [f"{m.view} map", "", *(f"{x:.6g}" for x in xyz), status]
                row += ["" if math.isnan(m.values[n][i, j]) else fmt(m.values[n][i, j], 8)
                        for n in NAMES]
                row += [m.limited_by[n][i, j] for n in NAMES]
                if field:
                    d = m.values["deceleration"][i, j]
                    row.append("" if math.isnan(d) else fmt(study.field_speed(d), 8))
                w.writerow(row)


def _page(study, robot):
    from ..plots import figure_to_png_bytes
    from ..plots import limit_heat_map

    page = Page(f"Motion limits — {study.robot}")
    page.heading(f"Motion limits — {study.robot}", level=1)
    held = sum(s == "ok" for s in study.poses.status)
    message = (f"{held} of {len(study.poses.names)} named poses held at rest; "
               f"{len(study.maps)} map(s). Drive: {study.drive}.")
    page.verdict("ok" if study.status == "ok" else "attention", message,
                 cls="info" if study.status == "ok" else "fail")
    page.caution(CAUTIONS)
    o = _options(study)
    pol = study.policy
    mu = o.get("friction")
    mu = f"{robot.ground_friction:g} (described)" if mu is None else f"{mu:g}"
    page.para(f"Options: payload {o.get('payload')}, friction {mu}, "
              f"grade {o.get('grade', 0.0)}, speed {o.get('speed', 0.0)} m/s; margins: ZMP at "
              f"least {pol['zmp_margin']['value']:g} m inside the support polygon, traction use "
              f"at most {pol['traction_ceiling']['value']:g}.", cls="meta")
    page.heading("Named poses")
    header = ["pose", "status"] + [f"{_TITLES[n]} [{UNITS[n]}]" for n in NAMES]
    if study.stopping_length is not None:
        header.append("protective-field speed [m/s]")
    rows, classes = [], []
    for k, name in enumerate(study.poses.names):
        row = [name, study.poses.status[k]]
        row += [f"{fmt(study.poses.values[n][k])} ({study.poses.limited_by[n][k]})"
                for n in NAMES]
        if study.stopping_length is not None:
            row.append(fmt(study.field_speed(study.poses.values["deceleration"][k])))
        rows.append(row)
        classes.append(["", "ok" if study.poses.status[k] == "ok" else "bad"] +
                       [""] * (len(row) - 2))
    page.table(header, rows, left=(0, 1), classes=classes)
    if study.stopping_length is not None:
        page.para(f"Protective field: the largest speed whose stop fits in "
                  f"{study.stopping_length:g} m with a reaction time of "
                  f"{study.reaction_time:g} s at the braking limit "
                  f"(v t_r + v²/(2 a) = length), capped at the top speed.", cls="meta")
    mount = robot.description.mount_xyz
    for m in study.maps:
        where = (f"side view at y = {m.level:.3g} m" if m.view == "side" else
                 f"top view at z = {m.level:.3g} m")
        page.heading(f"Map over tool positions — {where}")
        page.para(f"Redundancy: {m.rule}. {int(np.sum(m.status == 'ok'))} of {m.status.size} "
                  f"grid points reached and held.", cls="meta")
        mark = ("mount", mount[0], mount[2] if m.view == "side" else mount[1])
        for n in NAMES:
            fig = limit_heat_map(m.u, m.v, m.values[n], m.limited_by[n], title=_TITLES[n],
                                 unit=UNITS[n], axes=m.axes, marks=[mark])
            page.figure(figure_to_png_bytes(fig), f"{_TITLES[n]}, {where}: the limit (left) "
                        f"and what limits it (right).")
    return page.render()


def write_limits_report(study, robot, out_dir):
    """Write limits.html, limits.json and limits.csv into `out_dir`; their paths."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = {"json": out / "limits.json", "csv": out / "limits.csv", "html": out / "limits.html"}
    paths["json"].write_text(json.dumps(limits_document(study, robot), indent=1,
                                        ensure_ascii=False) + "\n", encoding="utf-8")
    _write_csv(study, robot, paths["csv"])
    paths["html"].write_text(_page(study, robot), encoding="utf-8")
    return paths
