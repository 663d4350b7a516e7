"""Motion limits against statics and vehicle-dynamics closed forms, and against
the sizing path (inverse dynamics, tyre forces, stability track) at the limit."""

from __future__ import annotations

import math

import numpy as np
import pytest

import opspace
from opspace.dynamics import drive_inertia, inverse_dynamics_batch
from opspace.limits import motion_limits, motion_limits_batch
from opspace.stability import stability_track, tyre_forces
from conftest import base_doc, make_robot, two_link_urdf

G = opspace.GRAVITY
TINY = 1e-9     # kg·m²: a wheel with no spin inertia to speak of


def _robot(tmp_path, *, casters, com=(0.0, 0.0, 0.25), J_s=TINY, J_m=0.0, gear=20.0, **extra):
    doc = base_doc(caster=[{"position": list(c)} for c in casters], base__com=list(com),
                   wheel__spin_inertia=J_s, wheel__diameter_inertia=max(J_s, 0.0035),
                   drive__rotor_inertia=J_m, drive__gear_ratio=gear, **extra)
    return make_robot(tmp_path, two_link_urdf(), doc)


UP = [math.pi / 2, 0.0]          # two-link arm straight up: its COM over the mount


def _sizing_path(robot, q, a, alpha=0.0, speed=0.0, payload=None, mu=None):
    """Efforts, tyre forces and stability track of a straight run as sizing makes them."""
    with robot.kept():
        if payload is not None:
            robot.attach_payload(payload)
        qs = robot.configurations(robot.arm_positions(q)[None])
        wr, wl = robot.wheel_rates(speed, 0.0)
        ar, al = robot.wheel_rates(a, alpha)
        nu = np.zeros((1, robot.nv))
        nu_dot = np.zeros((1, robot.nv))
        nu[0, :2], nu_dot[0, :2] = (wr, wl), (ar, al)
        Q = inverse_dynamics_batch(robot, qs, nu, nu_dot)
        F = tyre_forces(robot, qs, nu, nu_dot, Q)
        return Q[0], stability_track(robot, qs, nu, nu_dot, F, mu=mu)


@pytest.mark.parametrize("J_s, J_m", [(TINY, 0.0), (0.003, 3e-5)])
def test_tip_over_limit_rigid_body_on_a_rectangle(tmp_path, J_s, J_m):
    # Rectangular support, the drive axle (x = 0, y = ±0.25) one edge and two
    # casters the other.  Statics with d'Alembert's force (common practice): the
    # ZMP reaches an edge at a = g d / h, d the COM's horizontal distance to it,
    # h the COM height.  With spinning wheels and rotors (derived here): the
    # moment about the COM gains the spin momentum rate k̇_y = 2 (J_s + J_m G) a / r,
    # so p_x = x_c − h a / g − k̇_y / (m g), and the edge is reached at
    # a = g d / (h + 2 (J_s + J_m G) / (m r)).
    # (Tipping about the caster edge unloads the drive wheels, so there traction
    # always binds first: the tip-over cases put the drive axle on the edge.)
    casters = {"acceleration": ([(0.45, 0.25), (0.45, -0.25)], (0.2, 0.0, 0.3)),
               "deceleration": ([(-0.45, 0.25), (-0.45, -0.25)], (-0.2, 0.0, 0.3))}
    for name, (cs, com) in casters.items():
        (tmp_path / name).mkdir()
        robot = _robot(tmp_path / name, casters=cs, com=com, J_s=J_s, J_m=J_m,
                       ground={'friction': 50.0})
        q = robot.configuration(arm=UP)
        m, (x_c, _, h) = robot.total_mass(), robot.com(q)
        spin = 2 * (J_s + J_m * 20.0) / (m * 0.1)
        lim = getattr(motion_limits(robot, q), name)
        assert lim.limited_by == "tip-over"
        assert lim.value == pytest.approx(G * abs(x_c) / (h + spin), rel=1e-9)


