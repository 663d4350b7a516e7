"""The look shared by every figure of opspace: size, palette, limit lines,
segment bands, and the output helpers (PNG bytes, files).

- SI units, written in brackets in each axis label: ``"time [s]"``.
- Limits are drawn as labelled lines (and shaded where a region is
  forbidden); a legend whenever more than one series is drawn.
- Sized to be read at 900 px wide: ``FIG_WIDTH`` inches at ``DPI`` dots per
  inch (8.2 in × 110 dpi ≈ 900 px).
- Right wheel and left wheel keep the same colours in every figure.

Figures are built on `matplotlib.figure.Figure` directly, never through
`pyplot`: no global state is touched.
"""

from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure


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
