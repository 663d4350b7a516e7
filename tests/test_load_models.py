"""Load models of the base (equal / per-contact stiffness, sprung drive wheels,
rockers) against statics and hand-solved deflection planes, on layouts built
here (tricycle with the caster in front or behind, four, six contacts)."""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import opspace
from opspace.stability import SupportModel, normal_loads, stability_track, support_loads
from conftest import base_doc, make_robot, two_link_urdf

G = opspace.GRAVITY


def _model(kind, P, k, driven=2, **kw):
    P = np.asarray(P, dtype=float)
    names = tuple(f"c{i}" for i in range(len(P)))
    return SupportModel(kind, names, P, np.arange(len(P)) < driven,
                        np.broadcast_to(np.asarray(k, float), (len(P),)).copy(), **kw)


# --------------------------------------------------------------------------- tricycle
@pytest.mark.parametrize("x_caster,com_x", [(0.4, 0.12), (-0.4, -0.1)])
@pytest.mark.parametrize("a", [0.0, 1.5, -0.8])
def test_tricycle_loads_by_moment_balance(tmp_path, x_caster, com_x, a):
    """Three contacts: the loads from moment balance about the axle (y) and the
    centre line (x), with the longitudinal load transfer m a h under a constant
    acceleration a (Gillespie, Fundamentals of Vehicle Dynamics, 1992, ch. 2),
    whatever the load model (statically determinate)."""
    doc = base_doc(base__com=[com_x, 0.02, 0.22], caster=[{"position": [x_caster, 0.05]}],
                   support={"model": "sprung", "preload": 60.0, "spring_rate": 3.0e4,
                            "travel": 0.01})
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    q = robot.configuration(arm=[0.3, -0.5])
    r, b = 0.1, 0.25
    nu = np.array([0.5 / r, 0.5 / r, 0.0, 0.0])
    nu_dot = np.array([a / r, a / r, 0.0, 0.0])
    Q = opspace.inverse_dynamics(robot, q, nu, nu_dot)
    tr = stability_track(robot, q[None], nu[None], nu_dot[None], np.zeros((1, 2)))

    m, W = robot.total_mass(), robot.total_mass() * G
    import pinocchio as pin
    x_c, y_c, h = pin.centerOfMass(robot.model, robot.model.createData(), q)
    # the spin momentum rate of the wheels and rotors, 2 (J_s + J_m G) a / r, pitches
    # too (Euler's equation of the spinning parts; J_s = 0.006, J_m = 2e-5, G = 20)
    J = 0.006 + 2e-5 * 20.0
    # about the axle (y):  N_k x_k = W x_c − m a h − 2 J a / r
    N_k = (W * x_c - m * a * h - 2 * J * a / r) / x_caster
    # vertical balance and moments about the centre line (x):
    #   N_r + N_l = W − N_k,   b (N_l − N_r) + 0.05 N_k = W y_c
    S, D = W - N_k, (W * y_c - 0.05 * N_k) / b
    expected = [(S - D) / 2, (S + D) / 2, N_k]
    np.testing.assert_allclose(tr.loads.N[0], expected, rtol=1e-9)
    assert "statically determinate" in tr.loads.model
    assert np.isfinite(Q).all()


# --------------------------------------------------------------------------- sprung wheels
def _symmetric_sprung(W, P=100.0, ks=2.0e4, T=0.01, s0=0.004, kt=2.0e5, kc=1.0e5):
    """Hand solution: drive wheels at (0, ±b), casters at (±l, 0), CoP at the
    centre.  By symmetry N_r = N_l = N_d and the chassis sinks by w without
    tilting: casters N_c = k_c w each, 2 N_d + 2 k_c w = W.  The drive wheel
    (tyre k_t in series with the spring): at w = 0 the spring is compressed by
    s0 and pushes F0 = P + k_s s0; for w >= 0 tyre and spring give way together
    (1/k_eq = 1/k_t + 1/k_s), N_d = F0 + k_eq w, until the spring has
    compressed by T: N_d = P + k_s T, then the tyre alone, slope k_t."""
    k_eq = 1.0 / (1.0 / kt + 1.0 / ks)
    F0, Fb = P + ks * s0, P + ks * T
    w = (W - 2 * F0) / (2 * k_eq + 2 * kc)          # spring travelling
    assert w >= 0.0
    if F0 + k_eq * w <= Fb:
        return F0 + k_eq * w, kc * w, "travel"
    w_b = (Fb - F0) / k_eq                          # bottomed: N_d = F_b + k_t (w − w_b)
    w = (W - 2 * Fb + 2 * kt * w_b) / (2 * kt + 2 * kc)
    return Fb + kt * (w - w_b), kc * w, "bottomed"


