"""Tests of opspace.trajectory against closed forms, SciPy and sympy.

References used below:
  [BM]  Biagiotti & Melchiorri, Trajectory Planning for Automatic Machines and
        Robots, Springer (2008): sec. 3.2 (trapezoidal velocity profile; section
        number recalled from memory) and sec. 3.4 (double S velocity profile).
  [FH]  Flash & Hogan, The coordination of arm movements: an experimentally
        confirmed mathematical model, J. Neuroscience 5(7), 1985 (the quintic
        10τ³ − 15τ⁴ + 6τ⁵).
"""

import math

import numpy as np
import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import cumulative_trapezoid, solve_ivp
from scipy.optimize import brentq

from opspace import trajectory as tr

N_DENSE = 20001


def dense(profile, n=N_DENSE):
    t = np.linspace(0.0, profile.duration, n)
    return t, profile.sample(t)


# ----------------------------------------------------------------- trapezoidal
@pytest.mark.parametrize("d, v_max, a_max", [(2.0, 0.5, 1.0), (10.0, 2.0, 0.5), (-3.0, 1.0, 2.0)])
def test_trapezoidal_duration_when_v_max_is_reached(d, v_max, a_max):
    assert abs(d) >= v_max**2 / a_max  # the cruise case
    p = tr.trapezoidal(d, v_max, a_max)
    # [BM] sec. 3.2: T = d/v_max + v_max/a_max when v_max is reached.
    np.testing.assert_allclose(p.duration, abs(d) / v_max + v_max / a_max, rtol=1e-12)
    t, (s, v, a, j) = dense(p)
    # The cruise speed is v_max, along the sign of d ([BM] sec. 3.2).
    np.testing.assert_allclose(np.max(np.abs(v)), v_max, rtol=1e-12)
    assert np.all(np.sign(d) * v >= 0.0)
    np.testing.assert_allclose(s[-1], d, rtol=1e-12)


@pytest.mark.parametrize("d, v_max, a_max", [(0.1, 1.0, 2.0), (-0.5, 3.0, 1.0)])
def test_trapezoidal_triangular_fallback(d, v_max, a_max):
    assert abs(d) < v_max**2 / a_max
    p = tr.trapezoidal(d, v_max, a_max)
    # [BM] sec. 3.2, triangular case: T = 2 sqrt(d/a_max), peak speed sqrt(d a_max) at T/2.
    np.testing.assert_allclose(p.duration, 2.0 * math.sqrt(abs(d) / a_max), rtol=1e-12)
    s, v, a, j = p.sample(p.duration / 2)
    np.testing.assert_allclose(abs(v[0]), math.sqrt(abs(d) * a_max), rtol=1e-12)
    np.testing.assert_allclose(s[0], d / 2, rtol=1e-12)


def test_trapezoidal_with_separate_braking_limit():
    a_max, d_max = 2.0, 0.5
    # Constant-acceleration kinematics v² = 2 a s per phase (common practice, no
    # source): cruise case T = d/v + v/(2 a_max) + v/(2 d_max).
    p = tr.trapezoidal(3.0, 1.0, a_max, d_max=d_max)
    np.testing.assert_allclose(p.duration, 3.0 + 1.0 / 4.0 + 1.0 / 1.0, rtol=1e-12)
    # Triangular case: v_p = sqrt(2 d a b / (a + b)), T = v_p/a + v_p/b (same kinematics).
    d = 0.2
    p = tr.trapezoidal(d, 5.0, a_max, d_max=d_max)
    v_p = math.sqrt(2 * d * a_max * d_max / (a_max + d_max))
    np.testing.assert_allclose(p.duration, v_p / a_max + v_p / d_max, rtol=1e-12)
    t, (s, v, a, j) = dense(p)
    np.testing.assert_allclose(v.max(), v_p, rtol=1e-3)  # grid resolution T/20000
    np.testing.assert_allclose([a[1], a[-2]], [a_max, -d_max], rtol=1e-12)


