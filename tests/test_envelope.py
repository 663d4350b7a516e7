"""The envelope verdict, the physical worst-case search and the arm-limit rows,
on robots invented here (never the demo's numbers as check values)."""

from __future__ import annotations

import math

import numpy as np
import pytest

try:
    import tomllib
except ImportError:                  # Python 3.10
    import tomli as tomllib

import opspace
from opspace.sizing import Instant, arm_geometry, clearance, robot_level, worst_poses
from conftest import base_doc, make_robot, urdf, urdf_joint, urdf_link, with_overrides, write_toml

G0 = 9.80665


def planar_arm(m1=4.0, m2=4.0, l1=0.5, lc1=0.25, lc2=0.2, lim1=(-1.3, 0.8), lim2=(-0.9, 1.7),
               velocity=3.0):
    """Two pitch joints in the x-z plane (axes −y: a positive angle lifts the
    link from the horizontal), limits chosen so that a coarse grid misses 0."""
    inert = (0.02, 0.02, 0.02, 0, 0, 0)
    j1 = urdf_joint("shoulder", "revolute", "root", "link1", axis=(0, -1, 0),
                    lower=lim1[0], upper=lim1[1])
    j2 = urdf_joint("elbow", "revolute", "link1", "link2", xyz=(l1, 0, 0), axis=(0, -1, 0),
                    lower=lim2[0], upper=lim2[1])
    text = urdf(urdf_link("root"), j1, urdf_link("link1", m1, (lc1, 0, 0), inert), j2,
                urdf_link("link2", m2, (lc2, 0, 0), inert),
                urdf_joint("tool_joint", "fixed", "link2", "tool", xyz=(0.4, 0, 0)),
                urdf_link("tool"))
    return text.replace('velocity="3"', f'velocity="{velocity}"')


def rect_robot_doc(**overrides):
    """A light chassis on a rectangle of supports x ∈ [−0.35, 0.35],
    y ∈ [−0.25, 0.25] (drive wheels on the side edges at x = 0)."""
    doc = base_doc(base__mass=5.0, base__com=[0.0, 0.0, 0.2], base__half_track=0.25,
                   caster=[{"position": [x, y]} for x in (0.35, -0.35) for y in (0.25, -0.25)])
    return with_overrides(doc, overrides)


# ------------------------------------------------------------------ the global refinement

def test_refinement_finds_the_static_worst_pose_between_grid_points(tmp_path):
    # Closed form (statics; e.g. Siciliano & Khatib (eds.), Springer Handbook of
    # Robotics, 2016, ch. on legged/wheeled stability: at rest the ZMP is the
    # COM's ground projection): with the robot at rest the tip-over margin is
    # the distance of the COM projection to the nearest support edge.  The
    # lateral distance is fixed (0.25 m, COM on y = 0); the front distance
    # 0.35 − x_G(q) is smaller and least where the arm's COM reaches farthest
    # forward, x_arm = m1 lc1 cos q1 + m2 (l1 cos q1 + lc2 cos(q1 + q2)),
    # i.e. at q1 = q2 = 0 (both inside the limits).  The 4 × 4 grid over
    # [−1.3, 0.8] × [−0.9, 1.7] has no node at 0.
    robot = make_robot(tmp_path, planar_arm(), rect_robot_doc())
    rest = [Instant(0.0, 0.0, 0.0, 0.0, 0.0, False, 0.0)]
    _, tip, _ = worst_poses(robot, rest)
    np.testing.assert_allclose(tip.q, [0.0, 0.0], atol=1e-3)
    x_G = robot.com(robot.configurations(np.zeros((1, 2)))[0])[0]
    np.testing.assert_allclose(tip.value, 0.35 - x_G, atol=1e-7)
    assert tip.grid_value > tip.value + 1e-4          # the grid missed it; the search did not
    # the arm's tip below the floor is not a pose: the grid's lowest shoulder
    # angle (−1.3 rad, tool 0.4 − 0.9 sin 1.3 < 0 m) is among those left out
    assert tip.excluded > 0


