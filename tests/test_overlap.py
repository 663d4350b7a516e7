"""Motions that overlap as on the real robot: an arm move during a base segment.

Wheel torques against an independent derivation of the same robot (Kane's
method with sympy, `tests/reference/kane_diffdrive.py`: Kane & Levinson,
*Dynamics: Theory and Applications*, 1985, ch. 6), kinematics against the
minimum-jerk closed form (Flash & Hogan, J. Neuroscience 5(7), 1985).
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("sympy")

import opspace  # noqa: E402
from opspace.sizing import evaluate_cycle  # noqa: E402
from conftest import write_toml  # noqa: E402

try:  # tests/ as a package (rootdir on sys.path) or as a plain directory
    from tests.reference import kane_diffdrive as kane
except ModuleNotFoundError:
    from reference import kane_diffdrive as kane

Q0, Q1 = [0.3, 0.0, -0.4], [1.5, 0.1, 0.6]


def _kane_cycle(tmp_path, segments, sample_rate=100.0, evaluate=True, **cycle):
    """The Kane reference robot and a duty cycle of `segments` for it:
    (params, robot, CycleEvaluation), or the cycle's path without `evaluate`."""
    params = kane.random_params(20251)
    robot_path = kane.write_description(params, tmp_path)
    doc = {"cycle": {"name": "test", "robot": robot_path.name, "cycles_per_hour": 10.0,
                     "sample_rate": sample_rate, **cycle}, "segment": segments}
    path = write_toml(tmp_path / "cycle.toml", doc)
    if not evaluate:
        return path
    robot = opspace.load_robot(robot_path)
    return params, robot, evaluate_cycle(robot, opspace.load_duty_cycle(path))


def _overlap_cycle(tmp_path, offset):
    return _kane_cycle(tmp_path, [
        {"kind": "straight", "distance": 4.0, "speed": 1.0, "acceleration": 1.0},
        {"kind": "arm", "to": Q1, "duration": 2.0, "offset": offset}], arm_start=Q0)


def test_arm_swing_during_a_straight_matches_kane(tmp_path):
    # The base cruises at 1 m/s from t = 1 s to 4 s; the arm swings from
    # t = 1.2 s to 3.2 s, inside the straight (one segment, not after it).
    params, robot, ev = _overlap_cycle(tmp_path, 1.2)
    assert ev.duration == pytest.approx(5.0, abs=1e-9)       # 1 + 3 + 1 s, not 7 s
    during = (ev.t > 1.2 + 1e-9) & (ev.t < 3.2 - 1e-9)
    assert during.sum() > 150 and np.all(ev.segment == 0)
    np.testing.assert_allclose(ev.v[during], 1.0, atol=1e-12)
    np.testing.assert_allclose(ev.a[during], 0.0, atol=1e-12)
    # minimum jerk: peak joint speed 15 Δq / (8 T) at mid-move (t = 2.2 s)
    k = int(np.argmin(np.abs(ev.t - 2.2)))
    np.testing.assert_allclose(ev.nu[k, 2:], 15 * (np.array(Q1) - Q0) / 16, rtol=1e-9)
    checked = 0
    for k in np.flatnonzero(during)[::20]:
        q_arm = robot.arm_positions(ev.qs[k])
        M, c, g = kane.reference_terms(params, 0.0, q_arm, ev.nu[k])
        Q_ref = M @ ev.nu_dot[k] + c + g
        scale = max(1.0, float(np.abs(Q_ref).max()))
        np.testing.assert_allclose(ev.Q[k], Q_ref, rtol=1e-9, atol=1e-9 * scale)
        checked += 1
    assert checked >= 8
    # the arm's swing shows in the wheel torques (the check is not of a still arm)
    still = opspace.inverse_dynamics(robot, ev.qs[k], np.r_[ev.nu[k, :2], 0, 0, 0],
                                     np.zeros(5))
    assert np.abs(ev.Q[k, :2] - still[:2]).max() > 1e-3


def test_offset_needs_a_base_segment_before(tmp_path):
    path = _kane_cycle(tmp_path, [{"kind": "arm", "to": Q1, "duration": 2.0, "offset": 0.5}],
                       evaluate=False)
    with pytest.raises(opspace.ConfigError, match=r"segment\]\] 1 \(arm\) offset"):
        opspace.load_duty_cycle(path)


