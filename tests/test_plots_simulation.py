"""Rendering tests of `opspace.plots` (the simulation run's figures).

These are rendering tests, not numerical ones: the module computes no
physics, so the figures themselves have no outside numerical reference to be
checked against.  Each test builds synthetic inputs (sinusoids, a straight
drive, a small two-link robot written on the fly), renders, and checks what a
reader relies on: a valid PNG about 900 px wide, a title, axis labels carrying
a unit in brackets, every limit drawn as a line at its value, a legend, and
actionable errors for inconsistent inputs.  The GIF is written, opened with
Pillow and checked for its frame count, size and frame delay.

The few numbers the module does compute for display are checked against
outside references named beside each check: the RMS annotation (a closed-form
integral), the chassis outline placed at a base pose (SciPy's rotations) and
the world arm points of `frames_from_result` (Pinocchio's forward kinematics).
The PNG signature and IHDR layout are those of the PNG specification (W3C,
Portable Network Graphics Specification, 2nd ed., 2003, sec. 5.2 and 11.2.2;
section numbers recalled from memory).
"""

from __future__ import annotations

import math
import re
from types import SimpleNamespace

import numpy as np
import pytest
from matplotlib.patches import Polygon
from PIL import Image
from scipy.spatial.transform import Rotation

from opspace.plots import (animation, base_path, efforts, frames_from_result,
                           tracking_error)

from conftest import make_robot, png_checked

UNIT = re.compile(r"\[[^\]]+\]")
T = np.linspace(0.0, 8.0, 1601)
FOOTPRINT = (-0.35, 0.35, -0.25, 0.25, 0.34)


# ------------------------------------------------------------------- helpers
def png_checks(fig):
    return png_checked(fig, min_height=250)


def assert_units(*labels):
    for label in labels:
        assert UNIT.search(label), f"axis label {label!r} carries no unit in brackets"


def lines_at_y(ax, y, rtol=1e-12):
    return [ln for ln in ax.get_lines()
            if len(ln.get_ydata()) > 1
            and np.allclose(np.asarray(ln.get_ydata(), dtype=float), y, rtol=rtol, atol=0)]


def lines_at_x(ax, x):
    return [ln for ln in ax.get_lines()
            if len(ln.get_xdata()) > 1
            and np.allclose(np.asarray(ln.get_xdata(), dtype=float), x, rtol=1e-12, atol=0)]


def legend_texts(fig):
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    return [t.get_text() for lg in legends for t in lg.get_texts()]


# ------------------------------------------------------------ tracking error
def test_tracking_error_panels_limits_events_rms_and_peak():
    A = 0.004                       # m
    e = np.c_[A * np.sin(2 * np.pi * T / 4.0), np.zeros_like(T), np.zeros_like(T)]
    e[800:803, 1] = 0.012           # a spike: the peak, at t = 4.0 .. 4.01 s
    rot = 0.02 * np.cos(2 * np.pi * T / 8.0)
    fig = tracking_error(T, e, orientation_error=rot, pick=3.2, release=6.5,
                         limits={"5 mm RMS target": 0.005, "15 mm peak target": 0.015},
                         orientation_limits=0.05)
    assert fig.get_suptitle()
    ax_p, ax_R = fig.axes
    assert_units(ax_p.get_ylabel(), ax_R.get_ylabel(), ax_R.get_xlabel())
    assert "[mm]" in ax_p.get_ylabel() and "[mrad]" in ax_R.get_ylabel()
    assert "[s]" in ax_R.get_xlabel()
    assert ax_p.get_shared_x_axes().joined(ax_p, ax_R)
    # limits drawn in mm and mrad at their values
    assert len(lines_at_y(ax_p, 5.0)) == 1 and len(lines_at_y(ax_p, 15.0)) == 1
    assert len(lines_at_y(ax_R, 50.0)) == 1
    # pick and release on both panels
    for ax in (ax_p, ax_R):
        assert len(lines_at_x(ax, 3.2)) == 1 and len(lines_at_x(ax, 6.5)) == 1
    texts = legend_texts(fig)
    assert "5 mm RMS target" in texts and any("payload pick" in s for s in texts)
    # the peak diamond sits on the spike: |e| = √(sin² + 12²) mm there
    peak = [ln for ln in ax_p.get_lines() if ln.get_marker() == "D"][0]
    i = 800 + int(np.argmax(np.linalg.norm(e[800:803], axis=1)))
    assert peak.get_xdata()[0] == T[i]
    assert peak.get_ydata()[0] == pytest.approx(1e3 * np.linalg.norm(e[i]), rel=1e-12)
    # RMS of the orientation error 20 cos(2πt/8) mrad over one whole period is
    # 20/√2 mrad (∫₀ᵀ cos²(2πt/T) dt = T/2, an elementary integral; common
    # practice, no source); the trapezoidal rule on 1601 samples is within 1e-5
    rms_line = [ln for ln in ax_R.get_lines() if ln.get_linestyle() == "-."][0]
    assert rms_line.get_ydata()[0] == pytest.approx(20.0 / math.sqrt(2.0), rel=1e-5)
    assert any(s.startswith("RMS 14.1 mrad") for s in texts)
    png_checks(fig)


