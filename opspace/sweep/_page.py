"""The sweep page: a self-contained HTML file (figures embedded) with the
feasible region, the Pareto front of two figures (`pareto`), a
parallel-coordinates plot and the best designs.  Formats what the sweep
computed; no physics here.
"""

from __future__ import annotations

import html
import math
import os
from pathlib import Path

import numpy as np
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from ..plots import DPI, FIG_WIDTH, figure_to_png_bytes
from ..report import Page, fmt
from ..report import CAUTIONS
from ._pareto import _num, _xy

__all__ = ["SWEEP_CAUTIONS", "feasible_region", "parallel_coordinates", "pareto_plot",
           "sweep_html", "write_page"]

# Okabe & Ito, "Color Universal Design" (2008; hex values recalled from memory),
# the palette of opspace.plots.
_PASS, _FAIL, _FRONT, _BASE, _GREY = "#009E73", "#D55E00", "#0072B2", "#CC79A7", "#9A9A9A"
_SHARE = LinearSegmentedColormap.from_list("share feasible", [_FAIL, "#F0E442", _PASS])
MAX_REGION_PARAMETERS = 5
MAX_AXES = 10

SWEEP_CAUTIONS = (
    "A sweep samples the design space: the Pareto front and the best designs are the best "
    "of the sampled points, not optima; refine around them before deciding.",
    "Values not varied keep their base-file values (a changed payload mass keeps the "
    "payload's inertia and centre of mass; a changed gear ratio keeps the rotor).",
)


# ------------------------------------------------------------------ figures
def _figure(height, **kw):
    return Figure(figsize=(FIG_WIDTH, height), dpi=DPI, layout="constrained", **kw)


def pareto_plot(x, y, feasible, front, *, base=None, x_label, y_label, x_goal="min",
                y_goal="max", constraints=(), title="Pareto front"):
    """Scatter of two figures over the sized points, the front drawn as a step line.

    x, y : (n,) figures of the sized points; feasible : (n,) bool;
    front : indices of the front (ordered along x); base : (x, y) of the base
    design or None; constraints : [(axis "x"/"y", value, label)] limit lines.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    feasible = np.asarray(feasible, bool)
    fig = _figure(5.2)
    ax = fig.add_subplot()
    bad = ~feasible
    ax.scatter(x[bad], y[bad], marker="x", s=28, color=_FAIL, alpha=0.75,
               label=f"not feasible ({int(bad.sum())})")
    ax.scatter(x[feasible], y[feasible], marker="o", s=26, color=_PASS, alpha=0.8,
               label=f"feasible ({int(feasible.sum())})")
    if front:
        f = np.array(front)
        f = f[np.argsort(x[f])]
        # the best y attainable with x no worse: a step held until the next point
        where = "post" if x_goal == "min" else "pre"
        ax.step(x[f], y[f], where=where, color=_FRONT, lw=1.6, zorder=3)
        ax.scatter(x[f], y[f], s=70, facecolor="none", edgecolor=_FRONT, lw=1.8, zorder=4,
                   label=f"Pareto front ({len(front)})")
    if base is not None and all(np.isfinite(base)):
        ax.scatter([base[0]], [base[1]], marker="*", s=220, color=_BASE, edgecolor="k",
                   lw=0.6, zorder=5, label="base design")
    for axis, value, label in constraints:
        (ax.axvline if axis == "x" else ax.axhline)(value, color=_FAIL, ls="--", lw=1.2,
                                                     label=label)
    better = (f"better: {'lower' if x_goal == 'min' else 'higher'} {x_label.split(' [')[0]}, "
              f"{'lower' if y_goal == 'min' else 'higher'} {y_label.split(' [')[0]}")
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    ax.set_title(title)
    ax.text(0.01, 0.01, better, transform=ax.transAxes, fontsize=8, color="#444",
            va="bottom", ha="left")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="best")
    return fig


def _codes(values):
    """Numbers to plot for a parameter's values (names -> 0, 1, ...) and tick labels."""
    if all(isinstance(v, str) for v in values):
        names = list(dict.fromkeys(values))
        return np.array([names.index(v) for v in values], float), names
    return np.array(values, float), None


