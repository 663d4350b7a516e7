"""Figures of a simulation run: plain functions from arrays to matplotlib figures.

This module renders; it computes no physics.  Every number drawn comes in as
an argument (from `opspace.simulate`).  The only arithmetic here is for
display:

- norms of error vectors, |e| = √(eₓ² + e_y² + e_z²), and m → mm, rad → mrad;
- the root mean square over time by the trapezoidal rule, the same rule as
  `SimulationResult.summary`:  e_RMS = √(∫ e² dt / T), T = t_end − t_start;
- the planar rigid placement of base-frame drawing points in the world,
  p_W = (x, y, 0) + R_z(θ) p_B,  R_z(θ) = [[cos θ, −sin θ, 0], [sin θ, cos θ, 0],
  [0, 0, 1]] (the base pose (x, y, θ) of DESIGN.md: base frame on the ground,
  z up), used for the chassis outline and, in `frames_from_result`, the arm;
- axis limits and the window of the animation.

Conventions are those of `opspace.plots._style` (its helpers are reused):
SI units in brackets in every axis label (except mm and mrad for the small
tracking errors, said in the labels), limits as labelled lines, a legend
whenever several series are drawn, `FIG_WIDTH` × `DPI` ≈ 900 px wide, and
figures built on `matplotlib.figure.Figure` without pyplot (no global state).
Top views here are in the world frame seen from above: x to the right, y
upwards, equal aspect.
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib import colormaps
from matplotlib.lines import Line2D
from matplotlib.patches import Polygon

from .._common import trapezoid_rms
from ._style import _FAIL, _LIMIT, _OTHERS, _PASS, _WHEEL_COLOURS, FIG_WIDTH, _array, _figure, _limits
from ._topview import _footprint

__all__ = ["base_path", "efforts", "tracking_error"]

_EVENT_COLOURS = {"pick": _PASS, "release": _OTHERS[1]}
_LIMIT_STYLES = [(_LIMIT, "--"), ("#7F3C8D", ":"), ("#8C564B", "-.")]
_MAX_FRAMES = 150


# ------------------------------------------------------------------- helpers
def _trapezoid_rms(t, e):
    """√(∫ e² dt / T) over the finite samples, trapezoidal rule; NaN if < 2."""
    ok = np.isfinite(e)
    t, e = t[ok], e[ok]
    if t.size < 2 or t[-1] <= t[0]:
        return float(np.sqrt(np.mean(e ** 2))) if e.size else math.nan
    return float(trapezoid_rms(t, e))


def _magnitude(name, x, n):
    """(n,) magnitudes, or the row norms of an (n, 3) array of components."""
    a = _array(name, x, (n, None) if np.ndim(x) == 2 else (n,))
    return np.linalg.norm(a, axis=1) if a.ndim == 2 else np.abs(a)


def _event_time(name, value):
    if value is None:
        return None
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"`{name}` must be a finite time in s, got {value!r}")
    return v


def _events(axes, pick, release, label_axis=None):
    """Vertical dotted lines at the payload pick and release, labelled once."""
    for kind, v in (("pick", pick), ("release", release)):
        if v is None:
            continue
        for k, ax in enumerate(axes):
            ax.axvline(v, color=_EVENT_COLOURS[kind], ls=(0, (1, 1.5)), lw=1.6,
                       label=f"payload {kind} (t = {v:.3g} s)"
                       if ax is (label_axis or axes[0]) else None, zorder=2.5)


def _error_panel(ax, t, e, scale, unit, colour, limits, name):
    """One error magnitude (already scaled), its RMS line, its peak marker, its limits."""
    ax.plot(t, e, color=colour, lw=1.3, label=f"|{name}|")
    rms = _trapezoid_rms(t, e)
    top = 0.0
    if np.any(np.isfinite(e)):
        i = int(np.nanargmax(e))
        ax.axhline(rms, color=colour, ls="-.", lw=1.1, label=f"RMS {rms:.3g} {unit}")
        ax.plot([t[i]], [e[i]], ls="none", marker="D", ms=7, mfc=colour, mec="black",
                label=f"peak {e[i]:.3g} {unit} at t = {t[i]:.3g} s", zorder=5)
        top = float(e[i])
    for k, (label, v) in enumerate(limits):
        c, ls = _LIMIT_STYLES[k % len(_LIMIT_STYLES)]
        ax.axhline(v * scale, color=c, ls=ls, lw=1.3, label=label)
        top = max(top, v * scale)
    ax.set_ylim(0.0, 1.12 * top if top > 0 else 1.0)
    return rms


def _limit_items(name, value, scale, unit):
    """Limits given in SI (number or {label: value}); a bare number is labelled
    with its value in the display unit."""
    items = _limits(name, value, "")
    return [(label or f"limit {v * scale:.3g} {unit}", v) for label, v in items]


def _label_row(placed, x, gap):
    """Row (0 or 1) below the outline for an instant's label: the first row
    unless a label there is closer than `gap` (m along x), then the second
    (the tool path usually runs above the base, so both rows are below it);
    records the choice in `placed`."""
    for row in (0, 1):
        if all(abs(x - other) >= gap for other in placed[row]):
            placed[row].append(x)
            return row
    placed[0].append(x)
    return 0


def _outline(fp, pose):
    """World corners (4, 2) of the footprint rectangle at pose (x, y, θ)."""
    x0, x1, y0, y1 = fp[:4]
    return _place(np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]]), pose)


def _place(P, pose):
    """p_W = (x, y) + R_z(θ) p_B for planar points P (k, 2) (module docstring)."""
    x, y, th = pose
    c, s = math.cos(th), math.sin(th)
    return np.column_stack([x + c * P[:, 0] - s * P[:, 1], y + s * P[:, 0] + c * P[:, 1]])


def _wheel_bars(r, b, pose):
    """Two world rectangles (4, 2) each: the wheels seen from above, 2r long,
    0.3 r wide (schematic: the description gives no tyre width)."""
    w = 0.15 * r
    out = []
    for yw in (-b, b):
        out.append(_place(np.array([[-r, yw - w], [r, yw - w], [r, yw + w], [-r, yw + w]]), pose))
    return out


def _check_pose_args(footprint, wheel_radius, half_track):
    fp = None if footprint is None else _footprint(footprint)
    r = None if wheel_radius is None else float(wheel_radius)
    b = None if half_track is None else float(half_track)
    for name, v in (("wheel_radius", r), ("half_track", b)):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise ValueError(f"`{name}` must be a finite length > 0 m, got {v}")
    return fp, r, b


# ------------------------------------------------------------ 1. tracking error
def tracking_error(t, position_error, *, orientation_error=None, pick=None, release=None,
                   limits=None, orientation_limits=None,
                   title="Tool tracking error over the run"):
    """Tool position error |p_d − p| (mm) over time, optionally the orientation error (mrad).

    Each panel draws the error magnitude, its RMS over the run (dash-dot, by
    the trapezoidal rule, as `SimulationResult.summary`), its peak (diamond,
    value and time in the legend) and the given limits (horizontal lines);
    dotted vertical lines mark the payload pick and release.  NaN samples
    (no target) are gaps, left out of RMS and peak.

    Parameters
    ----------
    t : ndarray, shape (n,)                 time, s
    position_error : ndarray, shape (n,) or (n, 3)
        m: the magnitude |p_d − p|, or its world components (the norm is drawn).
    orientation_error : ndarray, shape (n,) or (n, 3), optional
        rad: the rotation angle, or the SO(3) log of the orientation error
        (the norm is drawn), in a second panel.
    pick, release : float, optional         payload pick and release times, s
    limits : float or dict {label: value}, optional
        m (SI), position-error lines, e.g. {"5 mm RMS target": 0.005,
        "15 mm peak target": 0.015}; drawn in mm.
    orientation_limits : float or dict {label: value}, optional   rad, drawn in mrad
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    t = _array("t", t, (None,))
    e_p = 1e3 * _magnitude("position_error", position_error, t.size)
    e_R = None if orientation_error is None else \
        1e3 * _magnitude("orientation_error", orientation_error, t.size)
    pick, release = _event_time("pick", pick), _event_time("release", release)
    lim_p = _limit_items("limits", limits, 1e3, "mm")
    lim_R = _limit_items("orientation_limits", orientation_limits, 1e3, "mrad")
    if e_R is not None:
        fig, axes = _figure(5.8, 2, 1, sharex=True)
    else:
        fig, axes = _figure(3.6)
    axes = list(axes[:, 0])
    _error_panel(axes[0], t, e_p, 1e3, "mm", _WHEEL_COLOURS[0], lim_p, "p_d − p")
    axes[0].set_ylabel("position error [mm]")
    if e_R is not None:
        _error_panel(axes[1], t, e_R, 1e3, "mrad", _WHEEL_COLOURS[1], lim_R, "log(R_d Rᵀ)")
        axes[1].set_ylabel("orientation error [mrad]")
    for ax in axes:
        _events([ax], pick, release)
        ax.grid(True, alpha=0.3)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7.5, frameon=False)
    axes[-1].set_xlabel("time [s]")
    axes[-1].set_xlim(t[0], t[-1])
    fig.suptitle(title)
    return fig


