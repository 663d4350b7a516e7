"""Bad load-model input and robots that cannot stand: `opspace check` prints one
line naming file, key, value and expectation, and exits 2."""

from __future__ import annotations

import pytest

from opspace.cli import main
from conftest import base_doc, two_link_urdf, write_toml

SPRUNG = {"model": "sprung", "preload": 60.0, "spring_rate": 3.0e4, "travel": 0.012}


def _check(tmp_path, capsys, doc):
    (tmp_path / "arm.urdf").write_text(two_link_urdf())
    path = write_toml(tmp_path / "robot.toml", doc)
    code = main(["check", str(path)])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("overrides,pattern", [
    ({"support": {"model": "stiffness", "stiffness": -2.0e5}},
     "robot.toml: [support] stiffness must be > 0 N/m, got -200000"),
    ({"support": {"model": "stiffness"}, "caster": [{"position": [0.3, 0.0], "stiffness": -5.0},
                                                   {"position": [-0.3, 0.0]}]},
     "robot.toml: [caster 1] stiffness must be > 0 N/m, got -5"),
    ({"support": {**SPRUNG, "preload": 5000.0}},
     "robot.toml: [support] preload must be below the robot's weight"),
    ({"support": {**SPRUNG, "travel": 0.0}}, "robot.toml: [support] travel must be > 0 m, got 0"),
    ({"support": {**SPRUNG, "travel": -0.01}}, "robot.toml: [support] travel must be > 0 m"),
    ({"rocker": [{"casters": ["caster_1", "caster_9"], "pivot": [0.0, 0.0]}]},
     "robot.toml: [[rocker]] 1 casters names 'caster_9', which is not a caster of this robot "
     "(casters: caster_1, caster_2)"),
    ({"rocker": [{"casters": ["caster_1", "caster_2"], "pivot": [0.0, 0.3]}]},
     "robot.toml: [[rocker]] 1 pivot must lie on the segment between caster_1"),
    ({"support": {"unevenness": -0.001}}, "robot.toml: [support] unevenness must be >= 0 m, got -0.001"),
    ({"ground": {"friction": 0.6, "friction_range": [0.8, 0.4]}},
     "robot.toml: [ground] friction_range must be [low, high] with 0 < low <= high, got [0.8, 0.4]"),
    ({"ground": {"friction": 0.9, "friction_range": [0.4, 0.8]}},
     "robot.toml: [ground] friction_range must contain the nominal friction 0.9"),
    ({"support": {"model": "springy"}}, "robot.toml: [support] model must be one of 'equal', "
                                        "'stiffness', 'sprung', got 'springy'"),
    ({"support": {"preload": 50.0}}, "robot.toml: [support] preload needs model"),
])
def test_bad_load_model_one_line_exit_2(tmp_path, capsys, overrides, pattern):
    doc = base_doc()
    doc.update(overrides)
    code, out, err = _check(tmp_path, capsys, doc)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and pattern in err, err


def test_no_passive_contact_is_out_of_scope(tmp_path, capsys):
    doc = base_doc()
    del doc["caster"]
    code, out, err = _check(tmp_path, capsys, doc)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "robot.toml: no [[caster]]: two drive wheels and no passive contact" in err
    assert "self-balancing" in err


def test_com_outside_support_names_each_pose(tmp_path, capsys):
    # one caster ahead at x = 0.3 with the arm's own limits: the tricycle
    # (0, ±0.25), (0.3, 0); the chassis COM at x = 0.03 stands, an arm
    # stretched back (shoulder at π, reaching x < 0) does not.
    doc = base_doc(base__com=[0.03, 0.0, 0.2], caster=[{"position": [0.3, 0.0]}],
                   mount__xyz=[0.0, 0.0, 0.4],
                   poses={"back": [3.0, 0.0], "front": [0.0, 0.0], "back_down": [-3.0, 0.0]})
    code, out, err = _check(tmp_path, capsys, doc)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "the centre of mass lies outside the support polygon at" in err
    assert "[poses] back (" in err and "[poses] back_down (" in err
    assert "front" not in err and "neutral" not in err


def test_neutral_pose_outside_support(tmp_path, capsys):
    doc = base_doc(base__com=[-0.2, 0.0, 0.2], caster=[{"position": [0.3, 0.0]}])
    code, _, err = _check(tmp_path, capsys, doc)
    assert code == 2 and "neutral pose (arm at zero) (COM at x = -" in err


def test_check_names_the_load_model(tmp_path, capsys):
    doc = base_doc(support=SPRUNG, ground={"friction": 0.6, "friction_range": [0.35, 0.7]})
    code, out, _ = _check(tmp_path, capsys, doc)
    assert code == 0
    assert "load model: rigid chassis; sprung drive wheels" in out
    assert "friction 0.35 to 0.7 (nominal 0.6)" in out


def test_drive_wheel_lift_off_gives_a_complete_failing_report(tmp_path, capsys):
    """Drive wheels outside the casters' track and the COM far to the left: the
    plane of equal-stiffness loads, N_i = α + β x_i + γ y_i, unloads the right
    wheel (by hand, with the contacts (0, ±0.25), (±0.3, ±0.1) and the COM at
    y_p: N_r = W/6 − 0.25 W y_p / 0.165 < 0 for y_p > 0.11 m, while the robot
    still stands on the others).  `opspace size` writes the whole report, names
    the lift-off with its instant everywhere, and exits 1."""
    import json
    import math

    doc = base_doc(base__com=[0.0, 0.17, 0.2],
                   caster=[{"position": [x, y]} for x in (0.3, -0.3) for y in (0.1, -0.1)])
    (tmp_path / "arm.urdf").write_text(two_link_urdf())
    write_toml(tmp_path / "robot.toml", doc)
    cycle = write_toml(tmp_path / "cycle.toml", {
        "cycle": {"name": "lift", "robot": "robot.toml", "cycles_per_hour": 10.0,
                  "sample_rate": 50.0},
        "segment": [{"kind": "straight", "distance": 1.0, "speed": 0.6, "acceleration": 0.8}]})
    out = tmp_path / "out"
    code = main(["size", str(cycle), "-o", str(out), "-q"])
    text, err = capsys.readouterr()
    assert code == 1 and err == ""
    assert "lift-off: the right wheel lifts off at t = 0.00 s" in text
    summary_text = (out / "summary.json").read_text()
    summary = json.loads(summary_text, parse_constant=lambda c: pytest.fail(f"JSON holds {c}"))
    spans = summary["stability"]["lift_off"]
    assert spans[0]["contact"] == "wheel_right" and spans[0]["start"]["value"] == 0.0
    assert summary["wheels"]["peak_traction_use"]["right_wheel"] == \
        {"value": None, "unit": "1", "bound": "+inf"}
    csv = (out / "timeseries.csv").read_text().splitlines()
    col = csv[0].split(",").index("right traction use")
    assert all(row.split(",")[col] == "lift-off" for row in csv[1:])
    assert all(math.isfinite(float(v)) for v in csv[1].split(",")[:col])
    html = (out / "report.html").read_text()
    assert "Lift-off: wheel_right lifts off at t = 0.00 s" in html
    assert "traction" in html and "FAIL" in html