def test_traction_limit_tricycle_gillespie(tmp_path):
    # Tricycle: two drive wheels at x = 0, one caster at x = −L.  Accelerating,
    # the drive axle's load is N_d = m (g (x_c + L) − a h) / L (load transfer,
    # Gillespie, Fundamentals of Vehicle Dynamics, 1992, ch. 2) and the drive
    # wheels carry all of m a: m a = μ N_d gives a = μ g ρ / (1 + μ h / L) with
    # ρ = (x_c + L) / L, the static share on the drive wheels (a = μ N_d / m
    # with N_d at that acceleration).
    L, mu = 0.5, 0.4
    robot = _robot(tmp_path, casters=[(-L, 0.0)], com=(-0.3, 0.0, 0.2),
                   ground={'friction': mu})
    q = robot.configuration(arm=UP)
    x_c, _, h = robot.com(q)
    rho = (x_c + L) / L
    lim = motion_limits(robot, q)
    assert lim.acceleration.limited_by == "traction"
    assert lim.acceleration.value == pytest.approx(mu * G * rho / (1 + mu * h / L), rel=1e-9)
    # braking: the load moves onto the drive axle (caster behind): a = μ g ρ / (1 − μ h / L)
    assert lim.deceleration.limited_by == "traction"
    assert lim.deceleration.value == pytest.approx(mu * G * rho / (1 - mu * h / L), rel=1e-9)
    # a lower friction from the call, and a traction ceiling, scale the same way
    lim2 = motion_limits(robot, q, friction=0.2, traction_ceiling=0.5)
    assert lim2.acceleration.value == pytest.approx(0.1 * G * rho / (1 + 0.1 * h / L), rel=1e-9)


def test_lateral_limit_side_edge(tmp_path):
    # Steady turn, COM over the pivot at height h: the ground's lateral force
    # m a_y acts at the ZMP, which reaches the side edge w = 0.25 m at
    # a_y = g w / h (statics, the quasi-static rollover threshold; Gillespie 1992, ch. 9).
    robot = _robot(tmp_path, casters=[(0.45, 0.25), (0.45, -0.25), (-0.45, 0.25),
                                      (-0.45, -0.25)], ground={'friction': 50.0},
                   mount__xyz=[0.0, 0.0, 0.4])
    q = robot.configuration(arm=UP)
    x_c, y_c, h = robot.com(q)
    assert abs(x_c) < 1e-12 and abs(y_c) < 1e-12
    lim = motion_limits(robot, q, turn_speed=2.0)
    assert lim.lateral_acceleration.limited_by == "tip-over"
    assert lim.lateral_acceleration.value == pytest.approx(G * 0.25 / h, rel=1e-7)


def test_drive_torque_limit_effective_mass(tmp_path):
    # Both wheels at τ_max: 2 τ_max / r = m_eff a + F_rr with the straight-line
    # effective mass m_eff = (M_w[0,0] + M_w[0,1] + M_w[1,0] + M_w[1,1]) / r² from
    # the 2×2 wheel mass matrix (`drive_inertia`, the model's tested closed form)
    # and the resistance F_rr = C_rr m g + 2 (f_C + f_v v / r) / r (rolling
    # resistance on all contacts, drive friction), at speed v.
    tau, r, v = 3.0, 0.1, 0.8
    robot = _robot(tmp_path, casters=[(0.4, 0.2), (0.4, -0.2), (-0.4, 0.2), (-0.4, -0.2)],
                   J_s=0.003, J_m=3e-5, ground={'friction': 50.0}, drive__torque_limit=tau,
                   drive__coulomb=0.1, drive__viscous=0.01, base__rolling_resistance=0.02)
    q = robot.configuration(arm=UP)
    M_w = drive_inertia(robot, q).M_w
    m_eff = M_w.sum() / r**2
    F_rr = 0.02 * robot.total_mass() * G + 2 * (0.1 + 0.01 * v / r) / r
    lim = motion_limits(robot, q, speed=v)
    assert lim.acceleration.limited_by == "drive torque"
    assert lim.acceleration.value == pytest.approx((2 * tau / r - F_rr) / m_eff, rel=1e-9)
    assert lim.deceleration.limited_by == "drive torque"
    assert lim.deceleration.value == pytest.approx((2 * tau / r + F_rr) / m_eff, rel=1e-9)


def _check_at_limit(robot, q, lim, policy, payload=None, speed=0.0, mu=None):
    """At the reported limit, the named figure of the sizing path is at its limit."""
    for name, sign in (("acceleration", 1.0), ("deceleration", -1.0)):
        L = getattr(lim, name)
        Q, track = _sizing_path(robot, q, sign * L.value, speed=speed, payload=payload, mu=mu)
        if L.limited_by == "traction":
            got, want = np.max(track.traction[0]), policy["traction_ceiling"]
        elif L.limited_by == "tip-over":
            got, want = track.margin[0], policy["zmp_margin"]
        elif L.limited_by == "drive torque":
            got, want = np.max(np.abs(Q[:2])), robot.description.drive.torque_limit
        else:
            raise AssertionError(f"unexpected cause {L.limited_by}")
        # common practice, no source: the limit is where the named figure reaches its bound
        assert got == pytest.approx(want, rel=1e-6, abs=1e-9), (name, L.limited_by)