# ------------------------------------------------------------------ blended segments

def test_blended_straights_keep_the_speed(tmp_path):
    # Kinematics by hand (trapezoid, Biagiotti & Melchiorri 2008, sec. 3.2):
    # flat straight 3 m at 1 m/s, 0.5 m/s², blending onto a 5 % ramp of 2 m at
    # 1 m/s: 2 s up to speed (1 m), 2 s cruise; then 1 s cruise, 2 s braking
    # (1 m): 7 s in all, at 1 m/s across the join (9 s with a stop between).
    _, _, ev = _kane_cycle(tmp_path, [
        {"kind": "straight", "distance": 3.0, "speed": 1.0, "acceleration": 0.5},
        {"kind": "straight", "distance": 2.0, "speed": 1.0, "acceleration": 0.5, "grade": 0.05,
         "blend": True}])
    assert ev.duration == pytest.approx(7.0, abs=1e-9)
    k = int(np.argmin(np.abs(ev.t - 4.0)))
    assert ev.segment[k] == 1 and ev.segment[k - 1] == 0
    np.testing.assert_allclose(ev.v[k - 5:k + 5], 1.0, atol=1e-12)    # through the join
    assert np.max(np.abs(np.diff(ev.v))) <= 0.5 * 0.01 + 1e-12         # |Δv| <= a dt
    assert ev.grade[k - 1] == 0.0 and ev.grade[k] == 0.05


def test_blend_needs_a_moving_segment_before(tmp_path):
    path = _kane_cycle(tmp_path, [
        {"kind": "turn", "angle": 1.0, "rate": 1.0, "acceleration": 1.0},
        {"kind": "straight", "distance": 1.0, "speed": 0.5, "acceleration": 0.5, "blend": True}],
        evaluate=False)
    with pytest.raises(opspace.ConfigError, match=r"segment\]\] 2 \(straight\) blend.*a turn"):
        opspace.load_duty_cycle(path)


# ------------------------------------------------------------------ cross-slope

def test_cross_slope_statics(tmp_path):
    # Parked across a slope (left side up, rise/run c) and on a ramp: on the
    # ground axes the vertical has the components (sin α, sin β,
    # √(1 − sin²α − sin²β)), α = atan(grade), β = atan(c), and statics (Newton)
    # give the ground force m g times that.  The wheel torques follow from
    # virtual work (Goldstein, Classical Mechanics, 3rd ed. 2002, sec. 1.4):
    # rolling straight, (Q_r + Q_l)/r = m g sin α; yawing about the pivot, the
    # COM (x_c, y_c) moves by δψ (−y_c, x_c), so
    # (Q_r − Q_l) b / r = −m g (sin α y_c − sin β x_c).
    _, robot, ev = _kane_cycle(tmp_path, [
        {"kind": "dwell", "duration": 1.0, "cross_grade": 0.1},
        {"kind": "dwell", "duration": 1.0, "cross_grade": -0.2, "grade": 0.3}], sample_rate=50.0)
    m, g = robot.total_mass(), 9.80665
    for seg, (a, c) in enumerate(((0.0, 0.1), (0.3, -0.2))):
        sa, sb = np.sin(np.arctan(a)), np.sin(np.arctan(c))
        k = np.flatnonzero(ev.segment == seg)[1]
        expected = m * g * np.array([sa, sb, np.sqrt(1 - sa**2 - sb**2)])
        np.testing.assert_allclose(ev.stability.wrench.force[k], expected, rtol=1e-9)
        x_c, y_c = robot.com(ev.qs[k])[:2]
        r, b = robot.wheel_radius, robot.half_track
        total = m * g * sa * r
        diff = -(r / b) * m * g * (sa * y_c - sb * x_c)
        np.testing.assert_allclose(ev.Q[k, :2], [(total + diff) / 2, (total - diff) / 2],
                                   rtol=1e-9, atol=1e-12)
        assert ev.cross_grade[k] == c
    assert robot.cross_slope == 0.0 and robot.slope == 0.0          # restored
