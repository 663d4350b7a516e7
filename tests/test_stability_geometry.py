"""Geometric / static part of opspace.stability, each check against an outside reference."""

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import solve_ivp
from scipy.optimize import brentq, minimize
from scipy.spatial import ConvexHull

from opspace import stability as st

g = 9.80665  # standard gravity, m/s² (CGPM 1901 conventional value)


def newton_euler_wrench(m, c, a):
    """Ground reaction on a rigid body of mass m, COM c (n, 3), COM acceleration a (n, 3),
    no angular momentum change: f = m (a − g_vec), n_O = c × f (Newton–Euler about O)."""
    f = m * (np.asarray(a, float) + np.array([0.0, 0.0, g]))
    return f, np.cross(c, f)


# --------------------------------------------------------------------------- ZMP

def test_zmp_of_static_point_mass_is_its_ground_projection():
    rng = np.random.default_rng(1)
    m = rng.uniform(1.0, 80.0, (50, 1))
    c = rng.uniform([-0.5, -0.5, 0.1], [0.5, 0.5, 1.5], (50, 3))
    f, n = newton_euler_wrench(m, c, np.zeros((50, 3)))
    # Statics: a body at rest has its ground reaction on the vertical through the COM,
    # so the centre of pressure is the COM's ground projection (Sardain & Bessonnet,
    # IEEE Trans. SMC-A 34(5), 2004, static case).  Same on any horizontal plane.
    np.testing.assert_allclose(st.zmp(f, n), c[:, :2], rtol=0, atol=1e-12)
    np.testing.assert_allclose(st.zmp(f, n, height=0.3), c[:, :2], rtol=0, atol=1e-12)
    p = st.zmp(f[0], n[0])
    assert p.shape == (2,)


def test_zmp_of_accelerating_point_mass_follows_cart_table_model():
    rng = np.random.default_rng(2)
    c = rng.uniform([-0.3, -0.3, 0.2], [0.3, 0.3, 1.2], (20, 3))
    a = np.column_stack([rng.uniform(-3, 3, (20, 2)), np.zeros(20)])
    f, n = newton_euler_wrench(12.0, c, a)
    height = 0.05
    # Cart-table model, p = x − (z_c / g) ẍ (Kajita et al., "Biped walking pattern
    # generation by using preview control of zero-moment point", ICRA 2003; recalled
    # from memory), with z_c measured from the plane of the ZMP.
    expected = c[:, :2] - ((c[:, 2:] - height) / g) * a[:, :2]
    np.testing.assert_allclose(st.zmp(f, n, height=height), expected, rtol=0, atol=1e-12)


def test_zmp_formula_matches_sympy_solution_of_vanishing_horizontal_moment():
    # Independent derivation with sympy: find p = (px, py, h) where the horizontal
    # components of n − p × f vanish (definition of the CoP, Sardain & Bessonnet 2004).
    px, py, h = sp.symbols("p_x p_y h", real=True)
    fs = sp.Matrix(sp.symbols("f_x f_y f_z", real=True))
    ns = sp.Matrix(sp.symbols("n_x n_y n_z", real=True))
    n_p = ns - sp.Matrix([px, py, h]).cross(fs)
    sol = sp.solve([n_p[0], n_p[1]], [px, py], dict=True)[0]
    rng = np.random.default_rng(3)
    f = np.column_stack([rng.uniform(-50, 50, (10, 2)), rng.uniform(10, 500, 10)])
    n = rng.uniform(-40, 40, (10, 3))
    got = st.zmp(f, n, height=0.12)
    for fi, ni, gi in zip(f, n, got):
        subs = {**dict(zip(fs, fi)), **dict(zip(ns, ni)), h: 0.12}
        ref = [float(sol[px].subs(subs)), float(sol[py].subs(subs))]
        np.testing.assert_allclose(gi, ref, rtol=1e-12, atol=1e-12)


