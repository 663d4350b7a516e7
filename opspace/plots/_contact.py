"""Figures of the contact pre-check (rendering only, no physics).

Every number drawn comes from `opspace.contact`: masses per point, the speed
use along a motion (speed / permissible speed), and the permissible-speed
maps.  Conventions as in `plots._style` (SI units in brackets, limits as
labelled lines, a legend when several series are drawn).
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from ._style import _LIMIT, _PALETTE, DPI, FIG_WIDTH

__all__ = ["contact_masses", "contact_use", "speed_maps"]

# the shared palette without its yellow (too light for thin lines)
_SERIES = [c for c in _PALETTE if c != "#F0E442"]


def contact_masses(names, whole_body, base_locked, simple):
    """Grouped bars: effective mass per point, whole body / base locked / hand estimate (kg).

    Infinite masses (a point that cannot move along its direction) are drawn as
    no bar and labelled "∞".
    """
    fig = Figure(figsize=(FIG_WIDTH, 3.4), dpi=DPI)
    ax = fig.add_subplot()
    x = np.arange(len(names))
    width = 0.26
    finite = [v for v in (*whole_body, *base_locked, *simple) if np.isfinite(v) and v > 0]
    ax_floor = 0.5 * min(finite or [1.0])
    for k, (values, label) in enumerate(((whole_body, "whole body (wheels free)"),
                                         (base_locked, "base locked (arm only)"),
                                         (simple, "hand estimate M/2 + m_L"))):
        vals = np.asarray(values, float)
        shown = np.where(np.isfinite(vals), vals, np.nan)
        ax.bar(x + (k - 1) * width, shown, width, label=label, color=_SERIES[k])
        for xi, v in zip(x + (k - 1) * width, vals):
            if not np.isfinite(v):
                ax.text(xi, ax_floor, "∞", ha="center", va="bottom", fontsize=9)
    ax.set_xticks(x, names)
    ax.set_ylabel("effective mass [kg]")
    ax.set_yscale("log")
    ax.set_ylim(bottom=ax_floor)
    ax.set_title("Effective mass at each contact point along its direction of interest")
    ax.legend(fontsize=8, loc="upper left")
    ax.grid(axis="y", alpha=0.3)
    fig.subplots_adjust(left=0.09, right=0.98, top=0.88, bottom=0.14)
    return fig


def contact_use(t, names, use):
    """Speed use (speed / permissible speed) of each point over time, limit 1."""
    fig = Figure(figsize=(FIG_WIDTH, 3.4), dpi=DPI)
    ax = fig.add_subplot()
    for j, name in enumerate(names):
        ax.plot(t, use[:, j], color=_SERIES[j % len(_SERIES)], lw=1.2, label=name)
    ax.axhline(1.0, color=_LIMIT, lw=1.2, ls="--", label="permissible (use = 1)")
    ax.set_xlabel("time [s]")
    ax.set_ylabel("speed / permissible speed [–]")
    ax.set_title("Contact points along the motion: speed use of the two-body model")
    ax.set_ylim(bottom=0.0)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="upper right", ncol=2)
    fig.subplots_adjust(left=0.09, right=0.98, top=0.88, bottom=0.15)
    return fig


def speed_maps(top, side, footprint=None):
    """Top (x, y) and side (x, z) maps of a point's lowest permissible speed, m/s."""
    fig = Figure(figsize=(FIG_WIDTH, 3.8), dpi=DPI)
    axes = fig.subplots(1, 2)
    finite = [m.v_max[np.isfinite(m.v_max)] for m in (top, side)]
    vmax = max([float(f.max()) for f in finite if f.size] or [1.0])
    mesh = None
    for ax, m, ylabel in ((axes[0], top, "y [m]"), (axes[1], side, "z [m]")):
        grid = np.ma.masked_invalid(m.v_max.T)
        mesh = ax.pcolormesh(m.edges_a, m.edges_b, grid, cmap="viridis", vmin=0.0, vmax=vmax)
        if footprint is not None:
            x0, x1, y0, y1, h = footprint
            xs, ys = ([x0, x1, x1, x0, x0], [y0, y0, y1, y1, y0]) if m.view == "top" else \
                ([x0, x1, x1, x0, x0], [0, 0, h, h, 0])
            ax.plot(xs, ys, color="#000000", lw=1.0, label="chassis outline")
            ax.legend(fontsize=7, loc="lower left")
        ax.set_aspect("equal")
        ax.set_xlabel("x [m] (base frame, forward)")
        ax.set_ylabel(ylabel)
        ax.set_title(f"{m.point}: {m.view} view", fontsize=10)
    fig.colorbar(mesh, ax=list(axes), label="lowest permissible speed [m/s]", shrink=0.9)
    fig.suptitle(f"Permissible speed of {top.point} over the arm's workspace "
                 f"(region rule: {top.region})", fontsize=10)
    return fig
