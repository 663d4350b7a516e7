"""Outputs of `opspace identify`: identify.html, identify.json and the identified
robot (identified/robot.toml + identified/arm.urdf).  Formats what
`opspace.identify` computed; no physics here."""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np

from ._html import Page, fmt

__all__ = ["identify_summary", "toml_text", "write_identify_outputs"]

CAUTIONS = (
    "Identified parameters are estimates from the logged motion: combinations that the "
    "motion did not excite keep the description's values, and the standard deviations "
    "hold only if the model's structure is right.",
    "Re-run sizing, limits and simulations on the identified robot, and verify on the "
    "hardware; defer to the applicable safety standards and licensed engineering practice.",
)


def _q(value, unit):
    return {"value": value, "unit": unit}


def identify_summary(ident, logs):
    """JSON-ready figures of an Identification (every number with its unit)."""
    p, fit = ident.params, ident.fit
    names = p.names
    combos = fit.base.combinations(names)
    rows = []
    for i, col in enumerate(fit.base.index):
        rows.append({"combination": combos[i], "unit": p.units[col],
                     "prior": fit.beta_prior[i], "estimate": fit.beta[i], "std": fit.std[i]})
    coords = ident.robot.coordinate_names
    out = {"status": "identified" if not ident.consistency else "identified, partly kept",
           "logs": [str(Path(log.path).name) for log in logs],
           "base_parameters": _q(len(fit.base.index), "1"),
           "parameters": _q(p.size, "1"),
           "condition_number": _q(fit.condition, "1"),
           "equations": _q(fit.rows_used, "1"),
           "residual_std": {c: _q(float(s), "N·m or N") for c, s in
                            zip([c for c, m in zip(coords, ident.measured) if m], fit.sigma)},
           "combinations": rows,
           "friction": {c: {"coulomb": _q(ident.value(f"{c}.coulomb"), "N·m or N"),
                            "viscous": _q(ident.value(f"{c}.viscous"), "N·m·s/rad or N·s/m"),
                            "coulomb_prior": _q(ident.prior(f"{c}.coulomb"), "N·m or N"),
                            "viscous_prior": _q(ident.prior(f"{c}.viscous"),
                                                "N·m·s/rad or N·s/m")} for c in coords},
           "not_physical_kept": [{"body": b, "problem": why} for b, why in ident.consistency],
           "cautions": list(CAUTIONS)}
    if p.payload is not None:
        th = ident.theta[p.payload]
        m = float(th[0])
        out["payload"] = {"mass": _q(m, "kg"),
                          "mass_prior": _q(float(p.prior[p.payload][0]), "kg"),
                          "com_in_tool_joint": _q((th[1:4] / m).tolist() if m > 0 else None, "m")}
    return out


def _finite(obj):
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_finite(v) for v in obj]
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    return obj


def _figure(ident):
    """Measured vs predicted efforts of each measured coordinate (first log)."""
    from matplotlib.figure import Figure

    from ..plots import DPI, FIG_WIDTH, figure_to_png_bytes

    d, pred, prior = ident.data[0], ident.tau_pred[0], ident.tau_prior[0]
    coords = [k for k, m in enumerate(ident.measured) if m]
    fig = Figure(figsize=(FIG_WIDTH, 1.5 * len(coords) + 0.8), dpi=DPI)
    axes = fig.subplots(len(coords), 1, sharex=True, squeeze=False)[:, 0]
    for ax, k in zip(axes, coords):
        name = ident.robot.coordinate_names[k]
        unit = "N" if k >= 2 and ident.robot.arm_units[k - 2] == "m" else "N·m"
        ax.plot(d.t, d.tau[:, k], color="#000000", lw=1.0, label="measured (filtered)")
        ax.plot(d.t, pred[:, k], color="#0072B2", lw=1.0, label="identified model")
        ax.plot(d.t, prior[:, k], color="#E69F00", lw=0.9, ls="--", label="description")
        ax.set_ylabel(f"{name}\n[{unit}]", fontsize=8)
        ax.grid(alpha=0.3)
    axes[0].legend(fontsize=7, ncol=3, loc="upper right")
    axes[0].set_title("Efforts: measured, predicted by the identified model and by the "
                      "description", fontsize=10)
    axes[-1].set_xlabel("time [s]")
    fig.subplots_adjust(left=0.14, right=0.98, top=0.95, bottom=0.06, hspace=0.15)
    return figure_to_png_bytes(fig)