def test_zmp_airborne_raises_or_returns_nan():
    f = np.array([[0.0, 0.0, 100.0], [0.0, 0.0, 0.0], [1.0, 0.0, -5.0]])
    n = np.zeros((3, 3))
    with pytest.raises(ValueError, match=r"airborne.*\[1, 2\]|\[1, 2\].*airborne"):
        st.zmp(f, n)
    p = st.zmp(f, n, airborne="nan")
    assert np.all(np.isfinite(p[0])) and np.all(np.isnan(p[1:]))


# --------------------------------------------------------------------------- loads

def test_longitudinal_load_transfer_matches_gillespie():
    m, l_r, l_f, w, h = 60.0, 0.20, 0.30, 0.22, 0.50
    L = l_r + l_f
    contacts = np.array([[-l_r, -w], [-l_r, w], [l_f, -w], [l_f, w]])
    a_x = np.array([-2.0, -1.0, 0.0, 0.7, 2.0])           # forward acceleration, m/s²
    c = np.column_stack([np.zeros(5), np.zeros(5), np.full(5, h)])
    f, n = newton_euler_wrench(m, c, np.column_stack([a_x, np.zeros(5), np.zeros(5)]))
    loads = st.normal_loads(contacts, st.zmp(f, n), f[:, 2])
    assert loads.N.shape == (5, 4) and np.all(loads.supported) and not loads.lifted.any()
    # Gillespie, Fundamentals of Vehicle Dynamics (1992), ch. 2 (recalled), axle loads under
    # acceleration: W_f = m (g l_r − a h) / L, W_r = m (g l_f + a h) / L.
    W_f = m * (g * l_r - a_x * h) / L
    W_r = m * (g * l_f + a_x * h) / L
    np.testing.assert_allclose(loads.N[:, 2:].sum(axis=1), W_f, rtol=1e-12)
    np.testing.assert_allclose(loads.N[:, :2].sum(axis=1), W_r, rtol=1e-12)
    # Symmetric in y: each axle load splits equally (mirror symmetry of the statics).
    np.testing.assert_allclose(loads.N[:, 2], loads.N[:, 3], rtol=1e-12)
    np.testing.assert_allclose(loads.N[:, 0], loads.N[:, 1], rtol=1e-12)


def test_three_contacts_tricycle_lever_rule():
    w, l, f_z = 0.25, 0.40, 500.0
    contacts = np.array([[0.0, -w], [0.0, w], [l, 0.0]])     # right, left drive wheel; caster
    cop = np.array([[0.10, 0.0], [0.30, 0.0], [0.12, 0.05], [0.05, -0.10]])
    loads = st.normal_loads(contacts, cop, f_z)
    x, y = cop.T
    # Lever rule (statics): moments about the wheel axle give the caster load, moments
    # about the x axis split the rest between the wheels.
    N_caster = f_z * x / l
    N_left = 0.5 * (f_z * (1 - x / l) + f_z * y / w)
    N_right = 0.5 * (f_z * (1 - x / l) - f_z * y / w)
    np.testing.assert_allclose(loads.N, np.column_stack([N_right, N_left, N_caster]),
                               rtol=1e-12, atol=1e-9)
    assert "determinate" in loads.model


