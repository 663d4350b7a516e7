"""The contact pre-check in reports: a section for the size and simulate pages,
the page of `opspace contact`, contact.json and contact.csv.  Formats what
`opspace.contact` computed; no physics here."""

from __future__ import annotations

import csv
import json
import math
import os
from pathlib import Path

from ._html import Page, fmt

__all__ = ["contact_html", "contact_section", "contact_summary", "write_contact_report"]

_UNITS = {"height": "m", "position": "m", "direction": "1", "speed": "m/s", "whole_body": "kg",
          "base_locked": "kg", "simple": "kg", "simple_arm": "kg", "rotor_share": "1",
          "v_whole_body": "m/s", "v_base_locked": "m/s", "v_simple": "m/s", "use": "1",
          "time": "s", "v_max": "m/s", "mass": "kg", "arm": "rad or m"}


def _with_units(d):
    """Each number (or list of numbers) of a flat dict as {"value", "unit"}."""
    return {k: ({"value": v, "unit": _UNITS[k]} if k in _UNITS else v) for k, v in d.items()}


def contact_summary(check):
    """The contact pre-check for summary.json of `opspace size` / `simulate`:
    every number as {"value", "unit"} (non-finite values are the writer's to map)."""
    r = check.regions
    out = {"status": check.status, "message": check.message, "pose": check.pose,
           "regions": {"source": r.source, "from_memory": r.from_memory, "file": r.path.name},
           "at_pose": [_with_units({k: v for k, v in m.to_dict().items() if k != "units"})
                       for m in check.at_pose],
           "heaviest": [_with_units({"name": h["name"], "mass": h["mass"],
                                     "direction": list(h["direction"]),
                                     "arm": [float(x) for x in h["arm"]]})
                        for h in check.heaviest]}
    if check.track is not None:
        out["along_motion"] = {"status": check.track.status,
                               "worst": [_with_units(w) for w in check.track.worst()]}
    return out


def _v(x, digits=3):
    return "–" if x is None or (isinstance(x, float) and math.isnan(x)) else fmt(x, digits)


def _mass(x):
    return "∞ (cannot move this way)" if x is not None and math.isinf(x) else _v(x)


def _pose_rows(check):
    rows, classes = [], []
    for m in check.at_pose:
        use = m.use if check.speed is not None else None
        rows.append([m.name, m.region or "no region at this height", _v(m.height),
                     _mass(m.whole_body), _mass(m.base_locked), _v(m.simple), _v(m.simple_arm),
                     f"{m.rotor_share:.0%}", _v(m.v_whole_body), _v(m.v_base_locked),
                     _v(m.v_simple), "–" if use is None else f"{use:.2f}"])
        bad = use is not None and use > 1.0
        classes.append([""] * 11 + ["bad" if bad else ("ok" if use is not None else "")])
    return rows, classes


def contact_section(page, check, *, figures=None, level=2):
    """Append the contact pre-check to `page` (a report.html.Page).

    figures: list of (png bytes, caption) already rendered, or None to render here.
    """
    from ..contact import CAUTIONS

    page.heading("Contact with people (two-body model pre-check)", level=level)
    page.verdict(check.status, check.message,
                 cls={"exceeded": "fail", "within": "pass"}.get(check.status, "info"))
    page.caution(CAUTIONS)
    r = check.regions
    page.para(f"Body regions: {r.source} ({r.path.name})"
              + ("; values entered from memory: verify them against the standard." if r.from_memory
                 else "."), cls="meta")
    page.para(f"At pose '{check.pose}', along each point's direction of interest. Effective "
              "mass m_u = 1/(uᵀ Λ⁻¹ u): whole body (wheels free, rolling constraints), base "
              "locked (arm only), and the hand estimate (half the moving mass plus the "
              "payload, whole robot / arm only). Permissible speed v = F_T / √(μ k), "
              "μ = (1/m_H + 1/m_R)⁻¹.")
    rows, classes = _pose_rows(check)
    page.table(["point", "body region", "height [m]", "m whole body [kg]", "m base locked [kg]",
                "hand estimate, robot [kg]", "hand estimate, arm [kg]", "rotor share",
                "v whole body [m/s]", "v base locked [m/s]", "v hand estimate [m/s]",
                "speed use"], rows, left=(0, 1), classes=classes)
    if check.heaviest:
        page.para("Arm pose of highest whole-body effective mass per point (search over the "
                  "joint limits):")
        page.table(["point", "mass [kg]", "direction (base frame)", "arm configuration"],
                   [[h["name"], _v(h["mass"]), ", ".join(f"{x:.2f}" for x in h["direction"]),
                     ", ".join(f"{x:.2f}" for x in h["arm"])] for h in check.heaviest],
                   left=(0, 2, 3))
    if check.track is not None:
        page.para("Along the motion (speed along each point's own direction of motion, mass "
                  "along it), the worst instant per point:")
        page.table(["point", "time [s]", "speed [m/s]", "permissible [m/s]", "mass [kg]",
                    "body region", "speed use"],
                   [[w["name"], _v(w["time"]), _v(w["speed"]), _v(w["v_max"]), _v(w["mass"]),
                     w["region"] or "–", _v(w["use"])] for w in check.track.worst()],
                   left=(0, 5),
                   classes=[[""] * 6 + ["bad" if (w["use"] or 0) > 1 else "ok"]
                            for w in check.track.worst()])
    for image, caption in (figures if figures is not None else contact_figures(check)):
        page.figure(image, caption)