def test_clearance_excludes_floor_and_chassis(tmp_path):
    # Geometry by hand: mount at (0.1, 0, 0.4); link 2's origin 0.5 m along link
    # 1, the tool 0.4 m beyond it.
    doc = rect_robot_doc(base__footprint=[-0.35, 0.35, -0.25, 0.25, 0.3])
    robot = make_robot(tmp_path, planar_arm(lim1=(-3.0, 3.0), lim2=(-3.0, 3.0)), doc)
    poses = np.array([[0.0, 0.0],            # horizontal: clear
                      [-1.2, 0.0],           # tool at z = 0.4 − 0.9 sin 1.2 = −0.44: floor
                      [-math.pi / 2, 0.0],   # straight down: tool at z = −0.5
                      [-0.5, -2.0]])         # folded back under the mount: into the chassis
    depth = clearance(robot, poses)
    assert depth[0] == 0.0
    np.testing.assert_allclose(depth[1], 0.9 * math.sin(1.2) - 0.4, atol=1e-9)
    np.testing.assert_allclose(depth[2], 0.5, atol=1e-9)
    assert depth[3] > 0.0


# ------------------------------------------------------------------ arm limit rows

def _cycle(tmp_path, segments, **cycle):
    doc = {"cycle": {"name": "t", "robot": "robot.toml", "cycles_per_hour": 10.0,
                     "sample_rate": 200.0, **cycle}, "segment": segments}
    return write_toml(tmp_path / "cycle.toml", doc)


def test_velocity_limit_row_fails_with_the_right_margin(tmp_path):
    # Minimum-jerk move of Δ over T peaks at 15 Δ / (8 T) (Flash & Hogan, J.
    # Neuroscience 5(7), 1985): Δ = 1.6 rad, T = 1 s -> 3.0 rad/s against a 2.4
    # rad/s URDF limit: margin 1 − 3.0 / 2.4 = −0.25 (arithmetic).
    make_robot(tmp_path, planar_arm(velocity=2.4), rect_robot_doc())
    path = _cycle(tmp_path, [{"kind": "arm", "to": [0.8, 0.8], "duration": 1.0},
                             {"kind": "straight", "distance": 1.0, "speed": 0.5,
                              "acceleration": 0.5}], arm_start=[-0.8, 0.8])
    res = opspace.size(path, search=False)
    row = {c.name: c for c in res.robot_criteria}["arm speed shoulder"]
    np.testing.assert_allclose(row.value, 15 * 1.6 / 8, rtol=1e-4)
    np.testing.assert_allclose(row.margin, 1 - 3.0 / 2.4, rtol=1e-3)
    assert not row.passed and res.status == "fail"
    assert "arm speed shoulder" in res.message
    elbow = {c.name: c for c in res.robot_criteria}["arm speed elbow"]
    assert elbow.value == 0.0 and elbow.passed   # the elbow does not move


# ------------------------------------------------------------------ the envelope verdict

CATALOGUE = """
[catalogue]
name = "test drives (invented)"
{motors}
[[gearbox]]
name = "G"
ratios = [10.0, 15.0, 20.0, 30.0]
efficiency = 0.9
inertia = 1e-6
"""


def _catalogue(tmp_path, peaks):
    motors = "".join(f'[[motor]]\nname = "m{i}"\nrated_torque = {p / 3:.6g}\npeak_torque = {p}\n'
                     f'no_load_speed = 900.0\nrated_speed = 800.0\nrotor_inertia = 5e-6\nmass = {0.2 + 0.1 * i}\n'
                     for i, p in enumerate(peaks))
    path = tmp_path / "drives.toml"
    path.write_text(CATALOGUE.format(motors=motors))
    return path


def _held_cycle(tmp_path, cycle_path, pose, name):
    """The same cycle written as a new file: the arm starts at `pose`, every arm
    move becomes a wait of its duration, the payload is held throughout."""
    doc = tomllib.loads(cycle_path.read_text())
    doc["cycle"]["arm_start"] = [float(x) for x in pose]
    doc["cycle"]["robot"] = str((cycle_path.parent / doc["cycle"]["robot"]).resolve())
    doc["cycle"].pop("catalogue", None)
    segs = []
    for s in doc["segment"]:
        if s["kind"] == "arm":
            s = {"kind": "dwell", "duration": s["duration"]}
        segs.append({**s, "payload": True})
    doc["segment"] = segs
    return write_toml(tmp_path / name, doc)