def _bins(v, names):
    """Group keys for shares: the distinct values, or 8 bins for many values."""
    distinct = np.unique(v)
    if names is not None or len(distinct) <= 12:
        return v, distinct
    edges = np.linspace(v.min(), v.max(), 9)
    k = np.clip(np.digitize(v, edges[1:-1]), 0, 7)
    centres = 0.5 * (edges[:-1] + edges[1:])
    return centres[k], centres


def feasible_region(columns, feasible, *, labels, failed=None,
                    title="Feasible region: share of feasible designs"):
    """Scatter matrix of the parameters coloured by the share of feasible designs.

    columns : list of (n,) parameter values (numbers or names); feasible : (n,)
    bool; labels : axis labels; failed : (n,) bool, points that did not size
    (counted as not feasible).  Lower triangle: each parameter pair, one
    marker per distinct pair of values coloured by the share of the designs
    there that are feasible; diagonal: the share per value of each parameter.
    """
    k = len(columns)
    feasible = np.asarray(feasible, bool)
    coded = [_codes(list(c)) for c in columns]
    fig = _figure(2.1 + 1.75 * k if k > 1 else 3.4)
    axes = fig.subplots(k, k, squeeze=False)
    for i in range(k):
        for j in range(k):
            ax = axes[i][j]
            if j > i:
                ax.set_axis_off()
                continue
            vj, names_j = coded[j]
            gj, _ = _bins(vj, names_j)
            if i == j:
                keys = np.unique(gj)
                share = [feasible[gj == g].mean() for g in keys]
                width = 0.8 * (np.min(np.diff(keys)) if len(keys) > 1 else 1.0)
                ax.bar(keys, share, width=width, color=_SHARE(np.array(share)),
                       edgecolor="#555", lw=0.5)
                ax.set_ylim(0, 1.05)
                ax.set_ylabel("share feasible", fontsize=7)
            else:
                vi, names_i = coded[i]
                gi, _ = _bins(vi, names_i)
                pairs = np.unique(np.column_stack([gj, gi]), axis=0)
                share = np.array([feasible[(gj == a) & (gi == b)].mean() for a, b in pairs])
                ax.scatter(pairs[:, 0], pairs[:, 1], c=share, cmap=_SHARE, vmin=0, vmax=1,
                           s=46 if len(pairs) < 60 else 18, edgecolor="#555", lw=0.4)
                if names_i is not None:
                    ax.set_yticks(range(len(names_i)), names_i)
                elif len(np.unique(vi)) <= 6:
                    ax.set_yticks(np.unique(vi), [fmt(v) for v in np.unique(vi)])
                if j == 0:
                    ax.set_ylabel(labels[i], fontsize=8)
            if names_j is not None:
                ax.set_xticks(range(len(names_j)), names_j)
            elif len(np.unique(vj)) <= 6:
                ax.set_xticks(np.unique(vj), [fmt(v) for v in np.unique(vj)])
            if i == k - 1:
                ax.set_xlabel(labels[j], fontsize=8)
            ax.tick_params(labelsize=7)
            ax.grid(alpha=0.25)
    sm = fig.colorbar(_scalar_mappable(), ax=[a for row in axes for a in row], shrink=0.6,
                      location="right")
    sm.set_label("share of designs feasible")
    n_failed = 0 if failed is None else int(np.sum(failed))
    fig.suptitle(title + (f" ({n_failed} points did not size: counted as not feasible)"
                          if n_failed else ""), fontsize=10)
    return fig


def _scalar_mappable():
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize

    return ScalarMappable(norm=Normalize(0, 1), cmap=_SHARE)


