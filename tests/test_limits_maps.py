"""Limits over the workspace: maps over tool positions, named poses, the
protective-field speed, and the `opspace limits` command and its page."""

from __future__ import annotations

import csv
import json
import math

import numpy as np
import pytest

import opspace
from opspace.limits import (limits_map, motion_limits, pose_limits, protective_speed,
                            reach_positions)
from conftest import DEMO, base_doc, make_robot, png_checked, run_cli_module, two_link_urdf


def test_protective_speed_kinematics():
    # Uniform deceleration (kinematics): a stop from v covers v t_r + v² / (2 a);
    # the speed returned must make it exactly the stopping length, and with no
    # reaction time v = sqrt(2 a s) (the classical stopping-distance relation).
    for a, s, t in ((2.0, 1.0, 0.0), (1.3, 0.7, 0.25), (4.0, 2.5, 0.1)):
        v = protective_speed(a, s, t)
        assert v * t + v * v / (2 * a) == pytest.approx(s, rel=1e-12)
    assert protective_speed(2.0, 1.0) == pytest.approx(math.sqrt(4.0), rel=1e-12)
    assert protective_speed(2.0, 100.0, top_speed=1.5) == 1.5
    np.testing.assert_allclose(protective_speed(np.array([0.0, 2.0]), 1.0), [0.0, 2.0])
    for bad in ((2.0, 0.0, 0.0), (2.0, 1.0, -0.1), (2.0, float("nan"), 0.0)):
        with pytest.raises(opspace.ConfigError):
            protective_speed(*bad)


@pytest.fixture(scope="module")
def planar(tmp_path_factory):
    # a two-link arm in the x-z plane on a robot with casters ahead and behind
    tmp = tmp_path_factory.mktemp("planar")
    doc = base_doc(caster=[{"position": [0.35, 0.2]}, {"position": [0.35, -0.2]},
                           {"position": [-0.35, 0.0]}])
    return make_robot(tmp, two_link_urdf(), doc)


def test_side_map_reaches_its_targets_and_matches_motion_limits(planar):
    robot = planar
    m = limits_map(robot, "side", points=5, extent=((0.2, 0.9), (0.3, 1.1)),
                   posture=[0.5, 0.5])
    assert m.axes == ("x", "z") and m.values["acceleration"].shape == (5, 5)
    ok = m.status == "ok"
    assert ok.sum() >= 8
    data = robot.model.createData()
    import pinocchio as pin
    for (i, j) in zip(*np.nonzero(ok)):
        q = robot.configuration(arm=m.arm[i, j])
        pin.framesForwardKinematics(robot.model, data, q)
        # forward kinematics (Pinocchio) of the reached configuration hits the target
        np.testing.assert_allclose(data.oMf[robot.tool_frame_id].translation,
                                   [m.u[j], m.level, m.v[i]], atol=1e-4)
        lim = motion_limits(robot, q)
        assert m.values["deceleration"][i, j] == pytest.approx(lim.deceleration.value, rel=1e-12)
        assert m.limited_by["yaw_acceleration"][i, j] == lim.yaw_acceleration.limited_by
    # far beyond the reach of a 0.9 m arm: blank
    far = limits_map(robot, "side", points=2, extent=((3.0, 3.5), (0.4, 0.5)))
    assert np.all(far.status == "unreachable") and np.all(np.isnan(far.values["acceleration"]))


def test_reach_rule_prefers_the_posture_side(planar):
    # a two-link arm reaches a point with the elbow up or down; from an elbow-up
    # posture the rule keeps the elbow up (the solution the posture leads to)
    target = np.array([[0.6, 0.0, 0.6]])
    up = reach_positions(planar, target, np.array([1.2, -1.0]))[0]
    down = reach_positions(planar, target, np.array([0.0, 1.0]))[0]
    assert np.all(np.isfinite(up)) and np.all(np.isfinite(down))
    assert up[1] < 0 < down[1]


def test_named_poses_table(demo):
    P = pose_limits(demo, payload=True)
    assert P.names == list(demo.description.poses)
    for k, name in enumerate(P.names):
        lim = motion_limits(demo, demo.configuration(arm=name), payload=True)
        assert P.values["acceleration"][k] == pytest.approx(lim.acceleration.value, rel=1e-12)
        assert P.limited_by["lateral_acceleration"][k] == lim.lateral_acceleration.limited_by


