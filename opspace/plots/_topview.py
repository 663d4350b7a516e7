"""Top views of the base (figures of the sizing report): the support polygon
with the ZMP track, and the robot drawn in its worst poses.

Drawn in the base frame seen from above: x forward to the right, y left
upwards (z out of the page), equal aspect.  Rendering only: every number
comes in as an argument (from `opspace.stability` and `opspace.sizing`).
"""

from __future__ import annotations


import numpy as np
from matplotlib.collections import LineCollection
from matplotlib.patches import Circle, Polygon, Rectangle

from ._style import _FAIL, _PASS, _WHEEL_COLOURS, _array, _figure, _key

__all__ = ["robot_poses", "support_polygon_zmp"]


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