def test_tracking_error_single_panel_scalar_limit_and_gaps():
    e = 0.002 * (1.0 + np.sin(T))
    e[:50] = np.nan                  # no target yet: a gap, left out of RMS and peak
    fig = tracking_error(T, e, limits=0.005)
    (ax,) = fig.axes
    assert_units(ax.get_ylabel(), ax.get_xlabel())
    assert len(lines_at_y(ax, 5.0)) == 1
    assert any(s == "limit 5 mm" for s in legend_texts(fig))
    peak = [ln for ln in ax.get_lines() if ln.get_marker() == "D"][0]
    assert peak.get_ydata()[0] == pytest.approx(1e3 * np.nanmax(e), rel=1e-12)
    png_checks(fig)


def test_tracking_error_rejects_bad_inputs():
    with pytest.raises(ValueError, match="`position_error`"):
        tracking_error(T, np.zeros(T.size - 1))
    with pytest.raises(ValueError, match="`orientation_error`"):
        tracking_error(T, np.zeros(T.size), orientation_error=np.zeros((T.size, 4, 1)))
    with pytest.raises(ValueError, match="limits"):
        tracking_error(T, np.zeros(T.size), limits={"target": -0.005})
    with pytest.raises(ValueError, match="`pick`"):
        tracking_error(T, np.zeros(T.size), pick=math.inf)


# ------------------------------------------------------------------- efforts
def effort_inputs():
    Q = np.c_[10 * np.sin(T), 9 * np.sin(T + 0.3), 300 + 50 * np.sin(T), 2 * np.cos(T)]
    Q[:, 0] = np.clip(Q[:, 0], -8.0, 8.0)        # wheel_right sits on its limit
    sat = np.zeros(Q.shape, bool)
    sat[:, 0] = np.abs(Q[:, 0]) >= 8.0
    limits = np.array([8.0, 12.0, 800.0, np.inf])
    names = ["wheel_right", "wheel_left", "lift", "wrist_roll"]
    return Q, sat, limits, names


def test_efforts_one_panel_per_coordinate_with_limits_and_saturation():
    Q, sat, limits, names = effort_inputs()
    fig = efforts(T, Q, names, limits, saturated=sat, units=["N·m", "N·m", "N", "N·m"],
                  pick=3.0, ncols=3)
    assert fig.get_suptitle()
    assert len(fig.axes) == 4          # 2 × 3 grid: the two empty cells removed
    for ax, name, lim in zip(fig.axes, names, limits):
        assert name in ax.get_title()
        assert_units(ax.get_ylabel())
        if np.isfinite(lim):           # ± limit, dashed
            for v in (lim, -lim):
                found = lines_at_y(ax, v)
                assert len(found) == 1 and found[0].get_linestyle() == "--", (name, v)
        else:
            assert "no limit" in ax.get_title()
            horizontal = [ln for ln in ax.get_lines() if len(ln.get_ydata()) == 2
                          and ln.get_ydata()[0] == ln.get_ydata()[1]]
            assert not horizontal, "a limit line drawn for an infinite limit"
        assert len(lines_at_x(ax, 3.0)) == 1
    assert "[N]" in fig.axes[2].get_ylabel() and "[N·m]" in fig.axes[0].get_ylabel()
    # saturated samples marked, one cross per sample
    crosses = [ln for ln in fig.axes[0].get_lines() if ln.get_marker() == "x"]
    assert len(crosses) == 1 and len(crosses[0].get_xdata()) == int(sat[:, 0].sum())
    assert not [ln for ln in fig.axes[1].get_lines() if ln.get_marker() == "x"]
    # the time axis labelled under the lowest panel of each column
    assert [bool(ax.get_xlabel()) for ax in fig.axes] == [False, True, True, True]
    assert "[s]" in fig.axes[1].get_xlabel()
    texts = legend_texts(fig)
    assert "± limit" in texts and "saturated" in texts
    png_checks(fig)