def test_heat_map_figure():
    from opspace.plots import limit_heat_map
    u, v = np.linspace(0, 1, 6), np.linspace(0, 0.5, 4)
    values = np.outer(v, u) + 1.0
    values[0, 0] = np.nan
    causes = np.full(values.shape, "traction", dtype=object)
    causes[1:, 3:] = "tip-over"
    causes[0, 0] = ""
    png_checked(limit_heat_map(u, v, values, causes, title="t", unit="m/s²",
                               marks=[("mount", 0.2, 0.1)]), min_height=300)


def test_cli_limits_writes_page_json_csv(tmp_path, capsys):
    out = tmp_path / "out"
    from opspace.cli import main
    code = main(["limits", str(DEMO), "-o", str(out), "--points", "4", "--views", "top",
                 "--stopping-length", "1.2", "--reaction-time", "0.1", "-q"])
    printed = capsys.readouterr().out
    assert code == 0
    assert "reach_forward" in printed and "traction" in printed
    doc = json.loads((out / "limits.json").read_text())
    assert doc["units"]["acceleration"] == "m/s²" and len(doc["maps"]) == 1
    pose = doc["poses"][0]
    v, a = pose["protective_speed"]["value"], pose["deceleration"]["value"]
    assert v == pytest.approx(min(1.5, a * (math.sqrt(0.01 + 2 * 1.2 / a) - 0.1)), rel=1e-12)
    rows = list(csv.DictReader((out / "limits.csv").open(encoding="utf-8")))
    assert len(rows) == len(doc["poses"]) + 16
    assert rows[0]["acceleration limited_by"] in ("traction", "tip-over", "drive torque")
    html = (out / "limits.html").read_text(encoding="utf-8")
    assert "Caution." in html and "safety standards" in html and "Named poses" in html
    from browser import browser_available, open_page
    if browser_available():
        view = open_page(out / "limits.html", screenshot=tmp_path / "page.png")
        assert view.ok, view.problems()


@pytest.mark.parametrize("args, words", [
    (["--friction", "-0.2"], ["friction", "> 0"]),
    (["--grade", "2.0"], ["grade 2", "stand"]),
    (["--traction-ceiling", "0"], ["traction_ceiling"]),
    (["--motor", "x"], ["--catalogue"]),
    (["--stopping-length", "0"], ["stopping length"]),
    (["--views", "front"], ["front"]),
])
def test_cli_limits_bad_input_one_line(tmp_path, capsys, args, words):
    from opspace.cli import main
    out = tmp_path / "out"
    code = main(["limits", str(DEMO), "-o", str(out), "--points", "2", "-q", *args])
    err = capsys.readouterr().err
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for w in words:
        assert w in lines[0]
    assert not (out / "limits.json").exists()


def test_cli_limits_subprocess_one_line(tmp_path):
    # the installed entry point: one line on stderr, status 2, nothing written
    res = run_cli_module("limits", str(DEMO), "-o", str(tmp_path / "o"), "--friction", "0")
    assert res.returncode == 2 and len(res.stderr.strip().splitlines()) == 1, res.stderr
    assert not (tmp_path / "o").exists()


def test_map_on_the_sweep_executor_equals_the_local_map(demo):
    # the same map computed in chunks on local worker processes (the sweep's
    # executor) is the map computed here, cell for cell
    from opspace.limits import evaluate_map_chunk
    from opspace.sweep import make_executor
    kw = dict(points=9, posture="carry", extent=((0.2, 1.0), (-0.5, 0.5)))
    here = limits_map(demo, "top", **kw)
    ex = make_executor(2, function=evaluate_map_chunk)
    try:
        there = limits_map(demo, "top", executor=ex, **kw)
    finally:
        ex.close()
    assert np.array_equal(here.status, there.status)
    for k in here.values:
        np.testing.assert_array_equal(here.values[k], there.values[k])
        assert np.array_equal(here.limited_by[k], there.limited_by[k])