def assert_recommended_passes_every_held_pose(result, tmp_path, cycle_path):
    """The check of the issue, run literally: the recommended drive passes the
    cycle with the arm held at each reported worst-case pose."""
    rec = result.recommended
    assert rec is not None
    _, check = rec
    assert len(result.worst) == 3
    for k, wp in enumerate(result.worst):
        held = _held_cycle(tmp_path, cycle_path, wp.q, f"held_{k}.toml")
        again = opspace.size(held, catalogue=result.catalogue, search=False, basis="cycle")
        same = [c for s in again.sweeps for c in s.checks if (c.motor, c.gearbox, c.ratio)
                == (check.motor, check.gearbox, check.ratio)]
        assert len(same) == 1
        drive_rows = [c for c in same[0].criteria if not robot_level(c.name)]
        assert drive_rows and all(c.passed for c in drive_rows), (wp.objective, drive_rows)


def _second_robot(tmp_path):
    doc = rect_robot_doc(payload={"mass": 2.0, "com": [0.0, 0.0, 0.0],
                                  "inertia": [0.01, 0.01, 0.01, 0.0, 0.0, 0.0]},
                         base__footprint=[-0.35, 0.35, -0.25, 0.25, 0.3])
    doc["base"]["mass"] = 20.0
    doc["poses"] = {"folded": [0.8, -1.7]}
    make_robot(tmp_path, planar_arm(lim1=(-0.6, 1.2), lim2=(-1.7, 1.7)), doc)
    segments = [{"kind": "straight", "distance": 2.0, "speed": 1.0, "acceleration": 1.5,
                 "deceleration": 1.5},
                {"kind": "turn", "angle": 1.5, "rate": 1.5, "acceleration": 3.0},
                {"kind": "straight", "distance": 1.0, "speed": 0.5, "acceleration": 0.5,
                 "grade": 0.05, "payload": True}]
    return segments


def test_envelope_recommendation_passes_each_held_pose(tmp_path):
    segments = _second_robot(tmp_path)
    cat = _catalogue(tmp_path, [0.15, 0.25, 0.35, 0.5, 0.7, 1.0, 1.5])
    path = _cycle(tmp_path, segments, arm_start="folded", catalogue=cat.name)
    env = opspace.size(path)
    assert env.basis == "envelope" and len(env.cases) == 3
    assert_recommended_passes_every_held_pose(env, tmp_path, path)
    # the planned cycle alone (the arm folded) asks less of the drives: its
    # recommendation is no larger, and the headline says which basis it is
    cyc = opspace.size(path, basis="cycle")
    assert cyc.basis == "cycle" and "planned arm motions only" in cyc.message
    size = lambda r: r.catalogue.motor(r.recommended[1].motor).peak_torque  # noqa: E731
    assert size(cyc) <= size(env)
    if size(cyc) < size(env):
        assert "if the arm is held at the" in cyc.message
    # the envelope rows are the worst over the planned cycle and the cases
    for name in ("traction", "tip-over"):
        rows = [c for c in env.cycle_criteria if c.name == name]
        rows += [c for case in env.cases for c in case.robot_criteria if c.name == name]
        env_row = [c for c in env.robot_criteria if c.name == name][0]
        assert env_row.margin == min(c.margin for c in rows)


def test_verdict_basis_key_and_flag(tmp_path):
    segments = _second_robot(tmp_path)
    path = _cycle(tmp_path, segments, arm_start="folded", verdict_basis="cycle")
    duty = opspace.description.load_duty_cycle(path)
    assert duty.verdict_basis == "cycle"
    bad = _cycle(tmp_path, segments, arm_start="folded", verdict_basis="everything")
    with pytest.raises(opspace.ConfigError, match="verdict_basis.*'envelope', 'cycle'"):
        opspace.description.load_duty_cycle(bad)


# ------------------------------------------------------------------ friction bookkeeping

