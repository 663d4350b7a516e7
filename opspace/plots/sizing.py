"""Figures of the sizing report: plain functions from arrays to matplotlib figures.

This module renders; it computes no physics.  Every number drawn comes in as
an argument (from `opspace.sizing` and `opspace.stability`); the only
arithmetic here is for display: absolute values for the first-quadrant
torque-speed plane, rad/s → rpm on a secondary axis (n = 60 ω / 2π), the
foot of the perpendicular from the worst ZMP to its nearest polygon edge,
and axis limits.

Conventions of every figure
---------------------------
- SI units, written in brackets in each axis label: ``"time [s]"``.
- Limits are drawn as labelled lines (and shaded where a region is
  forbidden); a legend whenever more than one series is drawn.
- Sized to be read at 900 px wide: ``FIG_WIDTH`` inches at ``DPI`` dots per
  inch (8.2 in × 110 dpi ≈ 900 px).
- Top views are drawn in the base frame seen from above: x forward to the
  right, y left upwards (z out of the page), equal aspect.
- Right wheel and left wheel keep the same colours in every figure.

Figures are built on `matplotlib.figure.Figure` directly, never through
`pyplot`: no figure is registered in a global manager, no backend is
selected and no rcParams are changed, so the functions are safe in a headless
process and leave no global state (a figure is freed once unreferenced).
"""

from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Patch, Polygon, Rectangle

__all__ = [
    "DPI",
    "FIG_WIDTH",
    "drive_time_series",
    "figure_to_png_bytes",
    "loads_and_traction",
    "margins_bar",
    "robot_poses",
    "save",
    "support_polygon_zmp",
    "torque_speed_plane",
]

FIG_WIDTH = 8.2   # in; at DPI this is ~900 px
DPI = 110

# Colour-blind-safe palette of Okabe & Ito, "Color Universal Design" (2008; the
# hex values are recalled from memory).
_PALETTE = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00",
            "#F0E442", "#000000"]
_WHEEL_COLOURS = ["#0072B2", "#E69F00"]   # right wheel, left wheel
# Other series (candidates, casters): none close to the wheels' or the limits' colours.
_OTHERS = ["#009E73", "#CC79A7", "#7F3C8D", "#8C564B", "#17BECF", "#4D4D4D", "#BCBD22"]
_LIMIT = "#C0392B"                         # limit lines
_PASS = "#009E73"
_FAIL = "#D55E00"
_SEGMENT_SHADE = "#000000"


# --------------------------------------------------------------------- output
def figure_to_png_bytes(fig, dpi=DPI) -> bytes:
    """The figure rendered as PNG bytes; the figure is closed afterwards.

    Figures of this module are not registered with pyplot, so "closing" is
    only needed for a figure made with ``pyplot``: it is then removed from
    pyplot's manager (``pyplot.close``) so that it does not accumulate.
    """
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi)
    _close(fig)
    return buffer.getvalue()


def save(fig, path, dpi=DPI) -> Path:
    """Write the figure to `path` (format from its suffix, PNG by default) and close it."""
    path = Path(path)
    fmt = path.suffix[1:].lower() or "png"
    fig.savefig(path, format=fmt, dpi=dpi)
    _close(fig)
    return path


def _close(fig):
    if getattr(fig.canvas, "manager", None) is not None:  # a pyplot figure
        import matplotlib.pyplot as plt
        plt.close(fig)


# ----------------------------------------------------------------- validation
def _array(name, x, shape):
    """`x` as a float array of `shape` (None: any length) without infinite
    entries (NaN is allowed: a gap in a track); ValueError naming the argument."""
    a = np.asarray(x, dtype=float)
    ok = a.ndim == len(shape) and all(s is None or s == n for s, n in zip(shape, a.shape))
    if not ok:
        want = "(" + ", ".join("n" if s is None else str(s) for s in shape) + \
               ("," if len(shape) == 1 else "") + ")"
        raise ValueError(f"`{name}` must have shape {want}, got {a.shape}")
    if np.any(np.isinf(a)):
        raise ValueError(f"`{name}` has infinite entries")
    return a


def _key(name, d, key):
    if key not in d:
        raise ValueError(f"`{name}` entry {d.get('label', '?')!r} lacks the key {key!r} "
                         f"(has {sorted(d)})")
    return d[key]


def _limits(name, value, default_label):
    """A limit given as a number or as {label: value}: list of (label, value)."""
    if value is None:
        return []
    if isinstance(value, dict):
        items = list(value.items())
    else:
        items = [(default_label, value)]
    out = []
    for label, v in items:
        v = float(v)
        if not (math.isfinite(v) and v > 0):
            raise ValueError(f"`{name}` {label!r} must be a finite value > 0, got {v}")
        out.append((str(label), v))
    return out