def test_trapezoidal_with_boundary_velocities():
    d, v_max, a_max, v0, v1 = 5.0, 2.0, 1.0, 0.5, 1.0
    p = tr.trapezoidal(d, v_max, a_max, v_start=v0, v_end=v1)
    # Constant-acceleration kinematics (common practice, no source): ramps
    # (v_max − v0)/a, (v_max − v1)/a and the cruise over the remaining distance.
    cruise = (d - (v_max**2 - v0**2) / (2 * a_max) - (v_max**2 - v1**2) / (2 * a_max)) / v_max
    T = (v_max - v0) / a_max + (v_max - v1) / a_max + cruise
    np.testing.assert_allclose(p.duration, T, rtol=1e-12)
    t, (s, v, a, j) = dense(p)
    np.testing.assert_allclose([v[0], v[-1]], [v0, v1], rtol=1e-12)
    # Distance from SciPy's trapezoid rule on the sampled speed (exact for piecewise
    # linear v except in the cells that hold a kink: error < h² a_max).
    np.testing.assert_allclose(cumulative_trapezoid(v, t)[-1], d, atol=1e-7)
    # Too short to brake from 2 m/s to rest at 1 m/s²: needs v²/(2a) = 2 m.
    with pytest.raises(ValueError, match=r"`distance` = 0.1 is too short.*>= 2.0"):
        tr.trapezoidal(0.1, 2.0, 1.0, v_start=2.0)


def test_trapezoidal_triangular_with_boundary_velocities_and_braking_limit():
    d, a_max, d_max, v0, v1 = -1.0, 2.0, 0.5, -0.4, -0.8
    p = tr.trapezoidal(d, 5.0, a_max, d_max=d_max, v_start=v0, v_end=v1)
    # Constant-acceleration kinematics (common practice, no source): the peak speed
    # solves (v_p² − v0²)/(2a) + (v_p² − v1²)/(2b) = |d|, found by SciPy's brentq.
    v_p = brentq(lambda w: (w**2 - v0**2) / (2 * a_max) + (w**2 - v1**2) / (2 * d_max) - abs(d),
                 0.8, 5.0, xtol=1e-15)
    T = (v_p - abs(v0)) / a_max + (v_p - abs(v1)) / d_max
    np.testing.assert_allclose(p.duration, T, rtol=1e-12)
    t, (s, v, a, j) = dense(p)
    np.testing.assert_allclose(cumulative_trapezoid(v, t)[-1], d, atol=1e-7)
    np.testing.assert_allclose([v[0], v[-1], s[-1]], [v0, v1, d], rtol=1e-12)


def test_zero_distance_gives_zero_duration():
    # T = 2 sqrt(d/a) = 0 ([BM] sec. 3.2) and T = 4 (d / 2j)^(1/3) = 0 ([BM] sec. 3.4).
    for p in (tr.trapezoidal(0.0, 1.0, 1.0), tr.s_curve(0.0, 1.0, 1.0, 1.0)):
        assert p.duration == 0.0
        s, v, a, j = p.sample([-1.0, 0.0, 1.0])
        np.testing.assert_array_equal(np.concatenate([s, v, a, j]), 0.0)


def test_sampling_outside_the_profile_holds_the_end_states():
    p = tr.trapezoidal(-2.0, 1.0, 1.0, v_start=-0.5)
    s, v, a, j = p.sample([-3.0, p.duration + 3.0])
    # Definition of the clamp: (0, v_start, 0, 0) before, (d, v_end = 0, 0, 0) after.
    np.testing.assert_allclose(s, [0.0, -2.0], rtol=1e-12)
    np.testing.assert_allclose(v, [-0.5, 0.0], atol=1e-12)
    np.testing.assert_array_equal(np.concatenate([a, j]), 0.0)