def test_efforts_default_units_and_bad_inputs():
    Q, sat, limits, names = effort_inputs()
    fig = efforts(T, Q[:, :2], names[:2], limits[:2])
    assert all("[N·m]" in ax.get_ylabel() for ax in fig.axes)
    assert "saturated (none)" in legend_texts(fig)
    png_checks(fig)
    with pytest.raises(ValueError, match="`names`"):
        efforts(T, Q, names[:3], limits)
    with pytest.raises(ValueError, match="`limits`"):
        efforts(T, Q, names, limits[:3])
    with pytest.raises(ValueError, match="`limits`"):
        efforts(T, Q, names, -limits)
    with pytest.raises(ValueError, match="`saturated`"):
        efforts(T, Q, names, limits, saturated=sat[:, :2])
    with pytest.raises(ValueError, match="`units`"):
        efforts(T, Q, names, limits, units=["N·m"])


# ----------------------------------------------------------------- base path
def drive():
    """A base that drives 4 m while turning a little, with a tool ahead of it."""
    s = np.linspace(0.0, 1.0, 401)
    x, y, th = 4.0 * s, 0.3 * s ** 2, 0.6 * s
    tool = np.c_[x + 0.8 * np.cos(th), y + 0.8 * np.sin(th) + 0.1, np.full_like(s, 0.8)]
    return s * 6.0, x, y, th, tool


def test_base_path_outlines_at_instants_are_the_placed_footprint():
    t, x, y, th, tool = drive()
    instants = [0, 200, 400]
    fig = base_path(x, y, th, footprint=FOOTPRINT, instants=instants, tool=tool,
                    target=tool + 0.002, payload_position=(2.0, 0.6, 0.7),
                    wheel_radius=0.08, half_track=0.22, t=t)
    (ax,) = fig.axes
    assert fig.get_suptitle()
    assert_units(ax.get_xlabel(), ax.get_ylabel())
    assert ax.get_aspect() == 1.0
    outlines = [p for p in ax.patches   # the light outlines (wheels are opaque)
                if isinstance(p, Polygon) and p.get_facecolor()[3] < 0.5]
    assert len(outlines) == len(instants)
    x0, x1, y0, y1 = FOOTPRINT[:4]
    corners = np.array([[x0, y0, 0], [x1, y0, 0], [x1, y1, 0], [x0, y1, 0]])
    for patch, i in zip(outlines, instants):
        # footprint corners rotated about z by θ and moved to (x, y): SciPy's
        # rotation (scipy.spatial.transform.Rotation), an independent library
        want = Rotation.from_euler("z", th[i]).apply(corners)[:, :2] + [x[i], y[i]]
        np.testing.assert_allclose(patch.get_xy()[:4], want, atol=1e-12)
    # two wheels per instant
    assert sum(p.get_label() == "drive wheel" for p in ax.patches) == 1   # labelled once
    assert len(ax.patches) == 3 * len(instants)
    texts = legend_texts(fig)
    for label in ("base path (base origin)", "tool path", "tool target path"):
        assert label in texts
    assert any(s.startswith("payload at rest") for s in texts)
    assert {a.get_text() for a in ax.texts} == {"t = 0 s", "t = 3 s", "t = 6 s"}
    png_checks(fig)