def _segments(segments):
    if segments is None:
        return []
    out = []
    for i, seg in enumerate(segments):
        if len(seg) != 3:
            raise ValueError(f"`segments[{i}]` must be (t_start, t_end, label), got {seg!r}")
        t0, t1, label = float(seg[0]), float(seg[1]), str(seg[2])
        if not t1 > t0:
            raise ValueError(f"`segments[{i}]` {label!r} ends at {t1} s, not after its "
                             f"start {t0} s")
        out.append((t0, t1, label))
    return out


# ------------------------------------------------------------------- helpers
def _figure(height, nrows=1, ncols=1, **kw):
    fig = Figure(figsize=(FIG_WIDTH, height), dpi=DPI, layout="constrained")
    axes = fig.subplots(nrows, ncols, squeeze=False, **kw)
    return fig, axes


def _shade_segments(axes, segments, label_axis):
    """Alternate light background bands per duty-cycle segment, labelled on
    top of `label_axis`: the label if it fits the band's width, else the label
    shortened, else the segment's number "#k" (1-based, in cycle order)."""
    if not segments:
        return
    t_lo, t_hi = segments[0][0], segments[-1][1]
    span = max(t_hi - t_lo, 1e-12)
    for i, (t0, t1, label) in enumerate(segments):
        for ax in axes:
            if i % 2 == 0:
                ax.axvspan(t0, t1, color=_SEGMENT_SHADE, alpha=0.05, lw=0, zorder=0)
            ax.axvline(t0, color="0.75", lw=0.6, zorder=0.5)
        # a 7 pt character is ~6 px, ~0.0095 of a 640 px wide axis on a 900 px figure
        room = int((t1 - t0) / span / 0.0095) - 1   # one character of gap
        number = f"#{i + 1}"   # the segment's place in the duty cycle
        text = (label if len(label) <= room else label[:room - 1] + "…" if room >= 8
                else number if len(number) <= room else "")
        if text:
            label_axis.text(0.5 * (t0 + t1), 1.01, text, transform=label_axis.get_xaxis_transform(),
                            ha="center", va="bottom", fontsize=7, color="0.35", clip_on=False)


def _hlimit(ax, value, label, *, symmetric, color=_LIMIT, ls="--"):
    """A limit as horizontal line(s) at ±value (or +value), labelled once."""
    ax.axhline(value, color=color, ls=ls, lw=1.2, label=label)
    if symmetric:
        ax.axhline(-value, color=color, ls=ls, lw=1.2)


def _wheel_series(name, x, n):
    """(n,) or (n, w) samples as an (n, w) array, one column per wheel."""
    a = _array(name, x, (n, None) if np.ndim(x) == 2 else (n,))
    return a[:, None] if a.ndim == 1 else a