# ---------------------------------------------------------------------- S-curve
def _check_limits_and_end(p, d, v_max, a_max, j_max):
    t, (s, v, a, j) = dense(p)
    rtol = 1e-12
    assert np.max(np.abs(v)) <= v_max * (1 + rtol)
    assert np.max(np.abs(a)) <= a_max * (1 + rtol)
    assert np.max(np.abs(j)) <= j_max * (1 + rtol)
    np.testing.assert_allclose(s[-1], d, rtol=1e-12)
    # Just before the end: position d, at rest, zero acceleration (end state of [BM] sec. 3.4).
    s_e, v_e, a_e, _ = p.sample(p.duration * (1 - 1e-12))
    np.testing.assert_allclose([s_e[0], v_e[0], a_e[0]], [d, 0.0, 0.0], atol=1e-9)
    return t, s, v, a, j


@pytest.mark.parametrize("d, v_max, a_max, j_max", [(2.0, 0.5, 1.0, 4.0), (-5.0, 1.5, 2.0, 10.0)])
def test_s_curve_full_seven_phases(d, v_max, a_max, j_max):
    # Both limits reached: v j >= a² and |d| >= v (v/a + a/j).
    assert v_max * j_max >= a_max**2 and abs(d) >= v_max * (v_max / a_max + a_max / j_max)
    p = tr.s_curve(d, v_max, a_max, j_max)
    # [BM] sec. 3.4, both limits reached: T = d/v_max + v_max/a_max + a_max/j_max.
    T = abs(d) / v_max + v_max / a_max + a_max / j_max
    np.testing.assert_allclose(p.duration, T, rtol=1e-12)
    t, s, v, a, j = _check_limits_and_end(p, d, v_max, a_max, j_max)
    # The limits are reached (plateaus of finite length are hit by the grid).
    np.testing.assert_allclose([np.abs(v).max(), np.abs(a).max(), np.abs(j).max()],
                               [v_max, a_max, j_max], rtol=1e-9)


def _triple_integrator_end(p):
    """Integrate s⃛ = j(t) with SciPy from rest; returns (s, v, a) at the end."""
    sol = solve_ivp(lambda t, y: [y[1], y[2], p.sample(t).j[0]], (0.0, p.duration), [0.0, 0.0, 0.0],
                    method="RK45", rtol=1e-11, atol=1e-13, max_step=p.duration / 400)
    return sol.y[:, -1]


@pytest.mark.parametrize(
    "d, v_max, a_max, j_max, case",
    [(2.0, 0.5, 10.0, 4.0, "a_max not reached"),
     (0.5, 10.0, 1.0, 4.0, "v_max not reached"),
     (-0.01, 10.0, 1.0, 4.0, "neither reached")])
def test_s_curve_degenerate_cases(d, v_max, a_max, j_max, case):
    p = tr.s_curve(d, v_max, a_max, j_max)
    D = abs(d)
    if case == "a_max not reached":
        # [BM] sec. 3.4 (recalled from memory): T_j = sqrt(v_max/j_max), T_a = 2 T_j,
        # peak acceleration sqrt(v_max j_max); T = d/v_max + T_a.
        T = D / v_max + 2 * math.sqrt(v_max / j_max)
        a_peak = math.sqrt(v_max * j_max)
    elif case == "v_max not reached":
        # [BM] sec. 3.4 with v0 = v1 = 0 (recalled from memory): T_j = a/j,
        # T_a = (a²/j + sqrt(a⁴/j² + 4 a d)) / (2a), T = 2 T_a.
        T = 2 * (a_max**2 / j_max + math.sqrt(a_max**4 / j_max**2 + 4 * a_max * D)) / (2 * a_max)
        a_peak = a_max
    else:
        # Four equal phases of jerk ±j: d = 2 j T_j³, T = 4 T_j (constant-jerk
        # kinematics, common practice, no source); peak acceleration j T_j.
        T_j = (D / (2 * j_max)) ** (1 / 3)
        T, a_peak = 4 * T_j, j_max * T_j
    np.testing.assert_allclose(p.duration, T, rtol=1e-12)
    t, s, v, a, j = _check_limits_and_end(p, d, v_max, a_max, j_max)
    np.testing.assert_allclose(np.abs(a).max(), a_peak, rtol=1e-3)  # grid resolution
    # The distance is reached exactly: SciPy's RK45 integrating the sampled jerk
    # from rest ends at (d, 0, 0).
    np.testing.assert_allclose(_triple_integrator_end(p), [d, 0.0, 0.0], atol=1e-8 * max(1.0, D))


