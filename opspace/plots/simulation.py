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

Conventions are those of `opspace.plots.sizing` (its helpers are reused):
SI units in brackets in every axis label (except mm and mrad for the small
tracking errors, said in the labels), limits as labelled lines, a legend
whenever several series are drawn, `FIG_WIDTH` × `DPI` ≈ 900 px wide, and
figures built on `matplotlib.figure.Figure` without pyplot (no global state).
Top views here are in the world frame seen from above: x to the right, y
upwards, equal aspect.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from matplotlib import colormaps
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Polygon, Rectangle

from .sizing import (_FAIL, _LIMIT, _OTHERS, _PASS, _WHEEL_COLOURS, FIG_WIDTH, _array,
                     _figure, _footprint, _limits)

__all__ = ["animation", "base_path", "efforts", "frames_from_result", "tracking_error"]

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
    w = np.zeros_like(t)
    dt = np.diff(t)
    w[:-1] += dt / 2
    w[1:] += dt / 2
    return float(math.sqrt(w.dot(e ** 2) / (t[-1] - t[0])))


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


# ---------------------------------------------------------------- 4. animation
def _parse_frames(frames):
    out = []
    if not frames:
        raise ValueError("`frames` is empty: give at least one frame dict "
                         "(see `frames_from_result`)")
    for i, f in enumerate(frames):
        for key in ("t", "base_pose", "arm_points"):
            if key not in f:
                raise ValueError(f"`frames[{i}]` lacks the key {key!r} (has {sorted(f)})")
        t = float(f["t"])
        pose = _array(f"frames[{i}].base_pose", f["base_pose"], (3,))
        P = _array(f"frames[{i}].arm_points", f["arm_points"], (None, 3))
        if P.shape[0] < 1 or not np.all(np.isfinite(pose)):
            raise ValueError(f"`frames[{i}]` needs finite base_pose and at least one arm point")
        tgt = f.get("tool_target")
        tgt = np.full(3, np.nan) if tgt is None else _array(f"frames[{i}].tool_target", tgt, (3,))
        out.append((t, pose, P, tgt, bool(f.get("holding", False))))
    return out