def parallel_coordinates(columns, labels, feasible, front, *,
                         title="Parallel coordinates: parameters and figures"):
    """One polyline per sized design across parameter and figure axes.

    columns : list of (n,) values (numbers or names), each axis scaled to its
    own finite range (its minimum and maximum written at its ends; a
    non-finite or missing value leaves a gap); feasible : (n,) bool; front :
    indices on the Pareto front (drawn bold).
    """
    m = len(columns)
    coded = [_codes(list(c)) for c in columns]
    V = np.column_stack([c for c, _ in coded]).astype(float)
    V[~np.isfinite(V)] = np.nan          # ±inf and missing values leave a gap in the line
    with np.errstate(all="ignore"):
        lo = np.array([np.nanmin(c) if np.isfinite(c).any() else 0.0 for c in V.T])
        hi = np.array([np.nanmax(c) if np.isfinite(c).any() else 1.0 for c in V.T])
        span = np.where(hi > lo, hi - lo, 1.0)
        U = (V - lo) / span
    fig = _figure(4.8)
    ax = fig.add_subplot()
    xs = np.arange(m)
    feasible = np.asarray(feasible, bool)
    front = set(front)
    for idx in np.flatnonzero(~feasible):
        ax.plot(xs, U[idx], color=_GREY, alpha=0.35, lw=0.8)
    for idx in np.flatnonzero(feasible):
        if idx not in front:
            ax.plot(xs, U[idx], color=_PASS, alpha=0.55, lw=1.0)
    for idx in front:
        ax.plot(xs, U[idx], color=_FRONT, alpha=0.95, lw=2.2)
    for x in xs:
        ax.axvline(x, color="#333", lw=0.8)
        names = coded[x][1]
        top = names[int(hi[x])] if names else fmt(hi[x])
        bottom = names[int(lo[x])] if names else fmt(lo[x])
        ax.text(x, 1.03, top, ha="center", va="bottom", fontsize=7)
        ax.text(x, -0.03, bottom, ha="center", va="top", fontsize=7)
    ax.set_xticks(xs, labels, rotation=20, ha="right", fontsize=7)
    ax.set_yticks([])
    ax.set_ylim(-0.12, 1.12)
    ax.set_xlim(-0.3, m - 0.7)
    ax.set_ylabel("each axis: its minimum (bottom) to its maximum (top)", fontsize=8)
    ax.set_title(title)
    fig.legend(handles=[Line2D([], [], color=_GREY, label="not feasible"),
                        Line2D([], [], color=_PASS, label="feasible"),
                        Line2D([], [], color=_FRONT, lw=2.2, label="Pareto front")],
               fontsize=8, loc="outside lower center", ncol=3)
    return fig


# ------------------------------------------------------------------ page
def _label(result, text):
    """A figure's label (its [labels] entry, else its path) with its unit."""
    unit = result.units.get(text)
    name = result.sweep.labels.get(text, text)
    return f"{name} [{unit}]" if unit and unit != "1" else name


def _value(v):
    if isinstance(v, float):
        return fmt(v, 4)
    if isinstance(v, (list, dict)):
        return str(v)
    return fmt(v)


def _base_value(p):
    """A parameter's value in the base files, as text."""
    if p.base is None:
        return "default"
    if p.action == "select":
        return "all: " + ", ".join(e["name"] for e in p.base)
    if p.action == "one":
        return ", ".join(fmt(v) for v in p.base)
    return _value(p.base)