def test_s_curve_duration_is_continuous_where_the_cases_meet():
    a_max, j_max = 1.0, 4.0
    # At d = 2 a³/j² the "v_max not reached" and "neither" cases meet at T = 4 a/j
    # ([BM] sec. 3.4 formulas above evaluated at the boundary).
    d = 2 * a_max**3 / j_max**2
    for scale in (1 - 1e-9, 1.0, 1 + 1e-9):
        p = tr.s_curve(d * scale, 10.0, a_max, j_max)
        np.testing.assert_allclose(p.duration, 4 * a_max / j_max, rtol=1e-8)


@settings(max_examples=40, deadline=None, database=None)
@given(d=st.floats(-20, 20).filter(lambda x: abs(x) > 1e-6),
       v_max=st.floats(0.05, 5.0), a_max=st.floats(0.05, 5.0), j_max=st.floats(0.05, 50.0))
def test_s_curve_respects_limits_for_any_input(d, v_max, a_max, j_max):
    p = tr.s_curve(d, v_max, a_max, j_max)
    t, (s, v, a, j) = dense(p, 4001)
    # The problem statement itself ([BM] sec. 3.4): limits respected, distance reached.
    assert np.max(np.abs(v)) <= v_max * (1 + 1e-9)
    assert np.max(np.abs(a)) <= a_max * (1 + 1e-9)
    assert np.max(np.abs(j)) <= j_max * (1 + 1e-9)
    np.testing.assert_allclose(s[-1], d, rtol=1e-9)
    # SciPy trapezoid rule on the sampled speed: error <= T h² max|a| / 12.
    h = p.duration / 4000
    atol = p.duration * h**2 * a_max / 12 + 1e-12
    np.testing.assert_allclose(cumulative_trapezoid(v, t)[-1], d, atol=atol)


# ----------------------------------------------------------------- minimum jerk
def test_minimum_jerk_peaks():
    d, T = 0.8, 2.0
    p = tr.minimum_jerk(d, T)
    # [FH] quintic: v(T/2) = 30/16 d/T = 1.875 d/T, the peak speed.
    np.testing.assert_allclose(p.sample(T / 2).v[0], 1.875 * d / T, rtol=1e-12)
    # [FH] quintic: peak acceleration 10/sqrt(3) d/T² at τ = (3 − sqrt 3)/6.
    a_star = p.sample(T * (3 - math.sqrt(3)) / 6).a[0]
    np.testing.assert_allclose(a_star, 10 / math.sqrt(3) * d / T**2, rtol=1e-12)
    t, (s, v, a, j) = dense(p)
    np.testing.assert_allclose(v.max(), 1.875 * d / T, rtol=1e-8)
    np.testing.assert_allclose(a.max(), 10 / math.sqrt(3) * d / T**2, rtol=1e-6)
    np.testing.assert_allclose([s[0], s[-1], v[-1], a[-1]], [0.0, d, 0.0, 0.0], atol=1e-15)


def test_minimum_jerk_derivatives_match_sympy():
    d, T = -0.7, 1.3
    t_sym = sp.symbols("t")
    tau = t_sym / T
    s_expr = d * (10 * tau**3 - 15 * tau**4 + 6 * tau**5)  # [FH]
    exprs = [sp.diff(s_expr, t_sym, k) for k in range(4)]
    fns = [sp.lambdify(t_sym, e, "numpy") for e in exprs]
    t = np.linspace(0.01, T - 0.01, 37)
    got = tr.minimum_jerk(d, T).sample(t)
    for value, fn in zip(got, fns):
        np.testing.assert_allclose(value, fn(t) * np.ones_like(t), rtol=1e-11, atol=1e-13)