# ------------------------------------------------------- 1. torque-speed plane
def torque_speed_plane(envelopes, operating, *, title="Motor torque-speed plane"):
    """Candidates' torque-speed envelopes with the duty cycle's operating points.

    Drawn in the first quadrant: |motor speed| on x (rad/s; rpm on the top
    axis), |motor torque| on y (N·m), so driving and braking points of either
    sign fold onto the same limits (the envelopes are taken symmetric).

    Parameters
    ----------
    envelopes : list of dict
        One per candidate (motor + gearbox ratio):
        ``label`` str; ``speed`` (m,) rad/s and ``torque`` (m,) N·m, the
        intermittent (peak) envelope polyline, drawn solid;
        ``rated_torque`` float N·m, the continuous limit, drawn dashed up to
        the envelope's last speed; ``passed`` bool: failing candidates are
        drawn muted (thin, faded) and marked "(fails)" in the legend.
    operating : dict or list of dict
        The cycle's motor operating points, one dict per series (e.g. per
        wheel): ``speed`` (n,) rad/s, ``torque`` (n,) N·m, optional ``label``;
        optional ``peak`` (speed rad/s, torque N·m), marked with a diamond;
        optional ``rms_torque`` N·m, drawn as a dash-dot horizontal line.
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    series = [operating] if isinstance(operating, dict) else list(operating)
    if not series:
        raise ValueError("`operating` has no series: give at least one {speed, torque} dict")
    fig, axes = _figure(5.6)
    ax = axes[0, 0]
    x_max = 0.0
    for i, env in enumerate(envelopes):
        label = str(_key("envelopes", env, "label"))
        w = _array(f"envelopes[{i}].speed", _key("envelopes", env, "speed"), (None,))
        T = _array(f"envelopes[{i}].torque", _key("envelopes", env, "torque"), (w.size,))
        if w.size < 2:
            raise ValueError(f"`envelopes[{i}]` {label!r}: the envelope needs at least 2 "
                             f"(speed, torque) points, got {w.size}")
        rated = float(_key("envelopes", env, "rated_torque"))
        if not (math.isfinite(rated) and rated >= 0):
            raise ValueError(f"`envelopes[{i}]` {label!r}: rated_torque must be a finite "
                             f"value >= 0 N·m, got {rated}")
        passed = bool(_key("envelopes", env, "passed"))
        colour = _OTHERS[i % len(_OTHERS)]
        style = dict(color=colour, lw=2.0, alpha=1.0) if passed else \
            dict(color=colour, lw=1.0, alpha=0.45)
        tag = "" if passed else " (fails)"
        ax.plot(np.abs(w), np.abs(T), ls="-", label=f"{label}{tag}: peak envelope", **style)
        ax.plot([0.0, float(np.max(np.abs(w)))], [rated, rated], ls="--",
                label=f"{label}{tag}: rated (continuous)", **style)
        x_max = max(x_max, float(np.max(np.abs(w))))
    for j, s in enumerate(series):
        label = str(s.get("label", "operating points"))
        w = _array(f"operating[{j}].speed", _key("operating", s, "speed"), (None,))
        T = _array(f"operating[{j}].torque", _key("operating", s, "torque"), (w.size,))
        colour = _WHEEL_COLOURS[j] if len(series) <= 2 else _PALETTE[j % len(_PALETTE)]
        ax.plot(np.abs(w), np.abs(T), ls="none", marker=".", ms=3, alpha=0.5, color=colour,
                label=f"{label}: cycle points")
        if s.get("peak") is not None:
            pw, pT = (abs(float(v)) for v in s["peak"])
            ax.plot([pw], [pT], ls="none", marker="D", ms=8, mfc=colour, mec="black",
                    label=f"{label}: peak {pT:.3g} N·m at {pw:.3g} rad/s", zorder=5)
        if s.get("rms_torque") is not None:
            rms = float(s["rms_torque"])
            ax.axhline(rms, color=colour, ls="-.", lw=1.4, label=f"{label}: RMS {rms:.3g} N·m")
        x_max = max(x_max, float(np.nanmax(np.abs(w))) if w.size else 0.0)
    ax.set_xlim(0.0, 1.05 * x_max if x_max > 0 else 1.0)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("|motor speed| [rad/s]")
    ax.set_ylabel("|motor torque| [N·m]")
    ax.set_title(title)
    top = ax.secondary_xaxis("top", functions=(lambda w: w * 30.0 / np.pi,
                                               lambda n: n * np.pi / 30.0))
    top.set_xlabel("|motor speed| [rpm]")
    ax.grid(True, alpha=0.3)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7.5, frameon=False)
    return fig


# --------------------------------------------------------- 2. drive time series
def drive_time_series(t, torque, speed, power, *, torque_limits=None, speed_limit=None,
                      labels=("right wheel", "left wheel"), segments=None, where="wheel",
                      title=None):
    """Torque, speed and power of each drive over the duty cycle, stacked on one time axis.

    Parameters
    ----------
    t : ndarray, shape (n,)            time, s
    torque : ndarray, shape (n,) or (n, w)   N·m, one column per wheel
    speed : ndarray, same shape as torque    rad/s
    power : ndarray, same shape as torque    W (> 0 driving, < 0 braking)
    torque_limits : float or dict {label: value}, optional
        N·m, each drawn as ±value dashed lines (e.g. {"peak": 42, "rated": 14}).
    speed_limit : float, optional      rad/s, drawn as ±value.
    labels : sequence of str           one per column (wheel)
    segments : list of (t_start, t_end, label), optional
        Duty-cycle segments, s: alternate light bands, labelled on top.
    where : str                        free text naming the shaft, "wheel" or "motor":
                                       used in the axis labels and the title
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    t = _array("t", t, (None,))
    T = _wheel_series("torque", torque, t.size)
    w = _wheel_series("speed", speed, t.size)
    P = _wheel_series("power", power, t.size)
    for name, a in (("speed", w), ("power", P)):
        if a.shape != T.shape:
            raise ValueError(f"`{name}` has shape {a.shape}, `torque` has {T.shape}: give "
                             f"the same wheels in the same order")
    if len(labels) < T.shape[1]:
        raise ValueError(f"`labels` names {len(labels)} series, the arrays have {T.shape[1]}")
    segs = _segments(segments)
    fig, axes = _figure(7.6, 3, 1, sharex=True)
    ax_T, ax_w, ax_P = axes[:, 0]
    for k in range(T.shape[1]):
        c = _WHEEL_COLOURS[k % 2] if T.shape[1] <= 2 else _PALETTE[k % len(_PALETTE)]
        ax_T.plot(t, T[:, k], color=c, lw=1.3, label=labels[k])
        ax_w.plot(t, w[:, k], color=c, lw=1.3, label=labels[k])
        ax_P.plot(t, P[:, k], color=c, lw=1.3, label=labels[k])
    styles = ["--", ":", "-."]
    for i, (label, v) in enumerate(_limits("torque_limits", torque_limits, "torque limit")):
        _hlimit(ax_T, v, f"±{label} {v:.3g} N·m", symmetric=True, ls=styles[i % 3],
                color=_LIMIT if i == 0 else "#7F3C8D")
    for label, v in _limits("speed_limit", speed_limit, "speed limit"):
        _hlimit(ax_w, v, f"±{label} {v:.3g} rad/s", symmetric=True)
    ax_P.axhline(0.0, color="0.3", lw=0.8, label="0 W (below: braking)")
    ax_T.set_ylabel(f"{where} torque [N·m]")
    ax_w.set_ylabel(f"{where} speed [rad/s]")
    ax_P.set_ylabel("mechanical power [W]")
    ax_P.set_xlabel("time [s]")
    for ax in axes[:, 0]:
        ax.grid(True, alpha=0.3)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7.5, frameon=False)
    ax_P.set_xlim(t[0], t[-1])
    _shade_segments(axes[:, 0], segs, ax_T)
    fig.suptitle(title or f"Torque, speed and power at each {where} over the duty cycle")
    return fig