def identify_html(ident, summary):
    page = Page("opspace identify")
    page.heading(f"Identification: {ident.robot.name}", level=1)
    kept = summary["not_physical_kept"]
    page.verdict("identified" if not kept else "identified, partly kept",
                 f"{summary['base_parameters']['value']} identifiable combinations of "
                 f"{summary['parameters']['value']} parameters from "
                 f"{summary['equations']['value']} equations ({', '.join(summary['logs'])}); "
                 f"condition number {summary['condition_number']['value']:.3g}"
                 + (f"; {len(kept)} body or parameter kept at the description's values "
                    f"(not physical)" if kept else ""), cls="pass" if not kept else "info")
    page.caution(CAUTIONS)
    if "payload" in summary:
        pl = summary["payload"]
        page.para(f"Payload: {fmt(pl['mass']['value'], 4)} kg (description "
                  f"{fmt(pl['mass_prior']['value'], 4)} kg).")
    page.heading("Friction per coordinate")
    page.table(["coordinate", "Coulomb", "description", "viscous", "description"],
               [[c, fmt(f["coulomb"]["value"]), fmt(f["coulomb_prior"]["value"]),
                 fmt(f["viscous"]["value"]), fmt(f["viscous_prior"]["value"])]
                for c, f in summary["friction"].items()])
    page.heading("Residuals")
    page.table(["coordinate", "residual standard deviation"],
               [[c, f"{fmt(v['value'])} {v['unit']}"] for c, v in summary["residual_std"].items()])
    page.figure(_figure(ident), "Efforts over the first log.")
    page.heading("Identifiable combinations (base parameters)")
    rows, classes = [], []
    for r in summary["combinations"]:
        rel = abs(r["std"] / r["estimate"]) if r["estimate"] else math.inf
        change = (r["estimate"] - r["prior"]) / abs(r["prior"]) if r["prior"] else math.nan
        rows.append([r["combination"], r["unit"], fmt(r["prior"], 4), fmt(r["estimate"], 4),
                     "–" if math.isnan(change) else f"{change:+.1%}", fmt(r["std"], 2),
                     "–" if math.isinf(rel) else f"{rel:.1%}"])
        classes.append([""] * 6 + ["bad" if rel > 0.2 else ""])
    page.para("Each row is one combination β = θ_b + Σ k θ_d that the data determine; a "
              "relative standard deviation above 20 % (marked) means the motion barely "
              "excited it.")
    page.table(["combination", "unit", "description", "identified", "change",
                "std", "relative std"], rows, left=(0, 1), classes=classes)
    if kept:
        page.heading("Kept at the description's values")
        page.items([f"{k['body']}: {k['problem']}" for k in kept])
    return page.render()


def toml_text(doc):
    """A description dict as TOML: tables, [a.b] sub-tables, [[a]] arrays of tables."""
    def value(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v, ensure_ascii=False)
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(float(v)) if isinstance(v, float) else str(v)

    lines = []
    for key, table in doc.items():
        if isinstance(table, list):
            for entry in table:
                lines += ["", f"[[{key}]]"] + [f"{k} = {value(v)}" for k, v in entry.items()]
            continue
        lines += ["", f"[{key}]"]
        lines += [f"{k} = {value(v)}" for k, v in table.items() if not isinstance(v, dict)]
        for sub, st in table.items():
            if isinstance(st, dict):
                lines += ["", f"[{key}.{sub}]"] + [f"{k} = {value(v)}" for k, v in st.items()]
    return "\n".join(lines).lstrip() + "\n"


def write_identify_outputs(ident, logs, doc, urdf_text, out_dir):
    """identify.html, identify.json, identified/robot.toml + identified/arm.urdf."""
    from ..identify import corrected_description

    out = Path(out_dir)
    summary = _finite(identify_summary(ident, logs))
    new_doc, new_urdf, kept = corrected_description(ident, doc, urdf_text)
    new_doc["robot"]["arm_urdf"] = "arm.urdf"
    new_doc["robot"]["name"] = f"{new_doc['robot']['name']} (identified)"
    summary["kept_at_description"] = kept
    texts = {"identify.html": identify_html(ident, summary),
             "identify.json": json.dumps(summary, indent=2, ensure_ascii=False,
                                         allow_nan=False) + "\n",
             "identified/robot.toml": "# written by opspace identify\n" + toml_text(new_doc),
             "identified/arm.urdf": new_urdf}
    paths = {}
    for name, text in texts.items():
        path = out / name
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".part")
        tmp.write_text(text, encoding="utf-8")
        os.replace(tmp, path)
        paths[name] = path
    return paths