# -------------------------------------------------------- consistency with SciPy
PROFILES = {
    "trapezoidal": lambda: tr.trapezoidal(2.0, 0.5, 1.0),
    "trapezoidal braking": lambda: tr.trapezoidal(-1.0, 2.0, 1.0, d_max=3.0),
    "trapezoidal boundary speeds": lambda: tr.trapezoidal(5.0, 2.0, 1.0, v_start=0.5, v_end=1.0),
    "s_curve": lambda: tr.s_curve(2.0, 0.5, 1.0, 4.0),
    "s_curve short": lambda: tr.s_curve(0.01, 10.0, 1.0, 4.0),
    "minimum_jerk": lambda: tr.minimum_jerk(-0.7, 1.3),
    "velocity_change": lambda: tr.velocity_change(0.2, 1.5, 2.0),
    "velocity_change jerk": lambda: tr.velocity_change(1.5, -0.5, 2.0, j_max=5.0),
    "constant_velocity": lambda: tr.constant_velocity(0.4, 2.0),
}


@pytest.mark.parametrize("name", PROFILES)
def test_profiles_are_consistent_with_scipy_integration_and_numpy_gradient(name):
    p = PROFILES[name]()
    t, (s, v, a, j) = dense(p)
    h = t[1] - t[0]
    a_bound, j_bound = np.abs(a).max(), np.abs(j).max()
    # SciPy trapezoid rule: error <= T h² max|a| / 12 where v is smooth, and
    # h² |Δa| / 8 in a cell with an acceleration step; 1e-7 covers both here.
    np.testing.assert_allclose(cumulative_trapezoid(v, t, initial=0.0), s, atol=1e-7)
    np.testing.assert_allclose(cumulative_trapezoid(a, t, initial=0.0) + v[0], v,
                               atol=1e-7 + 2 * h * a_bound)
    # np.gradient (central differences): error <= h² max|j| / 6 where a is continuous,
    # up to h |Δa| / 2 at an acceleration step; atol = 2 h max|a| bounds both.
    np.testing.assert_allclose(np.gradient(s, t, edge_order=2), v, atol=2 * h * a_bound + 1e-12)
    if "trapezoidal" not in name and "constant" not in name and name != "velocity_change":
        # Continuous acceleration: its gradient is the jerk, up to steps of j.
        np.testing.assert_allclose(np.gradient(v, t, edge_order=2), a, atol=2 * h * j_bound + 1e-12)


def test_velocity_change_closed_forms():
    # Uniform acceleration (common practice, no source): T = |Δv|/a, distance (v0 + v1) T / 2.
    p = tr.velocity_change(1.2, 0.2, 0.5)
    np.testing.assert_allclose([p.duration, p.distance], [2.0, 0.7 * 2.0], rtol=1e-12)
    # [BM] sec. 3.4, jerk-limited ramp (recalled from memory): T = Δv/a + a/j when
    # Δv >= a²/j, else T = 2 sqrt(Δv/j).
    T_long = tr.velocity_change(0.0, 2.0, 1.0, j_max=4.0).duration
    np.testing.assert_allclose(T_long, 2.0 + 0.25, rtol=1e-12)
    T_short = tr.velocity_change(0.5, 0.4, 1.0, j_max=4.0).duration
    np.testing.assert_allclose(T_short, 2 * math.sqrt(0.1 / 4), rtol=1e-12)
    t, (s, v, a, j) = dense(tr.velocity_change(-0.5, 1.0, 1.0, j_max=4.0))
    assert np.abs(a).max() <= 1.0 + 1e-12 and np.abs(j).max() <= 4.0 + 1e-12
    np.testing.assert_allclose([v[0], v[-1]], [-0.5, 1.0], rtol=1e-12)


def test_constant_velocity_and_dwell():
    # s = v t (uniform motion).
    t = np.array([0.0, 0.5, 2.0, 3.0])
    s, v, a, j = tr.constant_velocity(-0.4, 2.0).sample(t)
    np.testing.assert_allclose(s, [0.0, -0.2, -0.8, -0.8], rtol=1e-12)
    np.testing.assert_allclose(v, -0.4, rtol=1e-12)
    p = tr.dwell(1.5)
    assert p.duration == 1.5 and p.distance == 0.0
    np.testing.assert_array_equal(np.concatenate(list(p.sample(t))), 0.0)