def contact_figures(check, footprint=None):
    """[(png bytes, caption)] of the contact pre-check."""
    from .. import plots as pc
    from ..plots import figure_to_png_bytes

    figs = [(figure_to_png_bytes(pc.contact_masses(
        [m.name for m in check.at_pose], [m.whole_body for m in check.at_pose],
        [m.base_locked for m in check.at_pose], [m.simple for m in check.at_pose])),
        "Effective mass per contact point (whole body, base locked, hand estimate).")]
    if check.track is not None:
        tr = check.track
        figs.append((figure_to_png_bytes(pc.contact_use(tr.t, tr.names, tr.use)),
                     "Speed of each point over its permissible speed along the motion; above "
                     "the dashed line the two-body model's force limit is exceeded."))
    maps = {(m.point, m.view): m for m in check.maps}
    for name in dict.fromkeys(m.point for m in check.maps):
        if (name, "top") in maps and (name, "side") in maps:
            figs.append((figure_to_png_bytes(pc.speed_maps(maps[name, "top"], maps[name, "side"],
                                                           footprint)),
                         f"Lowest permissible speed of {name} over the arm's workspace "
                         f"(worst over the arm configurations that reach each cell)."))
    return figs


def contact_html(check, footprint=None):
    """The page of `opspace contact` (str)."""
    page = Page(f"opspace contact — {check.robot}")
    page.heading(f"Contact pre-check: {check.robot}", level=1)
    contact_section(page, check, figures=contact_figures(check, footprint), level=2)
    return page.render()


def _csv_rows(check):
    yield ["point", "region", "height", "whole_body", "base_locked", "simple", "simple_arm",
           "rotor_share", "v_whole_body", "v_base_locked", "v_simple", "speed", "use"]
    yield ["", "", "m", "kg", "kg", "kg", "kg", "", "m/s", "m/s", "m/s", "m/s", ""]
    for m in check.at_pose:
        d = m.to_dict()
        yield [m.name, m.region or "", *("" if d[k] is None else repr(d[k]) for k in (
            "height", "whole_body", "base_locked", "simple", "simple_arm", "rotor_share",
            "v_whole_body", "v_base_locked", "v_simple", "speed", "use"))]


def write_contact_report(check, out_dir, *, footprint=None):
    """Write contact.html, contact.json and contact.csv (each via a temporary file)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    texts = {"contact.html": contact_html(check, footprint),
             "contact.json": json.dumps(check.to_dict(), indent=2, ensure_ascii=False,
                                        allow_nan=False) + "\n"}
    paths = {}
    for name, text in texts.items():
        tmp = out / (name + ".part")
        tmp.write_text(text, encoding="utf-8")
        paths[name] = out / name
        os.replace(tmp, paths[name])
    tmp = out / "contact.csv.part"
    with tmp.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(_csv_rows(check))
    paths["contact.csv"] = out / "contact.csv"
    os.replace(tmp, paths["contact.csv"])
    return paths
