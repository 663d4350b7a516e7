"""The demo sizing report end to end: files, units, embedded figures, verdicts."""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest

try:
    import tomllib
except ImportError:                  # Python 3.10
    import tomli as tomllib

import opspace
from opspace.report import write_sizing_report
from conftest import DEMO, run_cli_module

CYCLE = DEMO.with_name("shift.toml")


@pytest.fixture(scope="module")
def demo_result():
    return opspace.size(CYCLE)


@pytest.fixture(scope="module")
def demo_report(demo_result, tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    return write_sizing_report(demo_result, out)


def leaves(obj, path=""):
    """(path, value) of every number in a JSON document, with its parent dict."""
    if isinstance(obj, dict):
        for k, v in obj.items():
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                yield f"{path}.{k}", v, obj
            else:
                yield from leaves(v, f"{path}.{k}")
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                yield f"{path}[{i}]", v, None
            else:
                yield from leaves(v, f"{path}[{i}]")


def test_summary_figures_finite_with_units(demo_report):
    doc = json.loads(demo_report["summary"].read_text())
    count = 0
    for where, value, parent in leaves(doc):
        count += 1
        assert math.isfinite(value), where
        # a number stands only as {"value": ..., "unit": ...} (lists of numbers inside
        # "value" count too: their parent is the list)
        if parent is not None:
            assert "unit" in parent and where.endswith(".value"), f"{where} has no unit"
    assert count > 200
    assert doc["status"] in ("pass", "fail")
    assert doc["cautions"] and any("safety standards" in c for c in doc["cautions"])
    # the recommended drive's masses per wheel, as the catalogue file gives them
    rec = doc["recommended"]
    cat = tomllib.loads(DEMO.with_name("drives.toml").read_text())
    motor = next(m for m in cat["motor"] if m["name"] == rec["motor"])
    gear = next(g for g in cat["gearbox"] if g["name"] == rec["gearbox"])
    assert rec["motor_mass"] == {"value": motor["mass"], "unit": "kg"}
    assert rec["gearbox_mass"] == {"value": gear["mass"], "unit": "kg"}
    assert rec["drive_mass"]["value"] == pytest.approx(motor["mass"] + gear["mass"])


def test_html_is_self_contained(demo_report):
    html = demo_report["report"].read_text()
    images = re.findall(r'<img[^>]*src="([^"]+)"', html)
    assert len(images) >= 6
    assert all(src.startswith("data:image/png;base64,") for src in images)
    # the 3-D view's three.js names the XHTML namespace (an identifier, not a request)
    text = html.replace("http://www.w3.org/1999/xhtml", "")
    assert "http://" not in text and "https://" not in text
    for needle in ("Verdict per candidate", "Torque-speed plane", "Support polygon",
                   "Worst case of the arm", "Assumptions", "Verify", "safety standards"):
        assert needle in html


def test_csv_has_one_row_per_sample(demo_report, demo_result):
    lines = demo_report["timeseries"].read_text().splitlines()
    assert len(lines) == len(demo_result.evaluation.t) + 1
    assert lines[0].startswith("t [s],segment")


def test_too_small_candidate_fails_on_torque(demo_result):
    # The demo's smallest motor cannot carry the cycle at any ratio of either
    # family: its peak torque (after the service factor) is below what the cycle
    # needs: T_m >= s |τ_out| / (G η) at constant speed, far over 0.12 N·m.
    sweeps = [s for s in demo_result.sweeps if s.motor == "M-20"]
    assert sweeps
    for s in sweeps:
        assert s.passing_ratios == ()
        for c in s.checks:
            assert not c.passed
            assert "peak torque" in c.failed or "speed" in c.failed
    # and the verdict names a candidate that is not the smallest motor; the status
    # fails exactly when a robot-level row fails (no drive fixes those)
    robot_fails = any(not c.passed for c in demo_result.robot_criteria)
    assert demo_result.status == ("fail" if robot_fails else "pass")
    assert demo_result.recommended[1].motor != "M-20"


def test_demo_recommendation_passes_each_held_pose(demo_result, tmp_path):
    # The envelope check run literally on the demo (see test_envelope.py).
    from test_envelope import assert_recommended_passes_every_held_pose
    assert demo_result.basis == "envelope"
    assert_recommended_passes_every_held_pose(demo_result, tmp_path, CYCLE)


def test_worst_case_search_beats_the_grid_and_the_cycle(demo_result):
    # The refinement can only improve on its best grid point, and a held worst
    # pose asks at least as much of the wheels as the cycle's own poses do.
    wt, wm = demo_result.worst_torque, demo_result.worst_tip
    assert wt.value >= wt.grid_value - 1e-12
    assert wm.value <= wm.grid_value + 1e-12
    r = demo_result.robot
    assert np.all(wt.q >= r.lower - 1e-9) and np.all(wt.q <= r.upper + 1e-9)
    assert demo_result.stop.deceleration > 0 and demo_result.stop.limited_by in ("tip-over", "traction")


def test_cli_size_bad_catalogue_exits_2(tmp_path):
    bad = tmp_path / "drives.toml"
    bad.write_text('[catalogue]\nname = "x"\n[[motor]]\nname = "A"\nrated_torque = 1.0\n')
    res = run_cli_module("size", str(CYCLE), "--catalogue", str(bad), "-o", str(tmp_path / "out"))
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "drives.toml" in lines[0] and "peak_torque" in lines[0]
    assert not (tmp_path / "out").exists()


def test_example_runs_quick(tmp_path):
    import runpy
    from conftest import REPO
    mod = runpy.run_path(str(REPO / "examples" / "size_base_motors.py"))
    result = mod["main"](["--quick", "-o", str(tmp_path)])
    assert (tmp_path / "report.html").is_file() and result.worst_torque is None


def test_report_page_in_headless_chromium(demo_report, tmp_path):
    # The page loads from its one file in a real browser: no network request, no
    # console or page error; its visible text shows no "inf", "nan", a unit "1"
    # or a margin rounded to "-0%".
    from browser import open_page, require_browser
    require_browser()
    view = open_page(demo_report["report"], screenshot=tmp_path / "report.png",
                     evaluate="document.body.innerText")
    assert view.ok, view.problems()
    text = view.evaluated
    assert "Verdict basis" in text
    from browser import visible_text_problems
    assert not visible_text_problems(text)


def test_page_draws_its_3d_view_offline(demo_report, tmp_path):
    # headless Chromium: the scene is ready, no console error, no network request,
    # and the robot covers part of the canvas (tests/browser.py)
    from browser import open_view3d, require_browser

    require_browser()
    view = open_view3d(demo_report["report"], screenshot=tmp_path / "report.png")
    assert view.ok, view.problems()
    assert view.evaluated["frames"] == 4     # three worst-case poses, the least-margin instant
    assert view.evaluated["drawn"] > 0.01 and view.evaluated["empty"] < 1e-3, view.evaluated