def _plots(result):
    """(png, caption) of the Pareto plot, the region and parallel coordinates."""
    sweep = result.sweep
    ok = [r for r in result.records if r.ok]
    out = []
    feas = set(result.feasible)
    if ok:
        x, y = _xy(sweep, ok)
        mask = np.array([r.id in feas for r in ok])
        front = [i for i, r in enumerate(ok) if r.id in set(result.pareto)]
        bx, by = (_num(result.base.figures.get(sweep.pareto[0])),
                  _num(result.base.figures.get(sweep.pareto[2])))
        lines = []
        for c in sweep.constraints:
            axis = "x" if c.figure == sweep.pareto[0] else ("y" if c.figure == sweep.pareto[2]
                                                             else None)
            for v in (c.min, c.max):
                if axis and v is not None:
                    lines.append((axis, v, f"limit {c}"))
        fig = pareto_plot(x, y, mask, front, base=(bx, by), x_label=_label(result, sweep.pareto[0]),
                          y_label=_label(result, sweep.pareto[2]), x_goal=sweep.pareto[1],
                          y_goal=sweep.pareto[3], constraints=lines,
                          title="Pareto front of the feasible designs")
        out.append((figure_to_png_bytes(fig),
                    f"Each sized design point by {_name(sweep, sweep.pareto[0])} "
                    f"({sweep.pareto[1]}imise) and {_name(sweep, sweep.pareto[2])} "
                    f"({sweep.pareto[3]}imise). Feasible: "
                    f"{_feasible_rule(sweep)}. Points that failed to size are not drawn."))
    params = list(sweep.parameters[:MAX_REGION_PARAMETERS])
    recs = list(result.records)
    fig = feasible_region([[r.values[p.key] for r in recs] for p in params],
                          [r.id in feas for r in recs], labels=[p.title() for p in params],
                          failed=[not r.ok for r in recs])
    more = len(sweep.parameters) - len(params)
    out.append((figure_to_png_bytes(fig),
                "Share of the design points that are feasible, per value of each parameter "
                "(diagonal) and per pair of values (below it; every point, failed ones count "
                "as not feasible)." + (f" The first {len(params)} parameters are shown ({more} "
                                       f"more in the CSV)." if more else "")))
    if ok:
        numeric = [f.text for f in sweep.figures
                   if all(isinstance(r.figures.get(f.text), (int, float))
                          and not isinstance(r.figures.get(f.text), bool) for r in ok)]
        keep = [sweep.pareto[0], sweep.pareto[2]]
        numeric = keep + [t for t in numeric if t not in keep]
        cols = [(p.title(), [r.values[p.key] for r in ok]) for p in sweep.parameters]
        cols += [(_label(result, t), [_num(r.figures.get(t)) for r in ok]) for t in numeric]
        cols = cols[:MAX_AXES]
        front = [i for i, r in enumerate(ok) if r.id in set(result.pareto)]
        fig = parallel_coordinates([c for _, c in cols], [n for n, _ in cols],
                                   [r.id in feas for r in ok], front)
        out.append((figure_to_png_bytes(fig),
                    "Every sized design as a line across the parameters (left) and the figures "
                    "(right), each axis scaled to its own range."))
    return out


def _name(sweep, text):
    label = sweep.labels.get(text)
    return f"{label} ({text})" if label else text


def _feasible_rule(sweep):
    parts = ["sized"]
    if sweep.require_pass:
        parts.append("verdict pass")
    parts += [str(c) for c in sweep.constraints]
    return ", ".join(parts)


def _best(result):
    """The records of the best-designs table: the Pareto front in order of the
    first figure, or, with no feasible design, the sized ones by the second."""
    sweep = result.sweep
    by = {r.id: r for r in result.records}
    sign_x = 1.0 if sweep.pareto[1] == "min" else -1.0
    sign_y = 1.0 if sweep.pareto[3] == "min" else -1.0
    if result.pareto:
        rows = sorted((by[i] for i in result.pareto),
                      key=lambda r: sign_x * _num(r.figures.get(sweep.pareto[0])))
        return rows[:sweep.best], True
    ok = [r for r in result.records if r.ok and math.isfinite(_num(r.figures.get(sweep.pareto[2])))]
    ok.sort(key=lambda r: sign_y * _num(r.figures.get(sweep.pareto[2])))
    return ok[:sweep.best], False


def _head(page, result):
    sweep, names = result.sweep, result.sweep.documents.names
    page.heading(f"Design-space sweep: {sweep.name}", level=1)
    page.para(f"{sweep.path.name}: {len(result.records)} design points over "
              f"{len(sweep.parameters)} parameters, base duty cycle {names['cycle']} (robot "
              f"{names['robot']}, catalogue {names['catalogue'] or 'none'}); worst-case search "
              f"{'on' if sweep.search else 'off'}; {result.executor}; {len(result.computed)} "
              f"points computed in {result.compute_time:.1f} s, {result.reused} reused.",
              cls="meta")
    cls = "pass" if result.feasible else "fail"
    head = f"{len(result.feasible)} FEASIBLE" if result.feasible else "NO FEASIBLE DESIGN"
    page.raw(f'<div class="verdict {cls}"><b>{html.escape(head)}</b> — '
             f"{html.escape(result.message)}</div>")
    page.caution(CAUTIONS + SWEEP_CAUTIONS)