# --------------------------------------------------- 3. support polygon and ZMP
def support_polygon_zmp(vertices, contacts, contact_names, zmp, *, com=None, worst_index=None,
                        worst_label=None, footprint=None, driven=None, t=None,
                        worst_edge=None, title="Support polygon and ZMP track (top view)"):
    """Top view of the support polygon, the contacts and the ZMP track.

    Base frame seen from above: x forward to the right, y left upwards, m,
    equal aspect.

    Parameters
    ----------
    vertices : ndarray, shape (k, 2)   polygon corners, m, in order (k = 2: a segment)
    contacts : ndarray, shape (m, 2)   contact points, m
    contact_names : sequence of str, length m
    zmp : ndarray, shape (n, 2)        ZMP track, m
    com : ndarray, shape (n, 2), optional   COM ground projection track, m
    worst_index : int, optional        sample of the worst instant, marked
    worst_label : str, optional        its annotation (e.g. "margin 0.081 m, t = 3.2 s")
    footprint : (x_min, x_max, y_min, y_max[, z_top]), optional   chassis, m
    driven : sequence of bool, length m, optional
        Which contacts are drive wheels (default: the first two, the order of
        `robot.contacts`); the others are drawn as casters.
    t : ndarray, shape (n,), optional  time, s: colours the ZMP track by time
    worst_edge : int, optional         polygon edge nearest to the worst ZMP
        (edge i runs from vertices[i] to vertices[i+1]), highlighted with the
        perpendicular from the ZMP to it.
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    V = _array("vertices", vertices, (None, 2))
    C = _array("contacts", contacts, (None, 2))
    names = [str(n) for n in contact_names]
    if len(names) != C.shape[0]:
        raise ValueError(f"`contact_names` has {len(names)} names for {C.shape[0]} contacts")
    Z = _array("zmp", zmp, (None, 2))
    G = None if com is None else _array("com", com, (Z.shape[0], 2))
    drv = np.arange(C.shape[0]) < 2 if driven is None else np.asarray(driven, dtype=bool)
    if drv.shape != (C.shape[0],):
        raise ValueError(f"`driven` must have one flag per contact ({C.shape[0]}), "
                         f"got shape {drv.shape}")
    fig, axes = _figure(6.2)
    ax = axes[0, 0]
    if footprint is not None:
        x0, x1, y0, y1 = _footprint(footprint)[:4]
        ax.add_patch(Rectangle((x0, y0), x1 - x0, y1 - y0, fill=True, fc="0.93", ec="0.55",
                               lw=1.0, label="chassis footprint", zorder=0))
    if V.shape[0] >= 3:
        ax.add_patch(Polygon(V, closed=True, fill=True, fc=(0.0, 0.62, 0.45, 0.12), ec=_PASS,
                             lw=1.8, label="support polygon", zorder=1))
    else:
        ax.plot(V[:, 0], V[:, 1], color=_PASS, lw=2.5, label="support (a segment)")
    ax.plot(*C[drv].T, ls="none", marker="s", ms=10, mfc="0.2", mec="black",
            label="drive wheel contact", zorder=4)
    if np.any(~drv):
        ax.plot(*C[~drv].T, ls="none", marker="o", ms=8, mfc="white", mec="black", mew=1.5,
                label="caster", zorder=4)
    for (x, y), name in zip(C, names):
        ax.annotate(name, (x, y), xytext=(6, -10 if y < 0 else 6), textcoords="offset points",
                    fontsize=7.5, color="0.25")
    if t is not None:
        t = _array("t", t, (Z.shape[0],))
        seg = np.stack([Z[:-1], Z[1:]], axis=1)
        lc = LineCollection(seg, cmap="viridis", lw=2.0, zorder=3, label="ZMP track")
        lc.set_array(0.5 * (t[:-1] + t[1:]))
        ax.add_collection(lc)
        fig.colorbar(lc, ax=ax, shrink=0.8, pad=0.02).set_label("time [s]")
    else:
        ax.plot(Z[:, 0], Z[:, 1], color=_WHEEL_COLOURS[0], lw=1.6, label="ZMP track", zorder=3)
    if G is not None:
        ax.plot(G[:, 0], G[:, 1], color="black", ls=":", lw=1.4,
                label="COM ground projection", zorder=3)
    pts = [V, C, Z] + ([G] if G is not None else [])
    if footprint is not None:
        x0, x1, y0, y1 = _footprint(footprint)[:4]
        pts.append(np.array([[x0, y0], [x1, y1]]))
    _fit(ax, np.vstack([p[np.all(np.isfinite(p), axis=1)] for p in pts]), pad=0.08)
    if worst_index is not None:
        _mark_worst(ax, V, Z, int(worst_index), worst_label, worst_edge)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("x, forward [m]")
    ax.set_ylabel("y, left [m]")
    ax.set_title(title)
    ax.grid(True, alpha=0.3)
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncol=4,
               fontsize=7.5, frameon=False)
    return fig


def _mark_worst(ax, V, Z, i, label, edge):
    if not 0 <= i < Z.shape[0]:
        raise ValueError(f"`worst_index` {i} is outside the track's {Z.shape[0]} samples")
    p = Z[i]
    if edge is not None:
        k = V.shape[0]
        if not 0 <= int(edge) < k:
            raise ValueError(f"`worst_edge` {edge} is not an edge index (0..{k - 1})")
        a, b = V[int(edge)], V[(int(edge) + 1) % k]
        ax.plot([a[0], b[0]], [a[1], b[1]], color=_FAIL, lw=3.0, label="nearest edge", zorder=2)
        u = b - a
        s = np.clip(np.dot(p - a, u) / np.dot(u, u), 0.0, 1.0)  # foot of the perpendicular
        f = a + s * u
        ax.plot([p[0], f[0]], [p[1], f[1]], color=_FAIL, ls="--", lw=1.0, zorder=2)
    ax.plot([p[0]], [p[1]], ls="none", marker="X", ms=12, mfc=_FAIL, mec="black",
            label="worst instant", zorder=6)
    if label:
        # The text sits a little above or below the point, shifted toward the
        # middle (ha chosen so that it grows away from the nearer side), so it
        # stays inside the axes whatever the polygon's shape.
        x0, x1 = ax.get_xlim()
        y0, y1 = ax.get_ylim()
        fx, fy = (p[0] - x0) / (x1 - x0), (p[1] - y0) / (y1 - y0)
        ha = "right" if fx > 0.66 else "left" if fx < 0.33 else "center"
        tx = fx + {"right": -0.05, "left": 0.05, "center": 0.0}[ha]
        ty = fy - 0.16 if fy > 0.5 else fy + 0.16
        ax.annotate(label, p, xytext=(tx, ty), textcoords="axes fraction", ha=ha,
                    va="top" if fy > 0.5 else "bottom", fontsize=8.5,
                    bbox=dict(boxstyle="round,pad=0.3", fc="white", ec=_FAIL, alpha=0.9),
                    arrowprops=dict(arrowstyle="->", color=_FAIL), zorder=7)


def _footprint(fp):
    f = [float(v) for v in fp]
    if len(f) not in (4, 5) or not (f[0] < f[1] and f[2] < f[3]):
        raise ValueError(f"`footprint` must be (x_min, x_max, y_min, y_max[, z_top]) m with "
                         f"x_min < x_max and y_min < y_max, got {tuple(fp)}")
    return f


def _fit(ax, P, pad):
    """Limits around the points P (k, 2), padded; the narrower side is widened
    to at least 0.6 of the wider one, so that a thin support (two wheels
    only) still leaves room for the labels."""
    lo, hi = P.min(axis=0), P.max(axis=0)
    span = max(float(np.max(hi - lo)), 1e-3)
    half = 0.5 * np.maximum(hi - lo, 0.6 * span) + pad * span
    mid = 0.5 * (lo + hi)
    ax.set_xlim(mid[0] - half[0], mid[0] + half[0])
    ax.set_ylim(mid[1] - half[1], mid[1] + half[1])


# ------------------------------------------------- 4. normal loads and traction
def loads_and_traction(t, N, contact_names, traction, *, segments=None, traction_names=None,
                       title="Normal load per contact and traction use over the duty cycle"):
    """Normal load per contact (N) and traction use per drive wheel over time.

    Traction use is |F_t| / (μ N): the wheel slips at 1 (the line drawn; the
    region above it is shaded).  A load of 0 N is lift-off; where a wheel has
    lifted, its traction use is unbounded (+inf in `traction`): drawn as a
    marker band at the top of the axis, the first instant labelled.  NaN
    samples (no admissible load distribution: the robot tips) are left as gaps.

    Parameters
    ----------
    t : ndarray, shape (n,)            s
    N : ndarray, shape (n, m)          N, per contact
    contact_names : sequence of str, length m
    traction : ndarray, shape (n, w)   dimensionless, per drive wheel
    segments : list of (t_start, t_end, label), optional   s
    traction_names : sequence of str, length w, optional
        Default: the first w contact names (drive wheels come first).
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    t = _array("t", t, (None,))
    N = _array("N", N, (t.size, None))
    names = [str(n) for n in contact_names]
    if len(names) != N.shape[1]:
        raise ValueError(f"`contact_names` has {len(names)} names for {N.shape[1]} columns of `N`")
    U_raw = np.asarray(traction, dtype=float)
    lift = np.isposinf(U_raw)
    U = _wheel_series("traction", np.where(lift, np.nan, U_raw), t.size)
    lift = lift.reshape(U.shape)
    tnames = names[:U.shape[1]] if traction_names is None else [str(n) for n in traction_names]
    if len(tnames) != U.shape[1]:
        raise ValueError(f"`traction_names` has {len(tnames)} names for {U.shape[1]} columns")
    segs = _segments(segments)
    fig, axes = _figure(6.4, 2, 1, sharex=True)
    ax_N, ax_U = axes[:, 0]
    styles = ["-", "-", "--", "-.", ":", (0, (5, 1, 1, 1))]
    for k, name in enumerate(names):
        c = _WHEEL_COLOURS[k] if k < 2 else _OTHERS[(k - 2) % len(_OTHERS)]
        ax_N.plot(t, N[:, k], color=c, ls=styles[k % len(styles)], lw=1.3, label=name)
    ax_N.axhline(0.0, color=_LIMIT, ls="--", lw=1.2, label="lift-off (N = 0)")
    for k, name in enumerate(tnames):
        ax_U.plot(t, U[:, k], color=_WHEEL_COLOURS[k % 2], lw=1.3, label=name)
    top = max(1.25, 1.08 * float(np.nanmax(U))) if np.any(np.isfinite(U)) else 1.25
    ax_U.axhspan(1.0, top, color=_LIMIT, alpha=0.10, lw=0, label="slipping")
    ax_U.axhline(1.0, color=_LIMIT, ls="--", lw=1.2, label="slip limit |F_t| = μ N")
    for k, name in enumerate(tnames):
        if lift[:, k].any():
            i = int(np.argmax(lift[:, k]))
            y = top * (0.96 - 0.05 * k)
            ax_U.plot(t[lift[:, k]], np.full(int(lift[:, k].sum()), y), ls="none", marker="|",
                      ms=6, color=_WHEEL_COLOURS[k % 2], label=f"{name} lifted off (use unbounded)")
            ax_U.annotate(f"{name} lifts off, t = {t[i]:.2f} s", (t[i], y), xytext=(4, -10),
                          textcoords="offset points", fontsize=7.5, color=_WHEEL_COLOURS[k % 2])
    ax_U.set_ylim(0.0, top)
    ax_N.set_ylabel("normal load [N]")
    ax_U.set_ylabel("traction use |F_t|/(μN) [-]")
    ax_U.set_xlabel("time [s]")
    ax_U.set_xlim(t[0], t[-1])
    for ax in (ax_N, ax_U):
        ax.grid(True, alpha=0.3)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7.5, frameon=False)
    _shade_segments((ax_N, ax_U), segs, ax_N)
    fig.suptitle(title)
    return fig