def test_limits_consistent_with_the_sizing_path_demo(demo, rng):
    policy = {"zmp_margin": 0.04, "traction_ceiling": 0.8}
    seen = set()
    for pose in ("reach_forward", "side_reach", "stowed", "carry"):
        q = demo.configuration(arm=pose)
        lim = motion_limits(demo, q, payload=True, speed=0.5, **policy)
        _check_at_limit(demo, q, lim, policy, payload=demo.description.payload, speed=0.5)
        seen |= {lim.acceleration.limited_by, lim.deceleration.limited_by}
    # a low torque limit: the drive binds (description's torque_limit from the model)
    assert "traction" in seen


def test_limits_consistent_on_an_invented_robot(tmp_path, rng):
    # Tip-over, traction and torque each binding somewhere on a robot with three
    # casters behind the drive axle (four contacts: lift-off under the plane-of-
    # deflection load model).
    robot = _robot(tmp_path, casters=[(-0.35, 0.22), (-0.35, -0.22), (-0.2, 0.0)],
                   com=(-0.1, 0.02, 0.35), J_s=0.004, J_m=2e-5, ground={'friction': 0.9},
                   drive__torque_limit=8.0)
    causes = set()
    for _ in range(5):
        q = robot.configuration(arm=rng.uniform(-1.5, 2.5, 2))
        for mu, policy in ((0.5, {"zmp_margin": 0.0, "traction_ceiling": 1.0}),
                           (3.0, {"zmp_margin": 0.03, "traction_ceiling": 0.6})):
            lim = motion_limits(robot, q, friction=mu, **policy)
            _check_at_limit(robot, q, lim, policy, mu=mu)
            causes |= {lim.acceleration.limited_by, lim.deceleration.limited_by}
    assert causes >= {"tip-over", "traction", "drive torque"}


def test_combined_direction_and_batch_agree(demo):
    q = demo.configuration(arm="carry")
    d = np.array([-1.0, 0.8])
    lim = motion_limits(demo, q, direction=d)
    k = lim.combined.value
    assert 0 < k < np.inf and lim.combined.limited_by in ("traction", "tip-over", "drive torque")

    def ok(scale):   # every bound of the sizing path kept at (a, α) = scale d
        Q, track = _sizing_path(demo, q, scale * d[0], scale * d[1])
        return (np.max(track.traction[0]) <= 1 and track.margin[0] >= 0
                and np.max(np.abs(Q[:2])) <= demo.description.drive.torque_limit)
    # the limit along d is where the sizing path first leaves a bound (1e-6)
    assert ok(k * (1 - 1e-6)) and not ok(k * (1 + 1e-6))
    qs = np.array([demo.configuration(arm=p) for p in ("carry", "stowed")])
    batch = motion_limits_batch(demo, qs)
    one = [motion_limits(demo, x) for x in qs]
    for name in ("acceleration", "deceleration", "yaw_acceleration", "lateral_acceleration"):
        np.testing.assert_allclose(batch.values[name], [getattr(o, name).value for o in one],
                                   rtol=1e-12)
        assert list(batch.limited_by[name]) == [getattr(o, name).limited_by for o in one]


@pytest.mark.parametrize("kwargs, words", [
    ({"q": "short"}, ["nq"]),
    ({"arm": [3.5, 0.0]}, ["shoulder", "outside its limits"]),
    ({"friction": 0.0}, ["friction", "> 0"]),
    ({"friction": -1.0}, ["friction", "> 0"]),
    ({"grade": 0.9}, ["grade 0.9", "stand"]),
    ({"traction_ceiling": 1.5}, ["traction_ceiling"]),
    ({"zmp_margin": -0.1}, ["zmp_margin"]),
    ({"speed": float("nan")}, ["speed"]),
])
def test_bad_input_one_message(tmp_path, kwargs, words):
    robot = _robot(tmp_path, casters=[(0.3, 0.0), (-0.3, 0.0)], com=(0.0, 0.0, 0.3))
    q = robot.configuration(arm=kwargs.pop("arm", [0.3, 0.2]))
    if kwargs.pop("q", None):
        q = q[:-1]
    with pytest.raises(opspace.ConfigError) as err:
        motion_limits(robot, q, **kwargs)
    msg = str(err.value)
    assert "\n" not in msg
    for w in words:
        assert w in msg