def test_back_driven_gearbox_counts_efficiency_once(tmp_path):
    # Downhill at constant speed on a ramp of angle α = atan(grade) < 0, COM on
    # the centre line, no rolling resistance: Newton along the ramp gives each
    # wheel's gearbox output torque τ_out = m g sin α r / 2 + c, with c the
    # wheel-side bearing friction ([drive] coulomb) and nothing of the gearbox.
    # Here τ_out < 0 while the wheel turns forward: the load back-drives the
    # motor, whose torque is τ_out η / G (common practice, no source), η applied
    # once; driving uphill it is τ_out / (G η).
    c, eta, G, r = 0.3, 0.8, 20.0, 0.1
    doc = rect_robot_doc(drive={"rotor_inertia": 2e-5, "gear_ratio": G, "efficiency": eta,
                                "coulomb": c})
    robot = make_robot(tmp_path, planar_arm(), doc)
    m = robot.total_mass()
    for grade in (-0.2, 0.2):
        path = _cycle(tmp_path, [{"kind": "straight", "distance": 3.0, "speed": 0.5,
                                  "acceleration": 0.5, "grade": grade}])
        res = opspace.size(path, search=False)
        ev = res.evaluation
        k = int(np.argmin(np.abs(ev.t - ev.duration / 2)))        # mid-cruise
        assert ev.a[k] == 0.0 and ev.v[k] > 0.0
        alpha = math.atan(grade)
        tau_out = m * G0 * math.sin(alpha) * r / 2 + c
        assert (tau_out < 0) == (grade < 0)          # downhill back-drives, uphill drives
        np.testing.assert_allclose(ev.tau_out[k], [tau_out, tau_out], rtol=1e-9, atol=1e-9)
        T_m = tau_out * eta / G if tau_out < 0 else tau_out / (G * eta)
        np.testing.assert_allclose(res.described.torque[k], [T_m, T_m], rtol=1e-9, atol=1e-12)


def test_simulation_flags_speed_and_effort_limits():
    # Arithmetic on a hand-made run: coordinate "elbow" (limit 2 rad/s) reaches
    # 2.5 rad/s first at t = 0.3 s; "shoulder" demands 12 N·m against 10 N·m
    # first at t = 0.2 s; nothing else passes its limit.
    from opspace.simulation import SimulationResult
    t = np.arange(6) * 0.1
    n, nv = len(t), 4
    nu, Qd = np.zeros((n, nv)), np.zeros((n, nv))
    nu[3:, 3] = [2.5, 2.1, 1.0]
    Qd[2:4, 2] = [12.0, -11.0]
    res = SimulationResult(
        t=t, q=np.zeros((n, 7)), nu=nu, nu_dot=np.zeros((n, nv)), Q=np.clip(Qd, -10, 10),
        Q_demand=Qd, saturated=np.abs(Qd) > 10, payload=np.zeros(n, bool),
        tool_position=np.zeros((n, 3)), tool_rotation=np.tile(np.eye(3), (n, 1, 1)),
        target_position=np.zeros((n, 3)), error=np.zeros((n, 3)), status="completed",
        message="", dt=0.1, control_period=0.1, integrator="rk4",
        coordinate_names=("wheel_right", "wheel_left", "shoulder", "elbow"),
        effort_limit=np.array([5.0, 5.0, 10.0, 10.0]),
        extra={"velocity_limit": np.array([np.inf, np.inf, 3.0, 2.0])})
    flags = res.summary()["limit_flags"]
    assert [(f["coordinate"], f["kind"]) for f in flags] == [("elbow", "speed"),
                                                             ("shoulder", "effort")]
    assert flags[0]["peak"]["value"] == 2.5 and flags[0]["first_t"]["value"] == pytest.approx(0.3)
    assert flags[1]["peak"] == {"value": 12.0, "unit": "N·m"}
    assert flags[1]["first_t"]["value"] == pytest.approx(0.2)


def test_clearance_uses_the_urdf_collision_shapes(tmp_path):
    # A sphere of radius 0.1 m around the tool point (link 2, 0.4 m out): with
    # the shoulder at q1 = asin(−0.35 / 0.9) the tool point is 0.05 m above the
    # floor (mount at 0.4 m, reach 0.9 m), the sphere 0.05 m into it (geometry).
    text = planar_arm(lim1=(-3.0, 3.0), lim2=(-3.0, 3.0)).replace(
        '<link name="link2">', '<link name="link2"><collision><origin xyz="0.4 0 0"/>'
        '<geometry><sphere radius="0.1"/></geometry></collision>')
    robot = make_robot(tmp_path, text, rect_robot_doc())
    geometry = arm_geometry(robot)
    assert len(geometry.shapes) == 1 and "1 URDF collision shapes" in geometry.used
    q1 = math.asin(-0.35 / 0.9)
    np.testing.assert_allclose(clearance(robot, np.array([[q1, 0.0]])), [0.05], atol=1e-9)
    bare = make_robot(tmp_path / "bare", planar_arm(lim1=(-3.0, 3.0), lim2=(-3.0, 3.0)),
                      rect_robot_doc()) if (tmp_path / "bare").mkdir() is None else None
    assert clearance(bare, np.array([[q1, 0.0]]))[0] == 0.0
    assert "no usable URDF collision shapes" in arm_geometry(bare).used