def animation(frames, path, *, footprint, fps=20, payload_position=None, wheel_radius=None,
              half_track=None, dpi=100, max_frames=_MAX_FRAMES,
              title="Pick while driving"):
    """A GIF of the robot seen from the side (x–z) and from above (x–y) during a run.

    World frame, m, equal aspect; both views follow the robot: a window of
    fixed size centred on the base origin, whose half-widths along x and y
    are the robot's largest extents from its base origin along world x and y
    over the run, plus a margin; the grid scrolls as the robot drives.
    Drawn per frame: the chassis footprint (its x-extent from the
    ground to its height in the side view, the rotated rectangle from above),
    the wheels (given their geometry), the arm chain (joints as dots, the tool
    as a star), the tool target (cross), the base's and the tool's paths so
    far (top view), and the payload: at `payload_position` before the pick,
    at the tool while held, where it was let go after a release.  The title
    gives the time and the payload state.

    Parameters
    ----------
    frames : list of dict
        ``t`` s; ``base_pose`` (x, y, θ) m, m, rad; ``arm_points`` (k, 3) m,
        the arm chain in the WORLD frame from the mount to the tool;
        optional ``tool_target`` (3,) m (NaN: none) and ``holding`` bool.
        `frames_from_result` builds them from a run.
    path : str or Path     the GIF to write
    footprint : (x_min, x_max, y_min, y_max, height) or None   chassis, base frame, m
    fps : float            frames per second of the GIF
    payload_position : (3,), optional   payload at rest before the pick, world, m
    wheel_radius, half_track : float, optional   m
    dpi : float            pixels per inch (the figure is 8 in wide, 3 to 6 in high)
    max_frames : int       more frames than this are thinned evenly (first and
                           last kept), to keep the file small
    title : str

    Returns
    -------
    pathlib.Path  the GIF written
    """
    from matplotlib.animation import PillowWriter

    data = _parse_frames(frames)
    fp, r, b = _check_pose_args(footprint, wheel_radius, half_track)
    if fp is not None and len(fp) != 5:
        raise ValueError("`footprint` must be (x_min, x_max, y_min, y_max, height) m here: "
                         "the side view needs the height")
    fps = float(fps)
    if not (math.isfinite(fps) and fps > 0):
        raise ValueError(f"`fps` must be > 0, got {fps}")
    pay0 = None
    if payload_position is not None:
        pay0 = _array("payload_position", payload_position, (3,))
    if len(data) > int(max_frames):
        keep = np.unique(np.linspace(0, len(data) - 1, int(max_frames)).round().astype(int))
        data = [data[i] for i in keep]

    # window: the robot's largest planar reach from the base origin over the run
    # window: the robot's largest extent from the base origin along world x
    # and y over the run (chassis corners, wheels, arm points)
    reach, z_top = np.zeros(2), 0.0
    for _, pose, P, tgt, _ in data:
        body = [P[:, :2]]
        if fp is not None:
            body.append(_outline(fp, pose))
        if r is not None and b is not None:
            body += _wheel_bars(r, b, pose)
        reach = np.maximum(reach, np.max(np.abs(np.vstack(body) - pose[:2]), axis=0))
        z_top = max(z_top, float(np.max(P[:, 2])))
    if fp is not None:
        z_top = max(z_top, fp[4])
    if r is not None:
        z_top = max(z_top, 2 * r)
    if pay0 is not None:
        z_top = max(z_top, float(pay0[2]))
    half_x, half_y = 1.15 * reach + 0.15
    z_hi = 1.1 * z_top + 0.1

    # panels of equal width at equal aspect: the taller one sets the height
    ratio = max(z_hi + 0.05, 2 * half_y) / (2 * half_x)
    fig = Figure(figsize=(8.0, min(max(3.4 * ratio + 1.3, 3.0), 6.0)), dpi=dpi,
                 layout="constrained")
    # room for tick labels that reach the edges in later frames (the layout is
    # computed once, on the first frame)
    fig.get_layout_engine().set(w_pad=0.15, wspace=0.06)
    ax_s, ax_t = fig.subplots(1, 2)
    ax_s.axhline(0.0, color="0.35", lw=1.2, label="ground")
    ax_s.set_ylim(-0.05, z_hi)
    styles = dict(arm=dict(color=_WHEEL_COLOURS[0], lw=2.4, marker="o", ms=4, mfc="white"),
                  tool=dict(ls="none", marker="*", ms=12, color=_WHEEL_COLOURS[1], mec="black"),
                  target=dict(ls="none", marker="x", ms=9, mew=2.0, color=_FAIL),
                  payload=dict(ls="none", marker="s", ms=12, color=_PASS, mec="black"))
    art = {}
    for key, ax in (("s", ax_s), ("t", ax_t)):
        if fp is not None:
            patch = Rectangle((0, 0), 1, fp[4], fc="0.9", ec="0.45", lw=1.0, zorder=1) \
                if key == "s" else Polygon(np.zeros((4, 2)), closed=True, fc="0.9", ec="0.45",
                                           lw=1.0, zorder=1)
            ax.add_patch(patch)
            art[key, "chassis"] = patch
        if r is not None and key == "s":
            art[key, "wheels"] = [ax.add_patch(Circle((0, r), r, fc="0.3", ec="black",
                                                      alpha=0.8, zorder=2)) for _ in range(2)]
        if r is not None and b is not None and key == "t":
            art[key, "wheels"] = [ax.add_patch(Polygon(np.zeros((4, 2)), closed=True, fc="0.25",
                                                       ec="black", lw=0.5, zorder=2))
                                  for _ in range(2)]
        if key == "t":
            art[key, "base_trail"], = ax.plot([], [], color="black", lw=1.0, zorder=1.5)
            art[key, "tool_trail"], = ax.plot([], [], color=_WHEEL_COLOURS[0], lw=0.8,
                                              alpha=0.6, zorder=1.5)
            art[key, "heading"], = ax.plot([], [], color="0.2", lw=1.5, zorder=3)
        art[key, "arm"], = ax.plot([], [], zorder=4, **styles["arm"])
        art[key, "tool"], = ax.plot([], [], zorder=5, **styles["tool"])
        art[key, "target"], = ax.plot([], [], zorder=6, **styles["target"])
        art[key, "payload"], = ax.plot([], [], zorder=3.5, **styles["payload"])
        ax.set_aspect("equal", adjustable="box")
        ax.set_anchor("S")                 # both x axes on one line
        ax.grid(True, alpha=0.3)
        ax.set_xlabel("x, world [m]")
    ax_s.set_ylabel("z, up [m]")
    ax_t.set_ylabel("y, world [m]")
    ax_s.set_title("side view (x–z)", fontsize=9)
    ax_t.set_title("top view (x–y)", fontsize=9)
    legend = [Line2D([], [], **styles["arm"], label="arm (joints)"),
              Line2D([], [], **styles["tool"], label="tool"),
              Line2D([], [], **styles["target"], label="tool target"),
              Line2D([], [], **styles["payload"], label="payload"),
              Line2D([], [], color="black", lw=1.0, label="base path so far")]
    if fp is not None:
        legend.insert(0, Rectangle((0, 0), 1, 1, fc="0.9", ec="0.45", label="chassis envelope"))
    fig.legend(handles=legend, loc="outside lower center", ncol=len(legend), fontsize=7.5,
               frameon=False)
    suptitle = fig.suptitle(title)

    def draw(k):
        t, pose, P, tgt, holding = data[k]
        x, y, th = pose
        was_held = [d[4] for d in data[:k + 1]]
        if holding:
            pay, state = P[-1], "payload held"
        elif any(was_held):
            last = max(i for i, h in enumerate(was_held) if h)
            pay, state = data[last][2][-1], "payload released"
        else:
            pay, state = pay0, "payload at rest" if pay0 is not None else "no payload"
        suptitle.set_text(f"{title}: t = {t:.2f} s, {state}")
        if fp is not None:
            corners = _outline(fp, pose)
            art["s", "chassis"].set_x(float(corners[:, 0].min()))
            art["s", "chassis"].set_width(float(np.ptp(corners[:, 0])))
            art["t", "chassis"].set_xy(corners)
        if ("s", "wheels") in art:
            centres = _place(np.array([[0.0, -(b or 0.0)], [0.0, b or 0.0]]), pose)
            for c, (xc, _) in zip(art["s", "wheels"], centres):
                c.set_center((xc, r))
        if ("t", "wheels") in art:
            for patch, bar in zip(art["t", "wheels"], _wheel_bars(r, b, pose)):
                patch.set_xy(bar)
        tip = _place(np.array([[0.0, 0.0], [0.6 * (fp[1] if fp else 0.3), 0.0]]), pose)
        art["t", "heading"].set_data(tip[:, 0], tip[:, 1])
        trail = np.array([d[1][:2] for d in data[:k + 1]])
        art["t", "base_trail"].set_data(trail[:, 0], trail[:, 1])
        tools = np.array([d[2][-1] for d in data[:k + 1]])
        art["t", "tool_trail"].set_data(tools[:, 0], tools[:, 1])
        for key, j, ax in (("s", 2, ax_s), ("t", 1, ax_t)):
            art[key, "arm"].set_data(P[:, 0], P[:, j])
            art[key, "tool"].set_data(P[-1:, 0], P[-1:, j])
            if np.all(np.isfinite(tgt)):
                art[key, "target"].set_data([tgt[0]], [tgt[j]])
            else:
                art[key, "target"].set_data([], [])
            if pay is not None:
                art[key, "payload"].set_data([pay[0]], [pay[j]])
            else:
                art[key, "payload"].set_data([], [])
            ax.set_xlim(x - half_x, x + half_x)
        ax_t.set_ylim(y - half_y, y + half_y)

    path = Path(path)
    draw(0)
    fig.draw_without_rendering()          # lay out once, then freeze the layout
    fig.set_layout_engine(None)            # (no jitter as tick labels change)
    writer = PillowWriter(fps=fps)
    with writer.saving(fig, path, dpi):
        for k in range(len(data)):
            draw(k)
            writer.grab_frame()
    return path


