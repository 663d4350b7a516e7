"""Figures of the motion-limits page: heat maps of a limit over tool positions,
beside the map of what limits it.  Rendering only: every number comes in as
an argument (from `opspace.limits`).

Side views: x forward to the right, z up; top views: x forward to the right,
y left upwards (the base frame seen from above); equal aspect.
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import BoundaryNorm, ListedColormap
from matplotlib.figure import Figure
from matplotlib.patches import Patch

from ._style import DPI, FIG_WIDTH

__all__ = ["limit_heat_map"]

# Okabe & Ito (2008) colour-blind-safe palette (hex values recalled from memory),
# one colour per cause, the same on every map.
_CAUSE_COLOURS = {"drive torque": "#0072B2", "drive speed": "#56B4E9", "traction": "#E69F00",
                  "tip-over": "#D55E00", "joint effort": "#009E73",
                  "nothing below 1e4": "#BBBBBB", "other": "#CC79A7"}


def _cause_key(cause):
    if cause.startswith("joint effort"):
        return "joint effort"
    return cause if cause in _CAUSE_COLOURS else "other"


def limit_heat_map(u, v, values, causes, *, title, unit, axes=("x", "z"), marks=()):
    """Heat map of `values` (len(v), len(u)) on the grid (u, v) in m, and beside
    it the limiting cause of each cell (strings; "" for a blank cell).

    marks : sequence of (label, u, v) points drawn on both panels (e.g. the mount).
    """
    u, v = np.asarray(u, float), np.asarray(v, float)
    values = np.asarray(values, float)
    fig = Figure(figsize=(FIG_WIDTH, 0.46 * FIG_WIDTH), dpi=DPI, layout="constrained")
    ax1, ax2 = fig.subplots(1, 2, sharex=True, sharey=True)
    shown = np.ma.masked_invalid(values)
    mesh = ax1.pcolormesh(u, v, shown, shading="nearest", cmap="viridis")
    fig.colorbar(mesh, ax=ax1, label=f"limit [{unit}]", shrink=0.9)
    keys = [k for k in _CAUSE_COLOURS if any(_cause_key(c) == k for c in np.ravel(causes) if c)]
    index = {k: i for i, k in enumerate(keys)}
    codes = np.ma.masked_all(values.shape)
    for (i, j), c in np.ndenumerate(np.asarray(causes, dtype=object)):
        if c:
            codes[i, j] = index[_cause_key(c)]
    if keys:
        cmap = ListedColormap([_CAUSE_COLOURS[k] for k in keys])
        norm = BoundaryNorm(np.arange(len(keys) + 1) - 0.5, len(keys))
        ax2.pcolormesh(u, v, codes, shading="nearest", cmap=cmap, norm=norm)
        ax2.legend(handles=[Patch(color=_CAUSE_COLOURS[k], label=k) for k in keys],
                   loc="upper left", fontsize=7, title="limited by", title_fontsize=7,
                   framealpha=0.85)
    for ax, name in ((ax1, "value"), (ax2, "limiting cause")):
        for label, mu, mv in marks:
            ax.plot([mu], [mv], marker="+", color="k", markersize=10, linestyle="none")
            ax.annotate(label, (mu, mv), textcoords="offset points", xytext=(4, 4), fontsize=7)
        ax.set_aspect("equal")
        ax.set_xlabel(f"tool {axes[0]} in the base frame [m]")
        ax.set_title(name, fontsize=9)
        ax.set_facecolor("#f2f2f2")
    ax1.set_ylabel(f"tool {axes[1]} in the base frame [m]")
    fig.suptitle(f"{title} (grey: out of reach or not held at rest)", fontsize=10)
    return fig
