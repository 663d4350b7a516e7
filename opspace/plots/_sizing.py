"""Figures of the sizing report: plain functions from arrays to matplotlib figures.

This module renders; it computes no physics.  Every number drawn comes in as
an argument (from `opspace.sizing` and `opspace.stability`); the only
arithmetic here is for display: absolute values for the first-quadrant
torque-speed plane, rad/s → rpm on a secondary axis (n = 60 ω / 2π), the
foot of the perpendicular from the worst ZMP to its nearest polygon edge,
and axis limits.

The conventions every figure follows are those of `opspace.plots._style`; the
top views (support polygon, robot poses) are in `opspace.plots._topview`.
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from ._style import (_FAIL, _LIMIT, _OTHERS, _PALETTE, _PASS, _WHEEL_COLOURS,
                     _array, _figure, _hlimit, _key, _limits, _segments, _shade_segments,
                     _wheel_series)

__all__ = ["drive_time_series", "loads_and_traction", "margins_bar", "torque_speed_plane"]

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