# ------------------------------------------------------------ 5. robot poses
def robot_poses(poses, *, footprint=None, wheel_radius=None, half_track=None, titles=None,
                casters=None, title="Worst-case arm poses"):
    """Side (x–z) and top (x–y) views of the robot in each given arm pose.

    Base frame, m, equal aspect: x forward to the right in both views; z up
    in the side view, y left upwards in the top view.  The chassis is drawn
    as its bounding box from the ground to z_top (an envelope, not its
    shape); the wheels as circles of `wheel_radius` in the side view and as
    2·r long bars (schematic width) at y = ±`half_track` in the top view.

    Parameters
    ----------
    poses : list of dict
        ``label`` str; ``points`` (k, 3) m, arm joint positions in the base
        frame from the arm root to the tool; optional ``com`` (3,) m (robot
        COM) and ``payload`` (3,) m (payload centre of mass).
    footprint : (x_min, x_max, y_min, y_max, z_top), optional   m
    wheel_radius, half_track : float, optional                   m
    titles : sequence of str, optional   one per pose (default: the labels)
    casters : ndarray, shape (c, 2), optional   caster contact points, m
    title : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    if not poses:
        raise ValueError("`poses` is empty: give at least one {label, points} dict")
    if titles is not None and len(titles) != len(poses):
        raise ValueError(f"`titles` has {len(titles)} entries for {len(poses)} poses")
    fp = None if footprint is None else _footprint(footprint)
    if fp is not None and len(fp) != 5:
        raise ValueError("`footprint` must be (x_min, x_max, y_min, y_max, z_top) m here: "
                         "the side view needs z_top")
    r = None if wheel_radius is None else float(wheel_radius)
    b = None if half_track is None else float(half_track)
    K = None if casters is None else _array("casters", casters, (None, 2))
    parsed = []
    for i, pose in enumerate(poses):
        P = _array(f"poses[{i}].points", _key("poses", pose, "points"), (None, 3))
        com = None if pose.get("com") is None else _array(f"poses[{i}].com", pose["com"], (3,))
        pay = None if pose.get("payload") is None else \
            _array(f"poses[{i}].payload", pose["payload"], (3,))
        parsed.append((str(pose.get("label", f"pose {i + 1}")), P, com, pay))
    n = len(parsed)
    fig, axes = _figure(0.8 + 3.0 * n, n, 2)
    bounds = _pose_bounds(parsed, fp, r, b)
    for row, (label, P, com, pay) in enumerate(parsed):
        name = label if titles is None else str(titles[row])
        for col, (j, ylab, view) in enumerate(((2, "z, up [m]", "side view (x–z)"),
                                               (1, "y, left [m]", "top view (x–y)"))):
            ax = axes[row, col]
            _draw_base(ax, j, fp, r, b, K)
            ax.plot(P[:, 0], P[:, j], color=_WHEEL_COLOURS[0], lw=2.4, marker="o", ms=5,
                    mfc="white", label="arm (joints)", zorder=4)
            ax.plot([P[0, 0]], [P[0, j]], ls="none", marker="s", ms=7, color="0.2",
                    label="arm root", zorder=5)
            ax.plot([P[-1, 0]], [P[-1, j]], ls="none", marker="*", ms=13, color=_WHEEL_COLOURS[1],
                    mec="black", label="tool", zorder=5)
            if com is not None:
                ax.plot([com[0]], [com[j]], ls="none", marker="X", ms=11, color=_FAIL,
                        mec="black", label="robot COM", zorder=6)
                if j == 2:
                    ax.plot([com[0], com[0]], [0.0, com[2]], color=_FAIL, ls=":", lw=1.0)
            if pay is not None:
                ax.plot([pay[0]], [pay[j]], ls="none", marker="P", ms=11, color=_PASS,
                        mec="black", label="payload", zorder=6)
            lo, hi = bounds[0], bounds[j]
            ax.set_xlim(*lo)
            ax.set_ylim(*hi)
            ax.set_aspect("equal", adjustable="box")
            ax.set_xlabel("x, forward [m]")
            ax.set_ylabel(ylab)
            ax.set_title(f"{name}: {view}", fontsize=9.5)
            ax.grid(True, alpha=0.3)
    handles, labels = axes[0, 0].get_legend_handles_labels()
    h2, l2 = axes[0, 1].get_legend_handles_labels()
    seen = dict(zip(labels, handles))
    seen.update({k: v for k, v in zip(l2, h2) if k not in seen})
    fig.legend(seen.values(), seen.keys(), loc="outside lower center", ncol=5, fontsize=7.5,
               frameon=False)
    fig.suptitle(title)
    return fig


def _draw_base(ax, j, fp, r, b, K):
    """Chassis box, wheels, ground and casters in the side (j = 2) or top (j = 1) view."""
    if j == 2:
        ax.axhline(0.0, color="0.35", lw=1.2, label="ground")
        if fp is not None:
            ax.add_patch(Rectangle((fp[0], 0.0), fp[1] - fp[0], fp[4], fc="0.92", ec="0.5",
                                   lw=1.0, label="chassis envelope", zorder=1))
        if r is not None:
            ax.add_patch(Circle((0.0, r), r, fc="0.3", ec="black", alpha=0.85,
                                label="drive wheel", zorder=2))
        return
    if fp is not None:
        ax.add_patch(Rectangle((fp[0], fp[2]), fp[1] - fp[0], fp[3] - fp[2], fc="0.92", ec="0.5",
                               lw=1.0, label="chassis envelope", zorder=1))
    if r is not None and b is not None:
        width = 0.3 * r   # schematic: the description gives no tyre width
        for y in (-b, b):
            ax.add_patch(Rectangle((-r, y - width / 2), 2 * r, width, fc="0.3", ec="black",
                                   label="drive wheel" if y < 0 else None, zorder=2))
    if K is not None:
        ax.plot(K[:, 0], K[:, 1], ls="none", marker="o", ms=7, mfc="white", mec="black",
                label="caster", zorder=3)


def _pose_bounds(parsed, fp, r, b):
    """Common (x, y, z) limits for all views so that poses compare at one scale."""
    pts = [P for _, P, _, _ in parsed]
    pts += [c[None] for _, _, c, _ in parsed if c is not None]
    pts += [p[None] for _, _, _, p in parsed if p is not None]
    if fp is not None:
        pts.append(np.array([[fp[0], fp[2], 0.0], [fp[1], fp[3], fp[4]]]))
    if r is not None:
        pts.append(np.array([[-r, -(b or 0.0), 0.0], [r, b or 0.0, 2 * r]]))
    A = np.vstack(pts)
    lo, hi = A.min(axis=0), A.max(axis=0)
    lo[2] = min(lo[2], 0.0)
    d = 0.08 * max(float(np.max(hi - lo)), 1e-3)
    return [(lo[i] - d, hi[i] + d) for i in range(3)]


# ---------------------------------------------------------- 6. margins bar chart
def margins_bar(criteria, *, title="Margins per candidate and criterion", display_limit=2.0):
    """Horizontal bars of margins (fraction of the limit; < 0 fails), zero line drawn.

    Parameters
    ----------
    criteria : list of dict
        ``label`` str (e.g. "motor B, G = 24: RMS torque"); ``margin`` float,
        fraction (0.25 = 25 % below the limit; negative: over it; NaN: not
        evaluated); ``passed`` bool.
    title : str
    display_limit : float
        Bars are drawn within ±display_limit (fraction) so that one very large
        margin does not flatten the others; the printed value is the true one.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if not criteria:
        raise ValueError("`criteria` is empty: give at least one {label, margin, passed} dict")
    labels = [str(_key("criteria", c, "label")) for c in criteria]
    m = np.array([float(_key("criteria", c, "margin")) for c in criteria])
    ok = np.array([bool(_key("criteria", c, "passed")) for c in criteria])
    lim = float(display_limit)
    shown = np.clip(np.nan_to_num(m, nan=0.0, posinf=lim, neginf=-lim), -lim, lim)
    n = len(criteria)
    fig, axes = _figure(max(3.0, 1.3 + 0.32 * n))
    ax = axes[0, 0]
    y = np.arange(n)
    ax.barh(y, 100 * shown, color=np.where(ok, _PASS, _FAIL), hatch=None, height=0.65,
            edgecolor="black", lw=0.6)
    for yi, s, v, passed in zip(y, shown, m, ok):
        if not passed:
            ax.barh([yi], [100 * s], height=0.65, color="none", edgecolor="white", hatch="///",
                    lw=0)
        txt = "n/a" if not np.isfinite(v) else f"{100 * v:+.1f} %"
        if np.isfinite(v) and abs(v) > lim:
            txt += " (bar clipped)"
        ax.annotate(txt, (100 * s, yi), xytext=(4 if s >= 0 else -4, 0),
                    textcoords="offset points", va="center", ha="left" if s >= 0 else "right",
                    fontsize=7.5)
    ax.axvline(0.0, color="black", lw=1.4, label="limit (margin 0)")
    ax.set_yticks(y, labels, fontsize=8)
    ax.invert_yaxis()
    lo, hi = 100 * min(0.0, float(shown.min())), 100 * max(0.0, float(shown.max()))
    span = max(hi - lo, 10.0)
    # room for the value labels: "+500.0 % (bar clipped)" right, "-28.4 %" left
    ax.set_xlim(lo - (0.13 if lo < 0 else 0.01) * span, hi + 0.24 * span)
    ax.set_xlabel("margin [% of the limit]  (> 0 passes)")
    ax.set_title(title)
    ax.grid(True, axis="x", alpha=0.3)
    fig.legend(handles=[Patch(fc=_PASS, ec="black", label="passes"),
                        Patch(fc=_FAIL, ec="black", hatch="///", label="fails"),
                        Line2D([], [], color="black", lw=1.4, label="limit (margin 0)")],
               loc="outside lower center", ncol=3, fontsize=7.5, frameon=False)
    return fig


# ------------------------------------------------------------------ later
# Simulation figures (tracking error, efforts against limits, stability margin
# over a pick-while-driving run) will follow the same pattern: arrays in,
# a Figure out, limits as labelled lines.