def test_four_contacts_equal_stiffness_plane_model():
    a, b, f_z = 0.30, 0.20, 800.0
    contacts = np.array([[-a, -b], [a, -b], [a, b], [-a, b]])
    centre = st.normal_loads(contacts, [0.0, 0.0], f_z)
    # Symmetry (statics): the COP at the centre of a rectangle loads all four equally.
    np.testing.assert_allclose(centre.N, np.full(4, f_z / 4), rtol=1e-12)
    assert centre.N.shape == (4,) and "equal vertical stiffness" in centre.model

    e_x = np.linspace(-0.14, 0.14, 9)                      # stays inside the no-lift region
    cop = np.column_stack([e_x, np.zeros_like(e_x)])
    loads = st.normal_loads(contacts, cop, f_z)
    # Rigid-cap pile-group formula, N_i = F/k + F e_x x_i / Σ x_j² (e.g. Bowles,
    # Foundation Analysis and Design, 1996; recalled from memory): linear in e_x.
    pile = f_z / 4 + f_z * e_x[:, None] * contacts[:, 0] / np.sum(contacts[:, 0] ** 2)
    np.testing.assert_allclose(loads.N, pile, rtol=1e-12)
    np.testing.assert_allclose(np.diff(loads.N, n=2, axis=0), 0.0, atol=1e-9)
    # Minimum-norm solution of the equilibrium equations by LAPACK (numpy.linalg.lstsq
    # returns the minimum-norm solution of an underdetermined system).
    A = np.vstack([np.ones(4), contacts.T])
    for ci, Ni in zip(cop, loads.N):
        ref = np.linalg.lstsq(A, f_z * np.array([1.0, *ci]), rcond=None)[0]
        np.testing.assert_allclose(Ni, ref, rtol=1e-12)


def test_irregular_five_contacts_without_lift_off_is_minimum_norm():
    contacts = np.array([[0.0, -0.24], [0.0, 0.24], [0.32, 0.18], [0.32, -0.16], [-0.28, 0.02]])
    rng = np.random.default_rng(4)
    cop = rng.uniform(-0.03, 0.08, (30, 2))
    f_z = rng.uniform(200.0, 900.0, 30)
    loads = st.normal_loads(contacts, cop, f_z)
    assert not loads.lifted.any()
    A = np.vstack([np.ones(5), contacts.T])
    # numpy.linalg.lstsq: minimum-norm least-squares solution (LAPACK gelsd).
    ref = np.array([np.linalg.lstsq(A, fz * np.array([1.0, *c]), rcond=None)[0]
                    for c, fz in zip(cop, f_z)])
    np.testing.assert_allclose(loads.N, ref, rtol=1e-11, atol=1e-9)


def test_lift_off_near_a_corner_drops_the_opposite_contact():
    a, b, f_z = 0.30, 0.20, 800.0
    contacts = np.array([[-a, -b], [a, -b], [a, b], [-a, b]])
    cop = np.array([0.8 * a, 0.8 * b])
    A = np.vstack([np.ones(4), contacts.T])
    rhs = f_z * np.array([1.0, *cop])
    raw = np.linalg.lstsq(A, rhs, rcond=None)[0]            # bilateral plane model
    assert raw[0] < 0.0                                      # the opposite corner would pull
    loads = st.normal_loads(contacts, cop, f_z)
    assert loads.lifted.tolist() == [True, False, False, False]
    assert loads.N[0] == 0.0
    # Equilibrium (statics) with the remaining three contacts, and those three are the
    # statically determinate solution (numpy.linalg.solve of the 3 × 3 system).
    np.testing.assert_allclose(A @ loads.N, rhs, rtol=1e-12)
    np.testing.assert_allclose(loads.N[1:], np.linalg.solve(A[:, 1:], rhs), rtol=1e-12)


def test_unilateral_loads_match_scipy_slsqp_on_random_layouts():
    rng = np.random.default_rng(5)
    n_lifted = 0
    for _ in range(40):
        k = int(rng.integers(4, 7))
        contacts = rng.uniform([-0.4, -0.3], [0.4, 0.3], (k, 2))
        cop = rng.dirichlet(np.full(k, 0.3)) @ contacts      # a point of the hull
        f_z = rng.uniform(50.0, 900.0)
        loads = st.normal_loads(contacts, cop, f_z)
        A = np.vstack([np.ones(k), contacts.T])
        rhs = np.array([1.0, *cop])
        # Independent solver for min ‖N‖² s.t. A N = f_z [1, c], N ≥ 0 (scipy SLSQP),
        # in loads scaled by f_z.
        res = minimize(lambda x: x @ x, np.full(k, 1.0 / k), jac=lambda x: 2 * x,
                       method="SLSQP", bounds=[(0.0, None)] * k,
                       constraints=[{"type": "eq", "fun": lambda x: A @ x - rhs,
                                     "jac": lambda x: A}],
                       options={"ftol": 1e-15, "maxiter": 500})
        assert res.success, res.message
        np.testing.assert_allclose(loads.N / f_z, res.x, rtol=0, atol=1e-7)
        np.testing.assert_allclose(A @ loads.N, f_z * rhs, rtol=1e-10, atol=1e-9 * f_z)
        n_lifted += bool(loads.lifted.any())
    assert n_lifted >= 5                                     # the lift-off path was exercised