def _best_table(page, result):
    sweep = result.sweep
    rows, on_front = _best(result)
    x_text, _, y_text, _ = sweep.pareto
    if on_front:
        page.para(f"The Pareto front of {_name(sweep, x_text)} and {_name(sweep, y_text)} "
                  f"among the feasible designs ({_feasible_rule(sweep)}), {len(rows)} of "
                  f"{len(result.pareto)} shown in order of {sweep.labels.get(x_text, x_text)}.")
    else:
        page.para(f"No design point is feasible ({_feasible_rule(sweep)}); the sized points "
                  f"with the best {_name(sweep, y_text)} are listed instead.")
    shown = [x_text, y_text] + [f.text for f in sweep.figures
                                if f.text not in (x_text, y_text)][:4]
    header = (["id"] + [p.title() for p in sweep.parameters] + ["verdict"]
              + [_label(result, t) for t in shown])
    body, cls = [], []
    for r in rows:
        body.append([r.id] + [_value(r.values[p.key]) for p in sweep.parameters]
                    + [r.verdict or "–"] + [_value(r.figures.get(t)) for t in shown])
        cls.append([""] * (len(sweep.parameters) + 1) + ["ok" if r.verdict == "pass" else "bad"]
                   + [""] * len(shown))
    page.table(header, body, left=(0,), classes=cls)
    b = result.base
    page.para("Base design (the files as they are" + (", with [fixed]" if sweep.fixed else "")
              + f"): verdict {b.verdict}, " + ", ".join(
                  f"{_label(result, t)} = {_value(b.figures.get(t))}" for t in shown[:2]) + ".")


def _best_view(page, result):
    """The best design (first row of the best-designs table) in 3-D."""
    from ..description import read_shapes
    from ..report import design_view
    from . import _docs

    rows, on_front = _best(result)
    if not rows:
        return
    best, sweep = rows[0], result.sweep
    point = next(p for p in sweep.points if p.id == best.id)
    d = sweep.documents
    robot = _docs.load_robot_doc(d, _docs.apply(d.docs, sweep.assignments(point))["robot"])
    page.heading("Best design in 3-D")
    shapes = read_shapes(d.urdf_path or d.urdf_name, text=d.urdf_text)
    page.raw(design_view(robot, shapes=shapes, label=f"design {best.id}", caption=(
        f"Design {best.id}, the first of the best-designs table "
        f"({'on the Pareto front' if on_front else 'no feasible design; best sized point'}), "
        f"arm in its zero pose, over its support polygon (green).")))


def _failed_table(page, result, limit=30):
    sweep = result.sweep
    bad = [r for r in result.records if not r.ok]
    if not bad:
        return
    page.heading(f"Points that did not size ({len(bad)})")
    page.table(["id", "status"] + [p.title() for p in sweep.parameters] + ["message"],
               [[r.id, r.status] + [_value(r.values[p.key]) for p in sweep.parameters]
                + [r.message] for r in bad[:limit]],
               left=(0, 1, len(sweep.parameters) + 2))
    if len(bad) > limit:
        page.para(f"{len(bad) - limit} more in sweep.csv.")


def sweep_html(result):
    """The whole sweep page as a string: verdict, cautions, best designs, the
    Pareto front, the feasible region, parallel coordinates, parameters, the
    points that did not size."""
    sweep = result.sweep
    page = Page(f"opspace sweep — {sweep.name}")
    _head(page, result)
    plots = iter(_plots(result))
    page.heading("Best designs")
    _best_table(page, result)
    if any(r.ok for r in result.records):
        page.heading("Pareto front")
        page.figure(*next(plots))
    page.heading("Feasible region")
    page.figure(*next(plots))
    _best_view(page, result)
    par = next(plots, None)
    if par:
        page.heading("Parameters and figures of every design")
        page.figure(*par)
    page.heading("Parameters")
    page.table(["key", "label", "sampling", "base value"],
               [[p.key, p.label, p.spec, _base_value(p)] for p in sweep.parameters],
               left=(0, 1, 2, 3))
    if sweep.fixed:
        page.para("Fixed for every point: " + "; ".join(f"{k} = {_value(v)}"
                                                         for k, _, _, _, v in sweep.fixed) + ".")
    _failed_table(page, result)
    page.heading("Figures collected")
    page.items([_name(sweep, f.text) + (f" [{result.units.get(f.text)}]"
                                         if result.units.get(f.text) else "")
                for f in sweep.figures])
    page.heading("Cautions")
    page.items(CAUTIONS + SWEEP_CAUTIONS)
    return page.render()


def write_page(result, path):
    """Write sweep.html (under a temporary name, then renamed)."""
    path = Path(path)
    text = sweep_html(result)
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)
    return path