@pytest.mark.parametrize("W,state", [(600.0, "travel"), (5000.0, "bottomed")])
def test_sprung_drive_wheels_hand_solved(W, state):
    N_d, N_c, got = _symmetric_sprung(W)
    assert got == state
    P = [[0, -0.25], [0, 0.25], [0.3, 0], [-0.3, 0]]
    k = [2.0e5, 2.0e5, 1.0e5, 1.0e5]
    model = _model("sprung", P, k, preload=100.0, spring_rate=2.0e4, travel=0.01,
                   compression=0.004)
    loads = support_loads(model, [0.0, 0.0], W)
    np.testing.assert_allclose(loads.N[0], [N_d, N_d, N_c, N_c], rtol=1e-10)
    # preload plus rate times the spring's compression until the stops: s = s0 + the
    # chassis sink w less the tyre's extra compression (N_d − F0) / k_t
    w = N_c / 1.0e5
    s = 0.004 + w - (N_d - (100.0 + 2.0e4 * 0.004)) / 2.0e5
    if state == "travel":
        np.testing.assert_allclose(N_d, 100.0 + 2.0e4 * s, rtol=1e-10)
        assert 0 < s < 0.01
    assert loads.bottomed[0, 0] == (state == "bottomed") and not loads.topped_out.any()


def test_sprung_wheel_tops_out_on_a_dip():
    """A dip e under the right drive wheel: its spring extends, the load falls
    by about k_eq e, and once the spring reaches its top stop (load below the
    preload) the wheel is topped out; a deeper dip lifts it off.  Statics hold
    throughout (three equilibrium equations), and the left wheel keeps its load
    above the right's."""
    P = [[0, -0.25], [0, 0.25], [0.3, 0.2], [0.3, -0.2], [-0.3, 0.2], [-0.3, -0.2]]
    model = _model("sprung", P, 2.0e5, preload=80.0, spring_rate=2.0e4, travel=0.01,
                   compression=0.003)
    A = np.vstack([np.ones(6), np.asarray(P, float).T])
    states = []
    for e in (0.0, 0.002, 0.0045, 0.02):
        loads = support_loads(model, [0.0, 0.0], 600.0, floor=[e, 0, 0, 0, 0, 0])
        np.testing.assert_allclose(A @ loads.N[0], [600.0, 0.0, 0.0], atol=1e-8)
        states.append((loads.lifted[0, 0], loads.topped_out[0, 0], loads.N[0, 0]))
    assert [s[:2] for s in states] == [(False, False), (False, False), (False, True),
                                       (True, False)]
    assert states[0][2] > states[1][2] > 80.0 > states[2][2] > states[3][2] == 0.0


def test_sprung_wheel_lifts_off_not_crash():
    """CoP far to the left, beyond the left casters' line (y = 0.2) towards the
    left drive wheel (y = 0.25): the right side lifts, the right drive wheel with
    it (N = 0), while the robot still stands on the left contacts."""
    P = [[0, -0.25], [0, 0.25], [0.3, 0.2], [0.3, -0.2], [-0.3, 0.2], [-0.3, -0.2]]
    model = _model("sprung", P, 2.0e5, preload=80.0, spring_rate=2.0e4, travel=0.01,
                   compression=0.005)
    loads = support_loads(model, [[0.0, 0.24], [0.0, 0.0]], [500.0, 500.0])
    assert loads.lifted[0, 0] and loads.N[0, 0] == 0.0 and loads.supported.all()
    A = np.vstack([np.ones(6), np.asarray(P, float).T])
    # equilibrium (statics) holds with the wheel lifted
    np.testing.assert_allclose(A @ loads.N[0], 500.0 * np.array([1, 0.0, 0.24]), atol=1e-8)
    assert not loads.lifted[1].any()