# ----------------------------------------------------------------- base paths
@pytest.mark.parametrize("radius", [0.7, -2.5])
def test_arc_full_circle_returns_to_start(radius):
    seg = tr.arc(tr.s_curve(2 * math.pi * abs(radius), 0.5, 1.0, 4.0), radius)
    m = seg.sample(seg.duration)
    # Geometry: a full circle closes; the heading has turned by ±2π.
    np.testing.assert_allclose([m.x[0], m.y[0]], [0.0, 0.0], atol=1e-12)
    np.testing.assert_allclose(m.theta[0], math.copysign(2 * math.pi, radius), rtol=1e-12)


@pytest.mark.parametrize("radius", [1.3, -1.3])
def test_quarter_arc_ends_at_radius_radius(radius):
    R = abs(radius)
    seg = tr.arc(tr.trapezoidal(math.pi * R / 2, 0.8, 1.0), radius)
    m = seg.sample(seg.duration)
    # Geometry: a left quarter circle of radius R ends at (R, R, π/2); a right one
    # at (R, −R, −π/2).
    side = math.copysign(1.0, radius)
    np.testing.assert_allclose([m.x[0], m.y[0], m.theta[0]], [R, side * R, side * math.pi / 2],
                               rtol=1e-12)


@pytest.mark.parametrize("make", [lambda p: tr.arc(p, -0.9), tr.line, tr.spin])
def test_segment_pose_matches_unicycle_ode(make):
    seg = make(tr.minimum_jerk(1.7, 2.0))
    t = np.linspace(0.0, seg.duration, 41)
    m = seg.sample(t)
    # Unicycle kinematics ẋ = v cos θ, ẏ = v sin θ, θ̇ = ω integrated by SciPy's DOP853.
    def rhs(ti, y):
        b = seg.sample(ti)
        return [b.v[0] * math.cos(y[2]), b.v[0] * math.sin(y[2]), b.omega[0]]
    sol = solve_ivp(rhs, (0.0, seg.duration), [0.0, 0.0, 0.0], t_eval=t, method="DOP853",
                    rtol=1e-11, atol=1e-12)
    np.testing.assert_allclose(np.vstack([m.x, m.y, m.theta]), sol.y, atol=1e-9)
    # Accelerations are the time derivatives of the rates: np.gradient (second order)
    # errs by <= h² max|s⁗| / 3 with |s⁗| <= 360 d/T⁴ for the [FH] quintic.
    t = np.linspace(0.0, seg.duration, 201)
    m = seg.sample(t)
    bound = (t[1] - t[0]) ** 2 * 360 * 1.7 / 2.0**4 / 3 * max(1.0, 1 / 0.9)
    np.testing.assert_allclose(np.gradient(m.v, t, edge_order=2), m.a, atol=bound)
    np.testing.assert_allclose(np.gradient(m.omega, t, edge_order=2), m.alpha, atol=bound)


# ------------------------------------------------------------------- arm moves
def test_joint_move_minimum_jerk():
    q0, q1, T = np.array([0.1, -0.4, 1.0]), np.array([0.5, 0.6, 1.0]), 1.6
    move = tr.joint_move(q0, q1, T)
    m = move.sample(np.array([0.0, T / 2, T, T + 1.0]))
    assert m.q.shape == m.qd.shape == m.qdd.shape == (4, 3)
    # [FH] quintic: midpoint at T/2 with peak speed 1.875 Δq/T; ends at rest on q_end.
    np.testing.assert_allclose(m.q[1], (q0 + q1) / 2, rtol=1e-12)
    np.testing.assert_allclose(m.qd[1], 1.875 * (q1 - q0) / T, rtol=1e-12)
    np.testing.assert_allclose(m.q[[0, 2, 3]], [q0, q1, q1], rtol=1e-12)
    np.testing.assert_allclose(m.qd[[0, 2, 3]], 0.0, atol=1e-15)