def test_batch_equals_single_instants_and_outside_cop_is_unsupported():
    contacts = np.array([[0.0, -0.24], [0.0, 0.24], [0.32, 0.18], [0.32, -0.18]])
    cop = np.array([[0.1, 0.0], [0.3, 0.15], [0.5, 0.0], [0.0, 0.24]])
    f_z = np.array([400.0, 300.0, 350.0, 200.0])
    batch = st.normal_loads(contacts, cop, f_z)
    for i in range(4):
        one = st.normal_loads(contacts, cop[i], f_z[i])
        np.testing.assert_array_equal(batch.lifted[i], one.lifted)
        np.testing.assert_allclose(batch.N[i], one.N, rtol=1e-12, equal_nan=True)
    # (0.5, 0) lies ahead of the caster line x = 0.32: no N >= 0 satisfies the moment
    # balance (statics), so the robot tips there.
    assert batch.supported.tolist() == [True, True, False, True]
    assert np.all(np.isnan(batch.N[2])) and not batch.lifted[2].any()
    # A COP on a contact point loads that contact alone (statics).
    np.testing.assert_allclose(batch.N[3], [0.0, 200.0, 0.0, 0.0], atol=1e-9)


# --------------------------------------------------------------------------- polygon

def test_unit_square_margin_by_hand_geometry():
    poly = st.support_polygon([[0, 0], [1, 0], [1, 1], [0, 1], [0.5, 0.5], [0.5, 0.0]])
    # Hand geometry: interior and edge-midpoint contacts are not corners; shoelace area
    # of the counter-clockwise unit square is +1.
    assert poly.vertices.shape == (4, 2) and poly.area == pytest.approx(1.0, abs=1e-15)
    d, i = poly.margin([0.25, 0.5])
    assert d == pytest.approx(0.25, abs=1e-15)
    np.testing.assert_array_equal(poly.edges[i][:, 0], [0.0, 0.0])   # the left edge x = 0
    d, i = poly.margin(np.array([[-0.5, 0.5], [2.0, 2.0], [0.5, 0.9], [1.0, 0.3]]))
    # Outside: distance to the left edge, then to the corner (1, 1): −√2; inside: 0.1 to
    # the top; on the boundary: 0.
    np.testing.assert_allclose(d, [-0.5, -np.sqrt(2.0), 0.1, 0.0], rtol=0, atol=1e-15)
    assert i.shape == (4,)


def test_margin_inside_random_polygon_matches_qhull_facet_equations():
    rng = np.random.default_rng(6)
    pts = rng.uniform(-0.5, 0.5, (12, 2))
    poly = st.support_polygon(pts)
    hull = ConvexHull(pts)
    # Qhull (scipy.spatial.ConvexHull.equations) gives unit outward normals and offsets:
    # inside, the distance to the boundary is min over facets of −(n·p + c).
    q = rng.uniform(-0.5, 0.5, (200, 2))
    plane = q @ hull.equations[:, :2].T + hull.equations[:, 2]
    inside = np.all(plane < 0, axis=1)
    d, _ = poly.margin(q)
    np.testing.assert_allclose(d[inside], np.min(-plane[inside], axis=1), rtol=0, atol=1e-12)
    assert np.all(d[~inside] < 0)
    assert inside.sum() > 20


