"""The animation of a simulation run (top view, world frame from above) and
the frames it draws, taken from a `SimulationResult`.

Rendering only; the placement of base-frame points in the world is the planar
rigid motion p_W = (x, y, 0) + R_z(θ) p_B of `opspace.plots._simulation`.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Polygon, Rectangle

from ._simulation import _MAX_FRAMES, _check_pose_args, _outline, _place, _wheel_bars
from ._style import _FAIL, _PASS, _WHEEL_COLOURS, _array

__all__ = ["animation", "frames_from_result"]


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