# ------------------------------------------------------------------ 2. efforts
def efforts(t, Q, names, limits, *, saturated=None, units=None, pick=None, release=None,
            ncols=3, title="Efforts per coordinate with their limits"):
    """One small panel per coordinate: the effort over time, ± its limit dashed.

    Parameters
    ----------
    t : ndarray, shape (n,)          time, s
    Q : ndarray, shape (n, m)        applied effort per coordinate, N·m or N
    names : sequence of str, length m   coordinate names (wheels first, then arm)
    limits : ndarray, shape (m,)     effort limits, same units as Q, > 0;
                                     inf or NaN: no limit (no line drawn)
    saturated : ndarray of bool, shape (n, m), optional
        Samples at the limit, marked with crosses.
    units : str or sequence of str (length m), optional
        Effort unit per coordinate (default "N·m" for all), e.g.
        ``["N·m", "N·m"] + ["N" if u == "m" else "N·m" for u in robot.arm_units]``
        (N for a prismatic joint).
    pick, release : float, optional  payload pick and release times, s (dotted lines)
    ncols : int                      panels per row
    title : str

    Returns
    -------
    matplotlib.figure.Figure
        Each panel's title gives the peak |Q| and, with a limit, its share of it.
    """
    t = _array("t", t, (None,))
    Q = _array("Q", Q, (t.size, None))
    m = Q.shape[1]
    names = [str(n) for n in names]
    if len(names) != m:
        raise ValueError(f"`names` has {len(names)} names for {m} columns of `Q`")
    lim = np.asarray(limits, dtype=float)
    if lim.shape != (m,):
        raise ValueError(f"`limits` must have shape ({m},) (one per column of `Q`), "
                         f"got {lim.shape}")
    if np.any(lim <= 0):
        raise ValueError(f"`limits` must be > 0 (inf or NaN for none), got {lim}")
    if saturated is None:
        sat = np.zeros(Q.shape, bool)
    else:
        sat = np.asarray(saturated, dtype=bool)
        if sat.shape != Q.shape:
            raise ValueError(f"`saturated` must have the shape of `Q` {Q.shape}, got {sat.shape}")
    if units is None or isinstance(units, str):
        units = [units or "N·m"] * m
    units = [str(u) for u in units]
    if len(units) != m:
        raise ValueError(f"`units` has {len(units)} entries for {m} coordinates")
    ncols = max(1, min(int(ncols), m))
    nrows = -(-m // ncols)
    pick, release = _event_time("pick", pick), _event_time("release", release)
    fig, grid = _figure(1.0 + 2.0 * nrows, nrows, ncols, sharex=True)
    panels = list(grid.ravel())
    for ax in panels[m:]:
        fig.delaxes(ax)
    for k in range(m):
        ax, q, u = panels[k], Q[:, k], units[k]
        colour = _WHEEL_COLOURS[k] if k < 2 else "#404040"
        ax.plot(t, q, color=colour, lw=1.1)
        peak = float(np.nanmax(np.abs(q))) if np.any(np.isfinite(q)) else 0.0
        top = peak
        head = f"{names[k]}: peak {peak:.3g} {u}"
        if np.isfinite(lim[k]):
            ax.axhline(lim[k], color=_LIMIT, ls="--", lw=1.2,
                       label="± limit" if k == 0 else None)
            ax.axhline(-lim[k], color=_LIMIT, ls="--", lw=1.2)
            top = max(top, lim[k])
            head += f" ({100 * peak / lim[k]:.0f} % of {lim[k]:.3g})"
        else:
            head += " (no limit)"
        if sat[:, k].any():
            ax.plot(t[sat[:, k]], q[sat[:, k]], ls="none", marker="x", ms=4, color=_FAIL,
                    label="saturated")
            head += f"\nsaturated in {100 * sat[:, k].mean():.0f} % of the samples"
        _events([ax], pick, release)
        ax.set_ylim(-1.12 * top if top > 0 else -1.0, 1.12 * top if top > 0 else 1.0)
        ax.set_title(head, fontsize=7.5)
        ax.set_ylabel(f"effort [{u}]", fontsize=8)
        ax.tick_params(labelsize=7.5)
        ax.grid(True, alpha=0.3)
    for col in range(ncols):   # time label under the lowest panel of each column
        below = [k for k in range(col, m, ncols)]
        if below:
            panels[below[-1]].set_xlabel("time [s]", fontsize=8)
            panels[below[-1]].xaxis.set_tick_params(labelbottom=True)
    panels[0].set_xlim(t[0], t[-1])
    handles = {"effort (wheels: right blue, left orange)":
               Line2D([], [], color="#404040", lw=1.1)}
    for ax in panels[:m]:
        for h, lab in zip(*ax.get_legend_handles_labels()):
            handles.setdefault(lab, h)
    if not any(sat.ravel()):
        handles["saturated (none)"] = Line2D([], [], ls="none", marker="x", color=_FAIL)
    fig.legend(handles.values(), handles.keys(), loc="outside lower center",
               ncol=min(len(handles), 5), fontsize=7.5, frameon=False)
    fig.suptitle(title)
    return fig


# ---------------------------------------------------------------- 3. base path
def base_path(x, y, theta, *, footprint, instants, tool=None, target=None,
              payload_position=None, wheel_radius=None, half_track=None, t=None,
              title="Base and tool paths, top view (world)"):
    """Top view in the world: the base path, the robot outline at a few
    instants, the tool path and its target, the payload's position.

    World frame seen from above, m, equal aspect.  The outline at an instant
    is the chassis footprint rectangle placed at the base pose (x, y, θ) (an
    envelope, not the chassis' shape), with a heading tick from the base
    origin forward and, given the wheel geometry, the two wheels; the tool's
    position at the same instant is marked in the same colour.

    Parameters
    ----------
    x, y, theta : ndarray, shape (n,)    base pose over time, m, m, rad
    footprint : (x_min, x_max, y_min, y_max[, height]) or None   chassis, base frame, m
    instants : sequence of int           sample indices (into x) where the outline is drawn
    tool : ndarray, shape (p, 3) or (p, 2), optional    tool position, world, m
    target : ndarray, shape (r, 3) or (r, 2), optional  tool target position, world, m
    payload_position : (3,) or (2,), optional           payload at rest, world, m
    wheel_radius, half_track : float, optional          m
    t : ndarray, shape (n,), optional    time of the samples, s: labels the instants
                                         (otherwise "#k", the sample index)
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    x = _array("x", x, (None,))
    n = x.size
    y, th = _array("y", y, (n,)), _array("theta", theta, (n,))
    if n == 0:
        raise ValueError("`x` is empty: give at least one base pose")
    fp, r, b = _check_pose_args(footprint, wheel_radius, half_track)
    idx = [int(i) for i in instants]
    for i in idx:
        if not -n <= i < n:
            raise ValueError(f"`instants` entry {i} is outside the {n} samples of the path")
    idx = [i % n for i in idx]
    tt = None if t is None else _array("t", t, (n,))
    P_tool = None if tool is None else \
        _array("tool", tool, (None, 3) if np.shape(tool)[-1:] == (3,) else (None, 2))
    P_tgt = None if target is None else \
        _array("target", target, (None, 3) if np.shape(target)[-1:] == (3,) else (None, 2))
    pay = None
    if payload_position is not None:
        pay = np.asarray(payload_position, dtype=float)
        if pay.shape not in ((2,), (3,)) or not np.all(np.isfinite(pay)):
            raise ValueError(f"`payload_position` must be a finite (x, y[, z]) in m, got {pay}")

    # extent of everything drawn, to size the figure at equal aspect
    pts = [np.column_stack([x, y])]
    outlines = [(_outline(fp, (x[i], y[i], th[i])) if fp is not None else None) for i in idx]
    pts += [o for o in outlines if o is not None]
    for P in (P_tool, P_tgt):
        if P is not None:
            pts.append(P[:, :2])
    if pay is not None:
        pts.append(pay[None, :2])
    A = np.vstack([p[np.all(np.isfinite(p), axis=1)] for p in pts])
    lo, hi = A.min(axis=0), A.max(axis=0)
    span = hi - lo
    s = max(float(span.max()), 0.5)
    pad = 0.05 * s + 0.1
    half = 0.5 * np.array([max(span[0], 0.2 * s), max(span[1], 0.2 * s)]) + pad
    mid = 0.5 * (lo + hi)
    ratio = half[1] / half[0]
    axes_width = FIG_WIDTH - 1.0
    fig, axes = _figure(min(max(axes_width * ratio, 1.6), 6.5) + 1.6)
    ax = axes[0, 0]

    ax.plot(x, y, color="black", lw=1.3, label="base path (base origin)", zorder=3)
    colours = colormaps["viridis"](np.linspace(0.0, 0.75, max(len(idx), 1)))
    heading = 0.6 * fp[1] if fp is not None else 0.1 * s
    placed = ([], [])                  # label x positions in the two rows below the outlines
    gap = 0.09 * (float(np.ptp(x)) + (fp[1] - fp[0] if fp is not None else 0.0) + 1e-9)
    for k, i in enumerate(idx):
        c = colours[k]
        pose = (x[i], y[i], th[i])
        name = f"t = {tt[i]:.3g} s" if tt is not None else f"#{i}"
        if outlines[k] is not None:
            ax.add_patch(Polygon(outlines[k], closed=True, fc=(*c[:3], 0.12), ec=c, lw=1.4,
                                 zorder=2, label="robot outline (footprint)" if k == 0 else None))
        if r is not None and b is not None:
            for j, bar in enumerate(_wheel_bars(r, b, pose)):
                ax.add_patch(Polygon(bar, closed=True, fc="0.25", ec="black", lw=0.5, zorder=2.5,
                                     label="drive wheel" if k == 0 and j == 0 else None))
        tip = _place(np.array([[0.0, 0.0], [heading, 0.0]]), pose)
        ax.plot(tip[:, 0], tip[:, 1], color=c, lw=1.6, zorder=4)
        ax.plot([x[i]], [y[i]], ls="none", marker="o", ms=5, mfc=c, mec="black", zorder=5)
        label_at = outlines[k] if outlines[k] is not None else np.array([[x[i], y[i]]])
        row = _label_row(placed, float(x[i]), gap)
        ax.annotate(name, (x[i], float(label_at[:, 1].min())), xytext=(0, -3 - 10 * row),
                    textcoords="offset points", ha="center", va="top", fontsize=7.5, color=c,
                    zorder=6)
        if P_tool is not None and P_tool.shape[0] == n and np.all(np.isfinite(P_tool[i, :2])):
            ax.plot([P_tool[i, 0]], [P_tool[i, 1]], ls="none", marker="*", ms=11, mfc=c,
                    mec="black", zorder=6, label="tool at the instant" if k == 0 else None)
    if P_tgt is not None:
        ax.plot(P_tgt[:, 0], P_tgt[:, 1], color=_WHEEL_COLOURS[1], ls="--", lw=1.8,
                label="tool target path", zorder=4)
    if P_tool is not None:
        ax.plot(P_tool[:, 0], P_tool[:, 1], color=_WHEEL_COLOURS[0], lw=1.1,
                label="tool path", zorder=4.5)
    if pay is not None:
        where = ", ".join(f"{v:.3g}" for v in pay)
        ax.plot([pay[0]], [pay[1]], ls="none", marker="P", ms=12, mfc=_PASS, mec="black",
                label=f"payload at rest ({where}) m", zorder=5.5)
    ax.set_xlim(mid[0] - half[0], mid[0] + half[0])
    ax.set_ylim(mid[1] - half[1], mid[1] + half[1])
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("x, world [m]")
    ax.set_ylabel("y, world [m]")
    ax.grid(True, alpha=0.3)
    handles, labels = ax.get_legend_handles_labels()
    handles.append(Line2D([], [], color=colours[0], lw=1.6, marker="o", mec="black", ms=5))
    labels.append("base origin and heading at the instant")
    fig.legend(handles, labels, loc="outside lower center", ncol=4, fontsize=7.5, frameon=False)
    fig.suptitle(title)
    return fig