@pytest.mark.parametrize("profile, peak",
                         [("trapezoidal", 1.5), ("s_curve", 1.5), ("minimum_jerk", 1.875)])
def test_joint_move_shapes(profile, peak):
    q0, q1, T = np.array([0.0, 2.0]), np.array([-1.0, 2.5]), 3.0
    move = tr.joint_move(q0, q1, T, profile=profile)
    t = np.linspace(0.0, T, 6001)
    m = move.sample(t)
    # Peak speed: trapezoid accelerating for T/3 cruises at d/(T − T/3) = 1.5 d/T
    # ([BM] sec. 3.2, T = d/v + v/a); the unit S-curve is built with the same cruise
    # speed; [FH] quintic 1.875 d/T.
    np.testing.assert_allclose(np.abs(m.qd).max(axis=0), peak * np.abs(q1 - q0) / T, rtol=1e-6)
    np.testing.assert_allclose(m.q[-1], q1, rtol=1e-12)
    h = t[1] - t[0]
    # np.gradient of q against qd: error <= 2 h max|q̈|.
    np.testing.assert_allclose(np.gradient(m.q, t, axis=0, edge_order=2), m.qd,
                               atol=2 * h * np.abs(m.qdd).max())


# --------------------------------------------------------------------- timeline
def test_timeline_square_corner_and_continuity():
    a_max, dt = 1.0, 1e-3
    drive = tr.line(tr.trapezoidal(1.0, 0.5, a_max))
    turn = tr.spin(tr.s_curve(math.pi / 2, 1.0, a_max, 5.0))
    q0, q1 = np.array([0.0, 0.3]), np.array([0.8, -0.2])
    tl = tr.Timeline([(drive, None, None), (turn, tr.joint_move(q0, q1, 2.0), None),
                      (None, None, 0.5), (drive, None, None)])
    r = tl.sample(dt)
    # Geometry: 1 m forward, turn left by π/2, 1 m forward -> (1, 1, π/2).
    np.testing.assert_allclose(tl.end_pose, [1.0, 1.0, math.pi / 2], atol=1e-12)
    # The grid stops within dt of the end (the duration is no multiple of dt), at a
    # distance <= v dt from the end pose.
    assert tl.duration - dt < r.t[-1] <= tl.duration
    assert math.hypot(r.x[-1] - 1.0, r.y[-1] - 1.0) <= np.abs(r.v).max() * dt
    np.testing.assert_allclose(r.q[-1], q1, rtol=1e-12)
    np.testing.assert_allclose(r.q[0], q0, rtol=1e-12)
    # Mean value theorem: with |a| <= a_max, |Δv| <= a_max dt between samples, also
    # across the boundaries (profiles end at rest); same for ω, and for each q̇ with
    # the [FH] peak acceleration 10/sqrt(3) Δq/T².
    for rate in (r.v, r.omega):
        assert np.abs(np.diff(rate)).max() <= a_max * dt * (1 + 1e-9)
    qdd_peak = 10 / math.sqrt(3) * np.abs(q1 - q0) / 2.0**2
    assert np.all(np.abs(np.diff(r.qd, axis=0)) <= qdd_peak * dt * (1 + 1e-9))
    assert np.all(np.diff(r.segment) >= 0) and r.segment[0] == 0 and r.segment[-1] == 3
    k = np.searchsorted(r.t, tl.start_times[1]) + 1
    assert r.segment[k] == 1 and r.segment[k - 2] == 0