# --------------------------------------------------------------------------- stiffness
def test_four_contacts_of_own_stiffness_by_hand():
    """Four contacts of different vertical stiffness under a rigid chassis: the
    deflection plane δ_i = w + β x_i + γ y_i with N_i = k_i δ_i and the three
    equilibrium equations, solved exactly by sympy (an independent solver)."""
    P = [(0, -1 / 4), (0, 1 / 4), (3 / 10, 0), (-2 / 5, 1 / 10)]
    k = [150000, 90000, 400000, 250000]
    W, cx, cy = 700, sp.Rational(1, 20), sp.Rational(1, 50)
    w, beta, gamma = sp.symbols("w beta gamma")
    Ps = [(sp.nsimplify(x), sp.nsimplify(y)) for x, y in P]
    N = [ki * (w + beta * x + gamma * y) for ki, (x, y) in zip(k, Ps)]
    sol = sp.solve([sum(N) - W, sum(n * x for n, (x, _) in zip(N, Ps)) - W * cx,
                    sum(n * y for n, (_, y) in zip(N, Ps)) - W * cy], [w, beta, gamma])
    expected = [float(n.subs(sol)) for n in N]
    model = _model("stiffness", P, k)
    loads = support_loads(model, [float(cx), float(cy)], 700.0)
    np.testing.assert_allclose(loads.N[0], expected, rtol=1e-11)
    assert "statically determinate" not in loads.model


def test_equal_stiffness_is_the_plane_of_normal_loads():
    """Equal stiffness: the minimum-norm plane with lift-off (`normal_loads`,
    the rigid-cap pile-group formula), six contacts, many centres of pressure."""
    P = np.array([[0, -0.22], [0, 0.22], [0.3, 0.2], [0.3, -0.2], [-0.3, 0.2], [-0.3, -0.2]])
    rng = np.random.default_rng(3)
    cop = rng.uniform(-0.3, 0.3, (300, 2)) * [1.0, 0.7]
    a = support_loads(_model("equal", P, 1.0e5), cop, 600.0)
    b = normal_loads(P, cop, np.full(300, 600.0))
    np.testing.assert_array_equal(a.supported, b.supported)
    np.testing.assert_allclose(a.N[a.supported], b.N[b.supported], atol=1e-8)
    assert a.lifted.any()


def test_floor_dip_unloads_a_stiff_drive_wheel():
    """A dip e under the right drive wheel of a symmetric four-contact base
    (drive wheels at (0, ±b), casters at (±l, 0), equal stiffness k, CoP at the
    centre): by hand, the plane gives the wheel N = W/4 − k e/2 (symmetry about
    x, and moments about x keep N_r = N_l), so both drive wheels unload
    together and lift at e = W/k, the casters then carrying W."""
    P = [[0, -0.25], [0, 0.25], [0.3, 0], [-0.3, 0]]
    k, W = 2.0e5, 600.0
    for e in (0.5e-3, 2.0e-3, 4.0e-3):
        loads = support_loads(_model("equal", P, k), [0.0, 0.0], W, floor=[e, 0, 0, 0])
        # deflection plane (hand): β = 0 by symmetry about the axle; N_r = k (w − γ b − e),
        # N_l = k (w + γ b), N_c = k w; Σ N y = 0 gives γ b = −e/2, so N_r = N_l =
        # k (w − e/2), and ΣN = W gives w = (W/k + e)/4: N_r = W/4 − k e/4 (while > 0)
        N_d = max(W / 4 - k * e / 4, 0.0)
        np.testing.assert_allclose(loads.N[0, :2], [N_d, N_d], rtol=1e-10, atol=1e-9)
        assert loads.lifted[0, 0] == (N_d == 0.0)
        np.testing.assert_allclose(loads.N[0].sum(), W, rtol=1e-12)