def test_collinear_contacts_give_a_segment_without_margin():
    poly = st.support_polygon([[0.0, -0.2], [0.0, 0.2], [0.0, 0.1]])
    assert poly.is_segment and poly.area == 0.0
    np.testing.assert_allclose(sorted(poly.vertices[:, 1]), [-0.2, 0.2])
    with pytest.raises(ValueError, match="segment"):
        poly.margin([0.0, 0.0])


# --------------------------------------------------------------------------- margins

def test_tip_angle_matches_statics_of_a_box_on_a_ramp():
    for d, h in [(0.2, 0.5), (0.3, 0.3), (0.25, 0.9)]:
        # Statics of a box (common practice, no source): gravity's moment about the
        # downhill edge, m g (d cos θ − h sin θ), changes sign at the tip angle.
        theta = brentq(lambda t: d * np.cos(t) - h * np.sin(t), 0.0, np.pi / 2, xtol=1e-15)
        assert st.tip_angle(d, h) == pytest.approx(theta, abs=1e-12)
        # At that slope the ZMP of the static ground reaction, written in the tilted
        # base frame (f = m g (−sin θ, 0, cos θ)), reaches the edge.
        x_G = 0.05
        f = 30.0 * g * np.array([-np.sin(theta), 0.0, np.cos(theta)])
        p = st.zmp(f, np.cross([x_G, 0.0, h], f))
        assert p[0] == pytest.approx(x_G + d, abs=1e-12)
    np.testing.assert_allclose(st.tip_angle([0.1, -0.1], 0.1), [np.pi / 4, -np.pi / 4])


def test_traction_use_is_coulomb_ratio():
    u = st.traction_use([30.0, -30.0, 5.0, 0.0], [100.0, 100.0, 0.0, -1.0], 0.6)
    # Coulomb friction |F_t| <= μ N (common practice, no source).
    np.testing.assert_allclose(u[:2], [0.5, 0.5], rtol=1e-15)
    assert np.all(np.isinf(u[2:]))
    assert st.traction_use(10.0, 50.0, 0.5) == pytest.approx(0.4, rel=1e-15)


def test_stopping_tip_limit_puts_zmp_on_front_edge_and_stop_kinematics():
    h, x_G, x_front, m = 0.55, 0.05, 0.32, 70.0
    lim = st.stopping_limits(h, x_front - x_G, 0.9, 0.8, 1.5)
    # Quasi-static tip-over, a/g = d/h (Gillespie 1992, ch. 9, recalled: rollover threshold t/(2h)
    # with d = t/2): braking at a_tip puts the ZMP on the front edge.
    f, n = newton_euler_wrench(m, [x_G, 0.0, h], [-lim.a_tip, 0.0, 0.0])
    assert st.zmp(f, n)[0] == pytest.approx(x_front, abs=1e-12)
    assert lim.a_trac == pytest.approx(0.9 * g * 0.8, rel=1e-15)   # μ g ρ (eq. 5a)
    assert lim.limited_by == "tip-over" and lim.a_stop == lim.a_tip
    # Uniform deceleration, integrated by scipy solve_ivp until v = 0.
    stop = lambda t, y: y[1]
    stop.terminal = True
    sol = solve_ivp(lambda t, y: [y[1], -lim.a_stop], (0, 10), [0.0, 1.5], events=stop,
                    rtol=1e-12, atol=1e-12)
    assert lim.t_stop == pytest.approx(sol.t_events[0][0], rel=1e-9)
    assert lim.s_stop == pytest.approx(sol.y_events[0][0][0], rel=1e-9)


