"""Duty-cycle evaluation: wheel torques and tyre forces against closed forms,
and bad duty-cycle input."""

from __future__ import annotations

import math

import numpy as np
import pytest

import opspace
from opspace.description import load_duty_cycle
from opspace.sizing import evaluate_cycle
from conftest import base_doc, make_robot, two_link_urdf, write_toml

G = opspace.GRAVITY


def duty(tmp_path, segments, name="cycle.toml", **cycle):
    doc = {"cycle": {"name": "test", "robot": "robot.toml", "cycles_per_hour": 10.0,
                     "sample_rate": 500.0, **cycle},
           "segment": segments}
    return write_toml(tmp_path / name, doc)


@pytest.mark.parametrize("grade", [0.0, 0.08, -0.05])
def test_ramp_constant_speed_wheel_torque(tmp_path, grade):
    # Constant speed on a ramp: each wheel carries m g (sin θ + C_rr cos θ) r / 2
    # (common practice, no source), θ = atan(grade).
    doc = base_doc(base__rolling_resistance=0.02, base__com=[-0.05, 0.0, 0.2])
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    path = duty(tmp_path, [{"kind": "straight", "distance": 3.0, "speed": 1.0,
                            "acceleration": 1.0, "grade": grade}])
    ev = evaluate_cycle(robot, load_duty_cycle(path, robot=robot))
    cruise = (np.abs(ev.a) < 1e-12) & (np.abs(ev.v - 1.0) < 1e-12)
    assert cruise.sum() > 100
    th = math.atan(grade)
    m, r = robot.total_mass(), 0.1
    expected = m * G * (math.sin(th) + 0.02 * math.cos(th)) * r / 2
    np.testing.assert_allclose(ev.Q[cruise, :2], expected, rtol=1e-9)


def test_acceleration_torque_from_wheel_mass_matrix(tmp_path):
    # Straight run, arm still: Q_wheels = M_w φ̈ with φ̈_r = φ̈_l = a / r (the 2x2
    # wheel block, see DriveInertia: fact of the trade) plus rolling resistance
    # C_rr m g r / 2 per wheel (common practice).
    doc = base_doc(base__rolling_resistance=0.015, base__com=[-0.05, 0.0, 0.2])
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    path = duty(tmp_path, [{"kind": "straight", "distance": 2.0, "speed": 1.0, "acceleration": 0.7}])
    ev = evaluate_cycle(robot, load_duty_cycle(path, robot=robot))
    acc = (np.abs(ev.a - 0.7) < 1e-12) & (ev.v > 0)  # rolling resistance is 0 at rest
    Mw = opspace.drive_inertia(robot, robot.configuration()).M_w
    expected = Mw @ np.array([7.0, 7.0]) + 0.015 * robot.total_mass() * G * 0.1 / 2
    np.testing.assert_allclose(ev.Q[acc, :2], np.tile(expected, (acc.sum(), 1)), rtol=1e-9)


def test_tyre_forces_balance_the_ground_wrench(tmp_path):
    # Newton: with no caster resistance the drive tyres carry all of the ground's
    # longitudinal force, Σ F_x = f_x of the ground wrench (= m c̈_x).
    doc = base_doc(drive__coulomb=0.3, drive__viscous=0.01)
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    path = duty(tmp_path, [{"kind": "arc", "radius": 1.0, "angle": 1.0, "speed": 0.8,
                            "acceleration": 0.9},
                           {"kind": "turn", "angle": -1.0, "rate": 1.0, "acceleration": 2.0}])
    ev = evaluate_cycle(robot, load_duty_cycle(path, robot=robot))
    np.testing.assert_allclose(ev.wheel_force.sum(axis=1), ev.stability.wrench.force[:, 0],
                               rtol=1e-9, atol=1e-9)


def test_demo_cycle_restores_robot_state(demo):
    d = load_duty_cycle(demo.description.path.parent / "shift.toml", robot=demo)
    m0 = demo.total_mass()
    ev = evaluate_cycle(demo, d)
    assert demo.total_mass() == m0 and demo.slope == 0.0 and demo.payload is None
    assert np.all(np.isfinite(ev.Q)) and ev.stability.loads.supported.all()
    assert ev.payload.any() and (ev.grade != 0).any()


def test_segment_exceeding_speed_limit(tmp_path):
    robot = make_robot(tmp_path, two_link_urdf(), base_doc(base__top_speed=1.0))
    path = duty(tmp_path, [{"kind": "straight", "distance": 3.0, "speed": 1.4, "acceleration": 1.0}])
    with pytest.raises(opspace.ConfigError,
                       match=r"cycle\.toml: \[\[segment\]\] 1 \(straight\) speed = 1\.4 m/s exceeds the base's top_speed 1 m/s"):
        load_duty_cycle(path, robot=robot)


def test_turn_rate_exceeding_speed_limit(tmp_path):
    robot = make_robot(tmp_path, two_link_urdf(), base_doc(base__top_speed=0.5))
    path = duty(tmp_path, [{"kind": "turn", "angle": 3.0, "rate": 3.0, "acceleration": 1.0}])
    with pytest.raises(opspace.ConfigError, match=r"\[\[segment\]\] 1 \(turn\) rate = 3 rad/s drives the wheels"):
        load_duty_cycle(path, robot=robot)


def test_empty_cycle(tmp_path):
    path = write_toml(tmp_path / "cycle.toml", {"cycle": {"robot": "robot.toml", "cycles_per_hour": 3.0}})
    with pytest.raises(opspace.ConfigError, match=r"cycle\.toml: the cycle has no \[\[segment\]\]"):
        load_duty_cycle(path)


@pytest.mark.parametrize("segment,pattern", [
    ({"kind": "jump"}, r"\[\[segment\]\] 1 kind must be one of straight, arc, turn, stop, arm, dwell, got 'jump'"),
    ({"kind": "straight", "distance": 0.0, "speed": 1.0, "acceleration": 1.0},
     r"\[segment 1 \(straight\)\] distance must not be 0 m"),
    ({"kind": "dwell", "duration": -2.0}, r"\[segment 1 \(dwell\)\] duration must be > 0 s, got -2"),
    ({"kind": "straight", "distance": 1.0, "speed": 1.0, "acceleration": 1.0, "sped": 2.0},
     r"\[segment 1 \(straight\)\] sped is not a known key \(valid keys: acceleration"),
    ({"kind": "arc", "radius": 1.0, "angle": 1.0, "speed": 1.0, "acceleration": 1.0, "grade": 0.1},
     r"\[segment 1 \(arc\)\] grade is not a known key"),
    ({"kind": "arm", "to": "nowhere", "duration": 1.0}, r"\[\[segment\]\] 1 \(arm\) to names the pose 'nowhere'"),
])
def test_bad_segments(tmp_path, segment, pattern):
    robot = make_robot(tmp_path, two_link_urdf())
    with pytest.raises(opspace.ConfigError, match=r"cycle\.toml: " + pattern):
        load_duty_cycle(duty(tmp_path, [segment]), robot=robot)