# --------------------------------------------------------------------------- rockers
def test_rocker_pair_by_pivot_moment_balance(tmp_path):
    """Two drive wheels and a rear caster pair on a rocker: three support points
    (statics about the axle gives the pivot load F_p = W x_c / x_p), and the
    pair shares F_p by moment balance about the pivot: N_a |p − a| = N_b |p − b|."""
    doc = base_doc(base__com=[-0.08, 0.0, 0.2],
                   caster=[{"position": [-0.3, 0.2]}, {"position": [-0.3, -0.2]}],
                   rocker=[{"casters": ["caster_1", "caster_2"], "pivot": [-0.3, 0.05]}])
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    q = robot.configuration()
    z = np.zeros((1, 4))
    tr = stability_track(robot, q[None], z, z, np.zeros((1, 2)))
    import pinocchio as pin
    x_c, y_c, _ = pin.centerOfMass(robot.model, robot.model.createData(), q)
    W = robot.total_mass() * G
    F_p = W * x_c / -0.3
    N_a, N_b = tr.loads.N[0, 2:]
    np.testing.assert_allclose(N_a + N_b, F_p, rtol=1e-10)
    np.testing.assert_allclose(N_a * 0.15, N_b * 0.25, rtol=1e-10)   # |p − a| = 0.15, |p − b| = 0.25
    assert "rocker" in tr.loads.model and "statically determinate" in tr.loads.model


def test_rocker_shares_in_an_indeterminate_layout():
    """A front caster, two drive wheels and a rear rocker pair (four support
    points): the pair keeps the lever ratio whatever the chassis does."""
    P = [[0, -0.25], [0, 0.25], [0.35, 0.0], [-0.3, 0.2], [-0.3, -0.2]]
    model = _model("stiffness", P, [2e5, 2e5, 1e5, 1.5e5, 1.5e5],
                   rockers=((3, 4, np.array([-0.3, 0.0])),))
    loads = support_loads(model, [[0.02, 0.03], [-0.1, -0.05]], [500.0, 800.0])
    np.testing.assert_allclose(loads.N[:, 3], loads.N[:, 4], rtol=1e-12)
    A = np.vstack([np.ones(5), np.asarray(P, float).T])
    np.testing.assert_allclose(loads.N @ A.T, [[500, 10, 15], [800, -80, -40]], atol=1e-8)


# --------------------------------------------------------------------------- traction
def _diamond_robot(tmp_path, c_rr=0.02):
    """Drive wheels at (0, ±0.25), casters at (±0.3, 0), COM on the x axis: the
    static (equal-stiffness) loads are N_d = W/4 per drive wheel and W/2 on the
    casters together, N_front − N_rear = W x_c / l (plane N = α + β x)."""
    doc = base_doc(base__com=[0.05, 0.0, 0.25], base__rolling_resistance=c_rr)
    return make_robot(tmp_path, two_link_urdf(), doc)


def test_traction_use_straight_acceleration_with_caster_resistance(tmp_path):
    """Newton for the whole robot along a straight line: the drive tyres push the
    mass and the casters' rolling resistance, Σ F_x = m a + C_rr Σ N_c
    (common practice, no source), so each wheel supplies (m a + C_rr W/2)/2 and
    uses |F_x| / (μ N_d) of its friction with N_d = W/4."""
    robot = _diamond_robot(tmp_path)
    r, a, v = 0.1, 1.2, 0.8
    q = robot.configuration(arm=[0.2, -0.4])
    nu, nu_dot = np.array([v / r, v / r, 0, 0]), np.array([a / r, a / r, 0, 0])
    Q = opspace.inverse_dynamics(robot, q, nu, nu_dot)
    F = opspace.stability.tyre_forces(robot, q[None], nu[None], nu_dot[None], Q[None])
    tr = stability_track(robot, q[None], nu[None], nu_dot[None], F, mu=0.5)
    m = robot.total_mass()
    W = m * G
    F_hand = (m * a + 0.02 * W / 2) / 2
    np.testing.assert_allclose(F[0], [F_hand, F_hand], rtol=1e-9)
    np.testing.assert_allclose(tr.traction[0], F_hand / (0.5 * W / 4), rtol=1e-9)