@pytest.mark.parametrize("L, x_G, mu", [(0.40, 0.16, 0.5), (-0.35, -0.25, 0.3)])
def test_stopping_traction_limit_with_load_transfer(L, x_G, mu):
    m, h, half_track = 50.0, 0.45, 0.24                    # COM between the contact lines
    rho = (L - x_G) / L                                    # static drive-wheel fraction
    d = max(L, 0.0) - x_G                                  # COM to the front contact line
    lim = st.stopping_limits(h, d, mu, rho, 1.0, caster_offset=L)
    assert lim.limited_by == "traction"                    # loads below exist (no tip-over)
    # Gillespie (1992), ch. 2-3 (recalled), traction-limited braking with one braked axle, in his
    # notation: F_x = μ W (b/L) / (1 + μ h/L), b = distance COM to the unbraked axle.
    W, b = m * g, L - x_G
    assert m * lim.a_trac == pytest.approx(mu * W * (b / L) / (1 + mu * h / L), rel=1e-12)
    # Newton–Euler wrench at that deceleration, loads from the contact model: the braked
    # drive wheels use exactly their friction, μ N_d = m a (Coulomb).
    contacts = np.array([[0, -half_track], [0, half_track], [L, -0.15], [L, 0.15]])
    f, n = newton_euler_wrench(m, [x_G, 0.0, h], [-lim.a_trac, 0.0, 0.0])
    N = st.normal_loads(contacts, st.zmp(f, n), f[2]).N
    assert st.traction_use(m * lim.a_trac, N[0] + N[1], mu) == pytest.approx(1.0, rel=1e-12)


def test_stopping_traction_never_limits_when_load_transfer_outpaces_it():
    lim = st.stopping_limits(0.6, 0.2, 0.8, 0.9, 2.0, caster_offset=-0.3)
    # 1 + μ h / L = 1 − 0.8·0.6/0.3 < 0: N_d grows faster than the braking force.
    assert lim.a_trac == np.inf and lim.limited_by == "tip-over"


# --------------------------------------------------------------------------- bad input

square = [[0, 0], [1, 0], [1, 1], [0, 1]]


@pytest.mark.parametrize("call, name", [
    (lambda: st.traction_use(1.0, 10.0, 0.0), "mu"),
    (lambda: st.traction_use(1.0, 10.0, -0.3), "mu"),
    (lambda: st.stopping_limits(0.5, 0.2, 0.0, 0.7, 1.0), "mu"),
    (lambda: st.support_polygon([[0.0, 0.0]]), "contacts_xy"),
    (lambda: st.normal_loads([[0.0, 0.0]], [0.0, 0.0], 10.0), "contacts_xy"),
    (lambda: st.support_polygon([[0.1, 0.2], [0.1, 0.2]]), "contacts_xy"),
    (lambda: st.support_polygon([[0, 0], [1, np.nan], [0, 1]]), "contacts_xy"),
    (lambda: st.normal_loads(square, [np.inf, 0.5], 10.0), "cop_xy"),
    (lambda: st.normal_loads(square, [0.5, 0.5], np.nan), "f_z"),
    (lambda: st.normal_loads(square, [0.5, 0.5], 0.0), "f_z"),
    (lambda: st.normal_loads(square, [[0.5, 0.5]] * 3, [1.0, 2.0]), "cop_xy"),
    (lambda: st.zmp([0.0, 0.0, np.nan], [0.0, 0.0, 0.0]), "force"),
    (lambda: st.zmp([0.0, 0.0, 1.0], [np.inf, 0.0, 0.0]), "moment"),
    (lambda: st.zmp([0.0, 0.0, 1.0], [0.0, 0.0]), "moment"),
    (lambda: st.support_polygon(square).margin([np.nan, 0.0]), "p"),
    (lambda: st.traction_use(np.inf, 10.0, 0.5), "f_tangential"),
    (lambda: st.tip_angle(np.nan, 0.5), "polygon_edge_distance"),
    (lambda: st.tip_angle(0.2, 0.0), "com_height"),
    (lambda: st.stopping_limits(0.5, 0.2, 0.6, 1.2, 1.0), "drive_load_fraction"),
    (lambda: st.stopping_limits(0.5, np.inf, 0.6, 0.5, 1.0), "edge_distance"),
    (lambda: st.stopping_limits(0.5, 0.2, 0.6, 0.5, 1.0, caster_offset=0.0), "caster_offset"),
])
def test_bad_input_raises_value_error_naming_the_argument(call, name):
    with pytest.raises(ValueError, match=f"`{name}`"):
        call()