def test_timeline_pose_matches_unicycle_ode():
    v, a_max = 0.6, 0.8
    pieces = [
        (tr.line(tr.velocity_change(0.0, v, a_max, j_max=4.0)), None, None),
        (tr.line(tr.constant_velocity(v, 1.5)), None, None),
        (tr.line(tr.velocity_change(v, 0.0, a_max, j_max=4.0)), None, None),
        (tr.arc(tr.s_curve(1.2, v, a_max, 4.0), -0.8), None, None),
        (tr.spin(tr.minimum_jerk(-2.0, 2.0)), None, None),
    ]
    tl = tr.Timeline(pieces, base_pose=(0.3, -0.2, 0.4))
    r = tl.sample(2e-3)
    # Unicycle kinematics in the world, integrated by SciPy from the timeline's own
    # (v, ω) (linear interpolation of the samples: error ~ dt² per unit time).
    def rhs(t, y):
        vi, wi = np.interp(t, r.t, r.v), np.interp(t, r.t, r.omega)
        return [vi * math.cos(y[2]), vi * math.sin(y[2]), wi]
    sol = solve_ivp(rhs, (0.0, r.t[-1]), [0.3, -0.2, 0.4], t_eval=r.t[::50], rtol=1e-10,
                    atol=1e-12, max_step=0.01)
    np.testing.assert_allclose(np.vstack([r.x, r.y, r.theta])[:, ::50], sol.y, atol=2e-5)


def test_timeline_rejects_steps_and_jumps():
    cruise = tr.line(tr.constant_velocity(0.5, 1.0))
    step = r"pieces\[1\]: base \(v, ω\) starts at \[0. 0.\] but pieces\[0\] ends at \[0.5 0. \]"
    with pytest.raises(ValueError, match=step):
        tr.Timeline([(cruise, None, None), (None, None, 1.0)])
    jump = r"pieces\[1\]: arm move starts at q = \[1.\] but the arm is at \[0.5\]"
    with pytest.raises(ValueError, match=jump):
        tr.Timeline([(None, tr.joint_move([0.0], [0.5], 1.0), None),
                     (None, tr.joint_move([1.0], [0.0], 1.0), None)])
    with pytest.raises(ValueError, match=r"does not end at rest"):
        tr.Timeline([(cruise, None, 2.0)])


# -------------------------------------------------------------------- bad input
@pytest.mark.parametrize("call, pattern", [
    (lambda: tr.trapezoidal(1.0, 1.0, -2.0), r"`a_max` must be a finite number > 0 .*got -2.0"),
    (lambda: tr.trapezoidal(1.0, 1.0, 2.0, d_max=0.0), r"`d_max` must be .*> 0 .*got 0.0"),
    (lambda: tr.s_curve(1.0, 1.0, 1.0, 0.0), r"`j_max` must be a finite number > 0 .*got 0.0"),
    (lambda: tr.s_curve(1.0, -1.0, 1.0, 1.0), r"`v_max` must be .*> 0 .*got -1.0"),
    (lambda: tr.trapezoidal(math.inf, 1.0, 1.0), r"`distance` must be a finite number .*got inf"),
    (lambda: tr.s_curve(math.nan, 1.0, 1.0, 1.0), r"`distance` must be a finite number .*got nan"),
    (lambda: tr.trapezoidal("far", 1.0, 1.0), r"`distance` must be a real number .*got 'far'"),
    (lambda: tr.minimum_jerk(1.0, 0.0), r"`duration` must be a finite number > 0 \(s\), got 0.0"),
    (lambda: tr.velocity_change(0.0, 1.0, 1.0, j_max=-1.0), r"`j_max` .* got -1.0"),
    (lambda: tr.dwell(-1.0), r"`duration` must be a finite number >= 0 \(s\), got -1.0"),
    (lambda: tr.arc(tr.dwell(1.0), 0.0), r"`radius` must be non-zero"),
    (lambda: tr.joint_move([0.0, 0.0], [1.0], 1.0), r"`q_end` must have shape \(2,\), got \(1,\)"),
    (lambda: tr.joint_move([0.0], [1.0], 1.0, profile="cubic"), r"`profile` must be .*got 'cubic'"),
    (lambda: tr.Timeline([(None, None, 1.0)]).sample(0.0),
     r"`dt` must be a finite number > 0 \(s\), got 0.0"),
    (lambda: tr.trapezoidal(1.0, 1.0, 1.0).sample([0.0, math.nan]), r"`t` has non-finite entries"),
])
def test_bad_input_names_parameter_value_and_expectation(call, pattern):
    # STYLE.md sec. 4: messages name the parameter, the value and what is expected.
    with pytest.raises(ValueError, match=pattern):
        call()