def test_traction_use_turn_on_the_spot_with_caster_resistance(tmp_path):
    """Turning on the spot at a steady rate ω: the casters at (±l, 0) resist with
    C_rr N_c across their paths (yaw moment −C_rr l W/2 about the pivot, side
    force C_rr (N_f − N_b)); moments about the fixed pivot and Newton along x
    and y give F_r,l = (−m ω² x_c ± C_rr l W/(2b)) / 2 and a side force
    C_rr W x_c / l shared equally (statics of a rigid body, by hand)."""
    robot = _diamond_robot(tmp_path)
    r, b, l, w = 0.1, 0.25, 0.3, 1.5
    q = robot.configuration(arm=[0.2, -0.4])
    nu = np.array([w * b / r, -w * b / r, 0, 0])
    nu_dot = np.zeros(4)
    Q = opspace.inverse_dynamics(robot, q, nu, nu_dot)
    F = opspace.stability.tyre_forces(robot, q[None], nu[None], nu_dot[None], Q[None])
    tr = stability_track(robot, q[None], nu[None], nu_dot[None], F, mu=0.6)
    import pinocchio as pin
    x_c = pin.centerOfMass(robot.model, robot.model.createData(), q)[0]
    m = robot.total_mass()
    W = m * G
    turn = 0.02 * l * W / (2 * b)
    F_x = np.array([(-m * w**2 * x_c + turn) / 2, (-m * w**2 * x_c - turn) / 2])
    F_y = 0.02 * W * x_c / l / 2
    np.testing.assert_allclose(F[0], F_x, rtol=1e-9)
    np.testing.assert_allclose(tr.tyre_force[0, :, 1], [F_y, F_y], rtol=1e-9)
    np.testing.assert_allclose(tr.traction[0], np.hypot(F_x, F_y) / (0.6 * W / 4), rtol=1e-9)


# --------------------------------------------------------------------------- floor ranges
def test_worst_floor_dip_under_a_drive_wheel_by_hand(tmp_path):
    """Sizing on the worst floor: the diamond layout (drive wheels at (0, ±b),
    casters at (±l, 0)), equal stiffness k, a dip e allowed under any contact and
    friction down to μ_low.  By hand (deflection plane, see
    test_floor_dip_unloads_a_stiff_drive_wheel; the pitch moment only loads the
    casters at x = ±l), a dip under a drive wheel leaves each drive wheel
    N_d = W/4 − k e/4, the least of all cases, and each must push m a / 2
    (Newton; no rolling resistance): worst use = (m a / 2) / (μ_low N_d)."""
    from opspace.description import load_duty_cycle
    from opspace.sizing import size
    from conftest import write_toml

    k, e, a = 2.0e5, 0.001, 1.0
    doc = base_doc(base__com=[0.05, 0.0, 0.25], support={"stiffness": k, "unevenness": e},
                   ground={"friction": 0.6, "friction_range": [0.3, 0.8]})
    robot = make_robot(tmp_path, two_link_urdf(), doc)
    cycle = write_toml(tmp_path / "cycle.toml", {
        "cycle": {"name": "floor", "robot": "robot.toml", "cycles_per_hour": 10.0,
                  "sample_rate": 100.0},
        "segment": [{"kind": "straight", "distance": 1.0, "speed": 0.5, "acceleration": a}]})
    result = size(load_duty_cycle(cycle, robot=robot), robot=robot, search=False)
    fr = result.floor
    m = robot.total_mass()
    W = m * G
    np.testing.assert_allclose(fr.traction_worst, (m * a / 2) / (0.3 * (W / 4 - k * e / 4)),
                               rtol=1e-9)
    np.testing.assert_allclose(fr.traction_nominal, (m * a / 2) / (0.6 * W / 4), rtol=1e-9)
    assert fr.traction_case.startswith("1 mm dip under wheel_")
    assert fr.margin_worst <= fr.margin_nominal
    names = [c.name for c in result.robot_criteria]
    # the robot-level rows (the arm's speed and effort rows aside)
    assert [n for n in names if not n.startswith("arm ")] == [
        "traction", "tip-over", "traction (worst floor)", "tip-over (worst floor)"]