def test_base_path_without_geometry_and_bad_inputs():
    t, x, y, th, tool = drive()
    fig = base_path(x, y, th, footprint=None, instants=[-1], tool=tool[:, :2])
    assert [a.get_text() for a in fig.axes[0].texts] == ["#400"]
    png_checks(fig)
    with pytest.raises(ValueError, match="`instants`"):
        base_path(x, y, th, footprint=FOOTPRINT, instants=[401])
    with pytest.raises(ValueError, match="`theta`"):
        base_path(x, y, th[:-1], footprint=FOOTPRINT, instants=[0])
    with pytest.raises(ValueError, match="`footprint`"):
        base_path(x, y, th, footprint=(0.3, -0.3, -0.2, 0.2), instants=[0])
    with pytest.raises(ValueError, match="`payload_position`"):
        base_path(x, y, th, footprint=FOOTPRINT, instants=[0], payload_position=(1.0,))


# ----------------------------------------------------------------- animation
def synthetic_frames(n):
    frames = []
    for k in range(n):
        s = k / max(n - 1, 1)
        pose = np.array([2.0 * s, 0.1 * s, 0.3 * s])
        c, si = math.cos(pose[2]), math.sin(pose[2])
        P_B = np.array([[0.18, 0.0, 0.34], [0.18, 0.0, 0.8], [0.5, 0.1, 1.1], [0.8, 0.3, 0.7]])
        P_W = np.c_[pose[0] + c * P_B[:, 0] - si * P_B[:, 1],
                    pose[1] + si * P_B[:, 0] + c * P_B[:, 1], P_B[:, 2]]
        frames.append(dict(t=0.5 * k, base_pose=pose, arm_points=P_W,
                           tool_target=P_W[-1] + 0.01, holding=n // 3 <= k < 2 * n // 3))
    return frames


def test_animation_writes_a_gif_with_the_frames(tmp_path):
    frames = synthetic_frames(6)
    out = animation(frames, tmp_path / "pick.gif", footprint=FOOTPRINT, fps=20,
                    payload_position=(1.0, 0.4, 0.7), wheel_radius=0.08, half_track=0.22,
                    dpi=50, title="test pick")
    assert out == tmp_path / "pick.gif" and out.stat().st_size < 3_000_000
    with Image.open(out) as im:
        assert im.format == "GIF" and im.n_frames == 6
        assert im.size[0] == 400          # 8 in at 50 dpi
        assert 150 <= im.size[1] <= 300   # 3 to 6 in at 50 dpi
        # GIF frame delays are stored in hundredths of a second (GIF89a
        # specification, CompuServe 1990, "Graphic Control Extension"): 20 fps = 50 ms
        assert im.info["duration"] == pytest.approx(50, abs=10)
        first = np.asarray(im.convert("RGB"))
        im.seek(5)
        last = np.asarray(im.convert("RGB"))
    assert first.std() > 5 and np.any(first != last)   # drawn, and the robot moved


def test_animation_thins_long_runs_and_rejects_bad_frames(tmp_path):
    out = animation(synthetic_frames(12), tmp_path / "thin.gif", footprint=None, dpi=30,
                    max_frames=4)
    with Image.open(out) as im:
        assert im.n_frames == 4
    with pytest.raises(ValueError, match="empty"):
        animation([], tmp_path / "x.gif", footprint=FOOTPRINT)
    bad = synthetic_frames(2)
    del bad[1]["arm_points"]
    with pytest.raises(ValueError, match=r"frames\[1\].*arm_points"):
        animation(bad, tmp_path / "x.gif", footprint=FOOTPRINT)
    with pytest.raises(ValueError, match="height"):
        animation(synthetic_frames(2), tmp_path / "x.gif", footprint=FOOTPRINT[:4])
    with pytest.raises(ValueError, match="`fps`"):
        animation(synthetic_frames(2), tmp_path / "x.gif", footprint=FOOTPRINT, fps=0)


# -------------------------------------------------------- frames from a run
def test_frames_from_result_places_the_arm_in_the_world(tmp_path):
    import pinocchio as pin

    robot = make_robot(tmp_path)
    poses = [(0.0, 0.0, 0.0), (1.2, -0.4, 0.7), (2.5, 0.3, -2.4)]
    q = np.array([robot.configuration(base_pose=p, arm=[0.3 * k, -0.5 + 0.2 * k])
                  for k, p in enumerate(poses)])
    result = SimpleNamespace(t=np.array([0.0, 0.5, 1.0]), q=q,
                             target_position=np.full((3, 3), np.nan),
                             payload=np.array([False, True, True]))
    frames = frames_from_result(robot, result, every=1)
    assert [f["holding"] for f in frames] == [False, True, True]
    data = robot.model.createData()
    for f, qi, pose in zip(frames, q, poses):
        np.testing.assert_allclose(f["base_pose"], pose, atol=1e-12)
        # world positions of the arm joints and the tool from Pinocchio's own
        # forward kinematics (pinocchio.framesForwardKinematics, oMi / oMf)
        pin.framesForwardKinematics(robot.model, data, qi)
        want = [data.oMi[robot.model.getJointId(n)].translation for n in robot.arm_joint_names]
        want.append(data.oMf[robot.tool_frame_id].translation)
        np.testing.assert_allclose(f["arm_points"][1:], np.array(want), atol=1e-12)
    # default stride: at most 150 frames, first and last sample kept
    n = 1001
    long = SimpleNamespace(t=np.linspace(0, 10, n), q=np.repeat(q[:1], n, axis=0),
                           target_position=np.zeros((n, 3)), payload=np.zeros(n, bool))
    frames = frames_from_result(robot, long)
    assert len(frames) <= 150 and frames[0]["t"] == 0.0 and frames[-1]["t"] == 10.0
    with pytest.raises(ValueError, match="`every`"):
        frames_from_result(robot, long, every=0)


def test_simulation_page_is_self_contained(tmp_path):
    # opspace simulate's report.html: every figure embedded, the animation too,
    # the effort table names every coordinate, the cautions are on the page
    import io
    import re

    from PIL import Image

    from opspace.description import load_scenario
    from opspace.report import simulation_html, write_simulation_outputs
    from opspace.simulation import ScenarioRun
    from conftest import DEMO
    run = ScenarioRun(load_scenario(DEMO.with_name("pick.toml")))
    result = run.run()
    paths = write_simulation_outputs(run, result, tmp_path, animate=False)  # GIF: tested above
    html = paths["report.html"].read_text(encoding="utf-8")
    images = re.findall(r'<img[^>]*src="([^"]+)"', html)
    # four figures of the run, and the contact pre-check's two (masses, speed use)
    # where the description lists contact points, as the demo does
    expected = 4 + (2 if result.extra.get("contact") is not None else 0)
    assert len(images) == expected and all(src.startswith("data:image/png;base64,")
                                           for src in images)
    # the 3-D view's three.js names the XHTML namespace (an identifier, not a request)
    text = html.replace("http://www.w3.org/1999/xhtml", "")
    assert "http://" not in text and "https://" not in text
    for name in result.coordinate_names:
        assert f">{name}<" in html
    for needle in ("COMPLETED", "Efforts against their limits", "Stability", "Assumptions",
                   "plastic catch", "safety standards"):
        assert needle in html
    gif = io.BytesIO()
    Image.new("RGB", (2, 2)).save(gif, format="GIF")
    html = simulation_html(run, result, [("pick.gif", gif.getvalue())])
    assert 'src="data:image/gif;base64,' in html
    # headless Chromium draws the run's 3-D view offline, without error (tests/browser.py)
    from browser import open_view3d, require_browser
    require_browser()
    view = open_view3d(paths["report.html"], screenshot=tmp_path / "report.png")
    assert view.ok, view.problems()
    from browser import open_page, visible_text_problems
    text = open_page(paths["report.html"], evaluate="document.body.innerText").evaluated
    assert not visible_text_problems(text)
    assert view.evaluated["frames"] > 50, view.evaluated   # the slider's samples
    assert view.evaluated["drawn"] > 0.005 and view.evaluated["empty"] < 1e-3, view.evaluated