def frames_from_result(robot, result, *, every=None, max_frames=_MAX_FRAMES):
    """Frames for `animation` from a run: base pose, world arm points, target, payload state.

    The arm points come from ``robot.arm_points(q)`` in the base frame and are
    placed in the world with the base pose (x, y, θ) = ``robot.base_pose(q)``:
    p_W = (x, y, 0) + R_z(θ) p_B (module docstring).

    Parameters
    ----------
    robot : MobileManipulator
    result : SimulationResult     uses t, q, target_position, payload
    every : int, optional         keep every k-th sample (default: the smallest
                                  k giving at most `max_frames` frames); the last
                                  sample is always kept
    max_frames : int

    Returns
    -------
    list of dict   {t s, base_pose (3,), arm_points (k, 3) world m, tool_target (3,) m,
                    holding bool}
    """
    t = np.asarray(result.t, dtype=float)
    n = t.size
    if n == 0:
        raise ValueError("`result` has no samples")
    if every is None:
        every = max(1, -(-(n - 1) // max(int(max_frames) - 1, 1)))
    every = int(every)
    if every < 1:
        raise ValueError(f"`every` must be an integer >= 1, got {every}")
    idx = list(range(0, n, every))
    if idx[-1] != n - 1:
        idx.append(n - 1)
    target = getattr(result, "target_position", None)
    held = getattr(result, "payload", None)
    frames = []
    for i in idx:
        q = result.q[i]
        pose = np.array(robot.base_pose(q), dtype=float)
        P_B = np.asarray(robot.arm_points(q), dtype=float)
        P_W = np.column_stack([_place(P_B[:, :2], pose), P_B[:, 2]])
        frames.append(dict(t=float(t[i]), base_pose=pose, arm_points=P_W,
                           tool_target=None if target is None else np.asarray(target[i], float),
                           holding=bool(held[i]) if held is not None else False))
    return frames
