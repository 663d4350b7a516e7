"""A finished run that was not fine says so: tip-over, slip, a joint stop, an
unstable loop (zero damping) -- status, time, exit code; and the headline figures
of a scenario do not depend on the loop or on halving the step."""

from __future__ import annotations

import json

import pytest

from opspace.description import load_scenario
from opspace.simulation import ScenarioRun, compare_runs
from conftest import DEMO, with_overrides, write_toml


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """The demo robot, and a top-heavy variant on a narrow stance and a grippy floor
    (it tips before it slips)."""
    tmp = tmp_path_factory.mktemp("status")
    text = DEMO.read_text().replace('arm_urdf = "arm.urdf"',
                                    f'arm_urdf = "{DEMO.with_name("arm.urdf").as_posix()}"')
    (tmp / "robot.toml").write_text(text)
    tall = (text.replace("friction = 0.7 ", "friction = 3.0 ")
            .replace("[0.30, ", "[0.10, ").replace("[-0.30, ", "[-0.10, ")
            .replace("com = [-0.0514, 0.0, 0.16]", "com = [-0.0514, 0.0, 0.45]"))
    assert tall.count("[0.10, ") == 2 and "0.45]" in tall
    (tmp / "tall.toml").write_text(tall)
    return tmp


def scenario(folder, name, **overrides):
    doc = {"simulation": {"name": name, "robot": "robot.toml", "duration": 2.0,
                          "arm_start": "carry"},
           "controller": {"posture": "carry", "posture_stiffness": 100.0},
           "base": [{"kind": "straight", "distance": 1.0, "speed": 0.5, "acceleration": 0.5}],
           "waypoint": [{"t": 2.0, "position": [1.5, 0.0, 0.8]}]}
    return write_toml(folder / f"{name}.toml", with_overrides(doc, overrides))


def run(path):
    return ScenarioRun(load_scenario(path)).run()


def first(result, kind):
    return next(f for f in result.extra["findings"] if f["kind"] == kind)


def test_tip_over(folder):
    # 4 m/s² on a stance of ±0.10 m with the chassis' COM 0.45 m up: the ZMP moves
    # a h / g ≈ 0.2 m behind the COM (d'Alembert, by hand), past the rear casters
    path = scenario(folder, "tip", simulation__robot="tall.toml",
                    base=[{"kind": "straight", "distance": 1.5, "speed": 1.2,
                           "acceleration": 4.0, "deceleration": 4.0}],
                    waypoint=[{"t": 2.0, "position": [2.0, 0.0, 0.8]}])
    res = run(path)
    assert res.status == "tip_over"
    assert res.message.startswith("tip-over at t = 0.000 s: the ZMP left the support polygon")
    assert first(res, "tip_over")["time"] == 0.0


def test_slip(folder):
    # 5 m/s² asks the drive wheels for more than μ N (μ = 0.7): traction use > 1
    path = scenario(folder, "slip", base=[{"kind": "straight", "distance": 2.0, "speed": 1.4,
                                           "acceleration": 5.0, "deceleration": 5.0}],
                    waypoint=[{"t": 2.0, "position": [2.4, 0.0, 0.8]}])
    res = run(path)
    assert res.status == "slip"
    assert "slip at t = 0.000 s: wheel_" in res.message and "it would slip" in res.message


def test_joint_limit(folder):
    # a tool target low and close: the elbow folds into its upper stop (2.5 rad)
    path = scenario(folder, "limit", simulation__duration=3.0,
                    waypoint=[{"t": 2.5, "position": [1.2, 0.0, 0.30]}])
    res = run(path)
    assert res.status == "joint_limit"
    f = first(res, "joint_limit")
    assert f["cause"] == "elbow reached its upper position limit 2.5 rad (hard stop)"
    assert 1.0 < f["time"] < 2.0
    # the stop held it: never past the limit by more than a step's travel
    assert res.q[:, 9].max() <= 2.5 + 2.5e-3


def test_zero_damping_through_the_cli(folder, tmp_path, capsys):
    # the case: zero damping was accepted and the run "completed" with a
    # negative margin; now the loop's swing ends on a stop: status, time, exit 1
    from opspace.cli import main
    path = scenario(folder, "undamped", simulation__duration=3.0,
                    controller__damping_ratio=0.0)
    out = tmp_path / "out"
    code = main(["simulate", str(path), "-o", str(out), "--no-animation", "-q"])
    text = capsys.readouterr().out
    assert code == 1
    assert "undamped: JOINT-LIMIT" in text
    assert "joint-limit at t = 2.1" in text and "elbow reached its upper position limit" in text
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "joint_limit" and summary["findings"][0]["kind"] == "joint_limit"


def test_a_second_scenario_agrees_across_loops_and_steps(folder, tmp_path, capsys):
    # whole-body mode, a pick with a load transfer, a turn: the compiled and NumPy
    # loops agree (1 % on every headline figure; here to round-off) and so do RK4
    # at the scenario's step and at half of it (the step check, 1 %)
    path = scenario(folder, "second", simulation__duration=3.0,
                    controller__mode="whole_body",
                    base=[{"kind": "dwell", "duration": 1.6},
                          {"kind": "turn", "angle": 0.5, "rate": 0.5, "acceleration": 1.0}],
                    waypoint=[{"t": 1.2, "position": [0.90, 0.05, 0.72], "stop": True},
                              {"t": 1.6, "position": [0.90, 0.05, 0.72]},
                              {"t": 2.8, "position": [0.80, 0.35, 0.85]}],
                    payload={"mass": 2.0, "position": [0.90, 0.05, 0.72], "pick": 1.4,
                             "load_transfer": 0.15})
    sc = load_scenario(path)
    a = ScenarioRun(sc, compiled=True).run()
    b = ScenarioRun(sc, compiled=False).run()
    assert a.status == "completed", a.message
    loops = compare_runs(a, b)
    assert loops.passed and loops.worst[4] < 1e-6, loops.worst
    assert a.summary()["pick_relative_speed"]["speed"]["value"] < 0.05
    # the step check as the command runs it: RK4 at 1 ms and 0.5 ms within 1 %
    from opspace.cli import main
    out = tmp_path / "out"
    assert main(["simulate", str(path), "-o", str(out), "--no-animation", "-q",
                 "--step-check"]) == 0
    assert "step check PASSED" in capsys.readouterr().out
    check = json.loads((out / "summary.json").read_text())["step_check"]
    assert check["passed"] and len(check["rows"]) > 20


def test_friction_switches_agree(folder):
    # the plant's friction off switches the controller's feed-forward off too,
    # unless the file says otherwise; the summary says which of the two ran
    off = load_scenario(scenario(folder, "off", simulation__friction=False))
    assert off.controller["friction_feedforward"] is False
    kept = load_scenario(scenario(folder, "kept", simulation__friction=False,
                                  controller__friction_feedforward=True))
    assert kept.controller["friction_feedforward"] is True
    on = load_scenario(scenario(folder, "on"))
    assert on.controller["friction_feedforward"] is True
    res = ScenarioRun(off).run(stability=False)
    s = res.summary()
    assert (s["plant_friction"], s["friction_feedforward"]) == (False, False)
    assert res.status == "completed"
