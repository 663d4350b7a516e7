"""Rendering tests of `opspace.plots` (the sizing report's figures).

These are rendering tests, not numerical ones: `plots` computes no physics,
so there is no outside numerical reference to check against.  Each test
builds synthetic inputs (straight speed-torque lines, sinusoids), renders the
figure to PNG, and checks what a reader relies on: a valid PNG about 900 px
wide, a title, axis labels carrying a unit in brackets, every limit drawn as
a line at the limit's value, a legend where there are several series, and
actionable errors for inconsistent inputs.  The PNG signature and IHDR layout
are those of the PNG specification (W3C, Portable Network Graphics
Specification, 2nd ed., 2003, sec. 5.2 and 11.2.2; section numbers recalled
from memory).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from conftest import PNG_SIGNATURE, png_checked
from matplotlib.patches import Circle, Polygon, Rectangle

from opspace import plots

UNIT = re.compile(r"\[[^\]]+\]")

T = np.linspace(0.0, 12.0, 600)
SEGMENTS = [(0.0, 2.0, "accelerate"), (2.0, 7.0, "cruise"), (7.0, 8.0, "brake"),
            (8.0, 12.0, "arm move with payload")]
CONTACTS = np.array([[0.0, -0.22], [0.0, 0.22], [0.3, 0.2], [0.3, -0.2], [-0.3, 0.2],
                     [-0.3, -0.2]])
NAMES = ["wheel_right", "wheel_left", "caster_1", "caster_2", "caster_3", "caster_4"]
# Convex hull of CONTACTS, counter-clockwise.
HULL = np.array([[-0.3, -0.2], [0.0, -0.22], [0.3, -0.2], [0.3, 0.2], [0.0, 0.22], [-0.3, 0.2]])
FOOTPRINT = (-0.35, 0.35, -0.25, 0.25, 0.40)


# ------------------------------------------------------------------- helpers
def png_checks(fig):
    return png_checked(fig, min_height=300)


def title_of(fig):
    sup = fig.get_suptitle()
    return sup or " ".join(ax.get_title() for ax in fig.axes)


def assert_units(*labels):
    for label in labels:
        assert UNIT.search(label), f"axis label {label!r} carries no unit in brackets"


def lines_at_y(ax, y):
    """Line2D artists of `ax` whose every y value equals y (horizontal limit lines)."""
    return [ln for ln in ax.get_lines()
            if len(ln.get_ydata()) and np.all(np.asarray(ln.get_ydata(), dtype=float) == y)]


def lines_at_x(ax, x):
    return [ln for ln in ax.get_lines()
            if len(ln.get_xdata()) and np.all(np.asarray(ln.get_xdata(), dtype=float) == x)]


def legend_texts(fig_or_ax):
    legends = fig_or_ax.legends if hasattr(fig_or_ax, "legends") and fig_or_ax.legends else []
    if not legends and hasattr(fig_or_ax, "get_legend") and fig_or_ax.get_legend():
        legends = [fig_or_ax.get_legend()]
    return [t.get_text() for lg in legends for t in lg.get_texts()]


def straight_envelope(peak, no_load_speed):
    """Torque falling linearly from `peak` at standstill to 0 at `no_load_speed`."""
    w = np.linspace(0.0, no_load_speed, 5)
    return w, peak * (1.0 - w / no_load_speed)


# ----------------------------------------------------------- torque-speed plane
def torque_speed_inputs():
    envelopes = []
    for label, peak, rated, w0, ok in [("small", 0.8, 0.30, 450.0, False),
                                       ("large", 2.0, 0.75, 420.0, True)]:
        w, T_env = straight_envelope(peak, w0)
        envelopes.append(dict(label=label, speed=w, torque=T_env, rated_torque=rated, passed=ok))
    w = 300.0 * np.sin(2 * np.pi * T / 12.0)
    tau = 0.5 * np.cos(2 * np.pi * T / 12.0)   # negative half: braking, folded by |.|
    operating = [dict(label="right wheel", speed=w, torque=tau, peak=(0.0, 0.5), rms_torque=0.354),
                 dict(label="left wheel", speed=0.9 * w, torque=0.9 * tau, peak=(0.0, 0.45),
                      rms_torque=0.318)]
    return envelopes, operating


def test_torque_speed_plane_renders_limits_peak_and_rms():
    envelopes, operating = torque_speed_inputs()
    fig = plots.torque_speed_plane(envelopes, operating)
    ax = fig.axes[0]
    assert "torque-speed" in title_of(fig).lower()
    assert_units(ax.get_xlabel(), ax.get_ylabel())
    assert "rad/s" in ax.get_xlabel() and "N·m" in ax.get_ylabel()
    # the rpm secondary axis (n = 60 ω / 2π) is labelled too
    assert any("rpm" in a.get_xlabel() for a in ax.child_axes)
    for env in envelopes:   # one dashed continuous-limit line per candidate
        rated = lines_at_y(ax, env["rated_torque"])
        assert len(rated) == 1 and rated[0].get_linestyle() == "--"
    for s in operating:     # RMS line and peak marker per series
        assert len(lines_at_y(ax, s["rms_torque"])) == 1
        assert any(ln.get_marker() == "D" and ln.get_ydata()[0] == s["peak"][1]
                   for ln in ax.get_lines())
    # the operating points are drawn in the first quadrant
    points = [ln for ln in ax.get_lines() if ln.get_marker() == "."]
    assert points and all(np.all(np.asarray(ln.get_ydata()) >= 0) for ln in points)
    # failing candidate muted: thinner and faded
    failing = [ln for ln in ax.get_lines() if "small" in ln.get_label()]
    passing = [ln for ln in ax.get_lines() if "large" in ln.get_label()]
    assert all(ln.get_alpha() < 1 and ln.get_linewidth() < passing[0].get_linewidth()
               for ln in failing)
    assert any("(fails)" in text for text in legend_texts(ax))
    png_checks(fig)


def test_torque_speed_plane_single_series_dict():
    envelopes, operating = torque_speed_inputs()
    fig = plots.torque_speed_plane(envelopes[1:], dict(speed=operating[0]["speed"],
                                                        torque=operating[0]["torque"]))
    assert fig.axes[0].get_legend() is not None
    png_checks(fig)


def test_torque_speed_plane_rejects_mismatched_envelope():
    envelopes, operating = torque_speed_inputs()
    envelopes[0]["torque"] = envelopes[0]["torque"][:-1]
    with pytest.raises(ValueError, match=r"envelopes\[0\]\.torque"):
        plots.torque_speed_plane(envelopes, operating)
    del envelopes[1]["rated_torque"]
    with pytest.raises(ValueError, match="rated_torque"):
        plots.torque_speed_plane(envelopes[1:], operating)


# ------------------------------------------------------------ drive time series
def drive_inputs():
    tau = np.c_[10 * np.sin(T), 9 * np.sin(T + 0.3)]
    w = np.c_[12 * np.sin(T / 4), 11 * np.sin(T / 4)]
    return tau, w, tau * w


def test_drive_time_series_three_axes_with_limits_and_segments():
    tau, w, P = drive_inputs()
    fig = plots.drive_time_series(T, tau, w, P, torque_limits={"peak": 30.0, "rated": 12.0},
                                  speed_limit=14.0, segments=SEGMENTS)
    ax_T, ax_w, ax_P = fig.axes
    assert fig.get_suptitle()
    assert_units(ax_T.get_ylabel(), ax_w.get_ylabel(), ax_P.get_ylabel(), ax_P.get_xlabel())
    assert "[s]" in ax_P.get_xlabel()
    for value in (30.0, -30.0, 12.0, -12.0):   # ± lines of each torque limit
        assert len(lines_at_y(ax_T, value)) == 1, value
    for value in (14.0, -14.0):
        assert len(lines_at_y(ax_w, value)) == 1, value
    assert ax_T.get_shared_x_axes().joined(ax_T, ax_P)
    for ax in fig.axes:
        texts = legend_texts(ax)
        assert "right wheel" in texts and "left wheel" in texts
    # segment labels that fit are written above the top axis
    written = {t.get_text() for t in ax_T.texts}
    assert {"accelerate", "cruise", "brake"} <= written
    png_checks(fig)


def test_drive_time_series_scalar_limit_and_motor_wording():
    tau, w, P = drive_inputs()
    many = [(0.5 * i, 0.5 * (i + 1), f"segment {i + 1}") for i in range(24)]
    fig = plots.drive_time_series(T, tau[:, 0], w[:, 0], P[:, 0], torque_limits=25.0,
                                  labels=("right motor",), where="motor", segments=many)
    assert "motor torque" in fig.axes[0].get_ylabel()
    # labels too long for their band fall back to the segment's number
    assert [t.get_text() for t in fig.axes[0].texts] == [f"#{i + 1}" for i in range(24)]
    assert len(lines_at_y(fig.axes[0], 25.0)) == len(lines_at_y(fig.axes[0], -25.0)) == 1
    png_checks(fig)


def test_drive_time_series_rejects_bad_inputs():
    tau, w, P = drive_inputs()
    with pytest.raises(ValueError, match="`speed`"):
        plots.drive_time_series(T, tau, w[:, :1], P)
    with pytest.raises(ValueError, match="shape"):
        plots.drive_time_series(T[:-1], tau, w, P)
    with pytest.raises(ValueError, match="torque_limits"):
        plots.drive_time_series(T, tau, w, P, torque_limits={"peak": -3.0})
    with pytest.raises(ValueError, match=r"segments\[0\]"):
        plots.drive_time_series(T, tau, w, P, segments=[(2.0, 1.0, "backwards")])


# ------------------------------------------------------- support polygon + ZMP
def zmp_inputs():
    zmp = np.c_[0.05 + 0.2 * np.sin(2 * np.pi * T / 12), 0.1 * np.sin(2 * np.pi * T / 5)]
    com = 0.3 * zmp
    return zmp, com


def test_support_polygon_zmp_top_view():
    zmp, com = zmp_inputs()
    worst, edge = 150, 2   # edge 2 runs from HULL[2] to HULL[3], the front x = 0.3 m
    fig = plots.support_polygon_zmp(HULL, CONTACTS, NAMES, zmp, com=com, worst_index=worst,
                                    worst_label="margin 0.05 m at t = 3 s",
                                    footprint=FOOTPRINT, t=T, worst_edge=edge)
    ax = fig.axes[0]
    assert "support polygon" in ax.get_title().lower()
    assert_units(ax.get_xlabel(), ax.get_ylabel())
    assert "forward" in ax.get_xlabel() and "left" in ax.get_ylabel()
    assert ax.get_aspect() == 1.0
    polygons = [p for p in ax.patches if isinstance(p, Polygon)]
    assert len(polygons) == 1
    np.testing.assert_array_equal(polygons[0].get_xy()[:len(HULL)], HULL)
    assert sum(isinstance(p, Rectangle) for p in ax.patches) == 1   # the footprint
    # the nearest edge is drawn as a line at x = 0.3 m (the limit)
    assert len(lines_at_x(ax, 0.3)) == 1
    # drive wheels and casters drawn with different markers
    markers = {ln.get_label(): ln.get_marker() for ln in ax.get_lines()}
    assert markers["drive wheel contact"] != markers["caster"]
    assert any(t.get_text().startswith("margin 0.05 m") for t in ax.texts)
    texts = legend_texts(fig)
    for expected in ("support polygon", "ZMP track", "COM ground projection", "worst instant",
                     "nearest edge", "chassis footprint"):
        assert expected in texts
    assert any("time [s]" in a.get_ylabel() for a in fig.axes[1:])   # colour bar
    png_checks(fig)


def test_support_polygon_zmp_minimal_and_errors():
    zmp, _ = zmp_inputs()
    fig = plots.support_polygon_zmp(HULL, CONTACTS, NAMES, zmp)
    png_checks(fig)
    with pytest.raises(ValueError, match="contact_names"):
        plots.support_polygon_zmp(HULL, CONTACTS, NAMES[:-1], zmp)
    with pytest.raises(ValueError, match="worst_index"):
        plots.support_polygon_zmp(HULL, CONTACTS, NAMES, zmp, worst_index=len(T))
    with pytest.raises(ValueError, match="`com`"):
        plots.support_polygon_zmp(HULL, CONTACTS, NAMES, zmp, com=zmp[:-1])
    with pytest.raises(ValueError, match="footprint"):
        plots.support_polygon_zmp(HULL, CONTACTS, NAMES, zmp, footprint=(0.3, -0.3, -0.2, 0.2))


# ----------------------------------------------------------- loads and traction
def test_loads_and_traction_slip_limit_and_shading():
    N = np.c_[[150 + 40 * np.sin(T + k) for k in range(6)]].T
    N[:, 5] = np.clip(N[:, 5] - 150, 0.0, None)   # one caster lifting off
    N[10:20, :] = np.nan                          # an instant with no admissible loads
    U = np.c_[0.6 + 0.5 * np.abs(np.sin(T)), 0.5 + 0.4 * np.abs(np.sin(T))]
    fig = plots.loads_and_traction(T, N, NAMES, U, segments=SEGMENTS)
    ax_N, ax_U = fig.axes
    assert fig.get_suptitle()
    assert_units(ax_N.get_ylabel(), ax_U.get_ylabel(), ax_U.get_xlabel())
    assert len(lines_at_y(ax_U, 1.0)) == 1          # slip limit
    assert len(lines_at_y(ax_N, 0.0)) == 1          # lift-off
    # the region above the slip limit is shaded: a patch from y = 1 to the top
    shaded = [p for p in ax_U.patches if "slipping" in p.get_label()]
    assert len(shaded) == 1
    assert ax_U.get_ylim()[1] >= np.nanmax(U)
    assert set(NAMES) <= set(legend_texts(ax_N))
    assert {"wheel_right", "wheel_left"} <= set(legend_texts(ax_U))
    png_checks(fig)


def test_loads_and_traction_rejects_bad_names():
    N = np.ones((T.size, 3))
    with pytest.raises(ValueError, match="contact_names"):
        plots.loads_and_traction(T, N, NAMES, np.ones((T.size, 2)))
    with pytest.raises(ValueError, match="traction_names"):
        plots.loads_and_traction(T, N, NAMES[:3], np.ones((T.size, 2)), traction_names=["a"])


# ----------------------------------------------------------------- robot poses
def pose_inputs():
    reach = dict(label="max wheel torque",
                 points=np.array([[0.15, 0, 0.45], [0.15, 0, 0.60], [0.55, 0.1, 0.75],
                                  [0.95, 0.3, 0.60]]),
                 com=[0.08, 0.03, 0.35], payload=[0.95, 0.3, 0.55])
    side = dict(label="min tip-over margin",
                points=np.array([[0.15, 0, 0.45], [0.15, 0, 0.60], [0.2, 0.45, 0.8],
                                 [0.25, 0.85, 0.65]]))
    return [reach, side]


def test_robot_poses_side_and_top_views():
    poses = pose_inputs()
    fig = plots.robot_poses(poses, footprint=FOOTPRINT, wheel_radius=0.08, half_track=0.22,
                            casters=CONTACTS[2:])
    assert len(fig.axes) == 2 * len(poses)
    assert fig.get_suptitle()
    for ax in fig.axes:
        assert_units(ax.get_xlabel(), ax.get_ylabel())
        assert ax.get_aspect() == 1.0
        assert ax.get_title()
    side, top = fig.axes[0], fig.axes[1]
    assert "z" in side.get_ylabel() and "y" in top.get_ylabel()
    assert len(lines_at_y(side, 0.0)) == 1                          # the ground
    assert sum(isinstance(p, Circle) for p in side.patches) == 1    # the wheels, side on
    assert sum(isinstance(p, Rectangle) for p in top.patches) == 3  # chassis + 2 wheels
    # the arm polyline goes through the given joints (x, z) and (x, y)
    arm = [ln for ln in side.get_lines() if ln.get_label() == "arm (joints)"][0]
    np.testing.assert_array_equal(arm.get_ydata(), poses[0]["points"][:, 2])
    arm = [ln for ln in top.get_lines() if ln.get_label() == "arm (joints)"][0]
    np.testing.assert_array_equal(arm.get_ydata(), poses[0]["points"][:, 1])
    texts = legend_texts(fig)
    for expected in ("arm (joints)", "tool", "robot COM", "payload", "drive wheel", "caster"):
        assert expected in texts
    png_checks(fig)


def test_robot_poses_errors():
    with pytest.raises(ValueError, match="empty"):
        plots.robot_poses([])
    bad = pose_inputs()
    bad[1]["points"] = bad[1]["points"][:, :2]
    with pytest.raises(ValueError, match=r"poses\[1\]\.points"):
        plots.robot_poses(bad)
    with pytest.raises(ValueError, match="z_top"):
        plots.robot_poses(pose_inputs(), footprint=FOOTPRINT[:4])


# ---------------------------------------------------------------- margins bar
def test_margins_bar_zero_line_and_failing_bars():
    criteria = [dict(label="A: peak torque", margin=0.25, passed=True),
                dict(label="A: RMS torque", margin=-0.3, passed=False),
                dict(label="A: speed", margin=4.0, passed=True),       # clipped for display
                dict(label="A: tip-over", margin=float("nan"), passed=False)]
    fig = plots.margins_bar(criteria)
    ax = fig.axes[0]
    assert ax.get_title()
    assert_units(ax.get_xlabel())
    assert len(lines_at_x(ax, 0.0)) == 1      # the zero (limit) line
    bars = [p for p in ax.patches if isinstance(p, Rectangle) and p.get_facecolor()[3] > 0]
    colours = {tuple(np.round(b.get_facecolor(), 3)) for b in bars[:len(criteria)]}
    assert len(colours) == 2                 # passing and failing bars differ
    assert max(b.get_width() for b in bars) == pytest.approx(200.0)   # display_limit 2.0
    values = [t.get_text() for t in ax.texts]
    assert "+400.0 % (bar clipped)" in values and "-30.0 %" in values and "n/a" in values
    assert {"passes", "fails"} <= set(legend_texts(fig))
    png_checks(fig)


def test_margins_bar_rejects_incomplete_entry():
    with pytest.raises(ValueError, match="passed"):
        plots.margins_bar([dict(label="x", margin=0.1)])


# --------------------------------------------------------------- output helpers
def test_save_writes_png(tmp_path):
    fig = plots.margins_bar([dict(label="x", margin=0.1, passed=True)])
    path = plots.save(fig, tmp_path / "margins.png")
    assert path.read_bytes()[:8] == PNG_SIGNATURE


def test_no_global_figure_state():
    # Figures are not registered with pyplot ...
    fig = plots.margins_bar([dict(label="x", margin=0.1, passed=True)])
    assert fig.canvas.manager is None
    # ... and a pyplot figure is closed after rendering to bytes.
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    pfig, pax = plt.subplots()
    pax.plot([0, 1], [0, 1])
    data = plots.figure_to_png_bytes(pfig)
    assert data[:8] == PNG_SIGNATURE
    assert not plt.fignum_exists(pfig.number)
