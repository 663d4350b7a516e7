"""Drive figures and candidate checks against hand formulas and closed forms;
the motor-and-gearbox catalogue and its bad input."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import sympy as sp

import opspace
from opspace.description import Gearbox, Motor, load_catalogue
from opspace.sizing import (Criterion, WheelDuty, check_candidate, cycle_energy, cycle_rms,
                            drive_figures, evaluate_catalogue, motor_torque, sweep_ratios)
from conftest import REPO, write_toml

DEMO_CATALOGUE = REPO / "models" / "marmot" / "drives.toml"
SQRT_EPS = math.sqrt(2.2e-16)  # the constant of SciPy's bounded scalar minimiser


def piecewise(t, edges, values):
    """Right-continuous piecewise-constant signal: values[i] on [edges[i], edges[i+1])."""
    i = np.clip(np.searchsorted(edges, t, side="right") - 1, 0, len(values) - 1)
    return np.asarray(values, dtype=float)[i]


def phases(durations, accelerations, v0, per_phase=200):
    """Constant-acceleration phases, each sampled on its closed interval (the
    instants between phases appear twice, so the trapezoid rule is exact per
    phase).  Returns t, φ̇, φ̈ (rad/s, rad/s²)."""
    ts, vs, accs = [], [], []
    t0, v = 0.0, v0
    for T, a in zip(durations, accelerations):
        tau = np.linspace(0.0, T, per_phase)
        ts.append(t0 + tau)
        vs.append(v + a * tau)
        accs.append(np.full(per_phase, float(a)))
        t0, v = t0 + T, v + a * T
    return np.concatenate(ts), np.concatenate(vs), np.concatenate(accs)


def motor(**kw):
    data = dict(name="test motor", rated_torque=1.0, peak_torque=3.0, no_load_speed=500.0,
                rated_speed=400.0, rotor_inertia=5e-5, max_speed=500.0)
    data.update(kw)
    return Motor(**data)


def gearbox(**kw):
    data = dict(name="test gearbox", ratios=(10.0, 20.0, 25.0, 30.0, 40.0), efficiency=1.0)
    data.update(kw)
    return Gearbox(**data)


# --------------------------------------------------------------------------- RMS

def test_rms_of_piecewise_constant_cycle():
    # RMS of a piecewise-constant cycle: sqrt(Σ T_i² t_i / Σ t_i) (common practice,
    # no source).  Sampled on a uniform grid of step dt with jumps between grid
    # points, the trapezoid rule errs by at most |T_a² − T_b²| dt / 2 per jump
    # (one interval mixes the two levels), so |RMS − RMS_ref| <= Σ that / (T_c RMS_ref).
    T = np.array([12.0, -3.0, 0.0, 25.0, 5.0])
    d = np.array([0.7013, 2.3, 1.1071, 0.35, 4.0])
    edges = np.concatenate([[0.0], np.cumsum(d)])
    T_c, dt = edges[-1], 1e-3
    t = np.append(np.arange(0.0, T_c, dt), T_c)
    x = piecewise(t, edges, T)
    ref = math.sqrt(np.sum(T**2 * d) / np.sum(d))
    tol = np.sum(np.abs(np.diff(T**2))) * dt / 2 / (T_c * ref)
    assert abs(cycle_rms(t, x) - ref) <= tol
    # the same through the drive figures with G = η = 1 and no rotor (T_m = τ_out);
    # thermal RMS with n cycles per hour and zero torque parked: the RMS over the
    # hour sqrt(n Σ T_i² t_i / 3600) (definition, common practice).
    n = 150.0
    duty = WheelDuty(t=t, torque=x, speed=np.ones_like(x), acceleration=np.zeros_like(x),
                     cycles_per_hour=n)
    fig = drive_figures(duty, gear_ratio=1.0, efficiency=1.0, inertia=0.0)
    assert abs(fig.rms_torque - ref) <= tol
    ref_hour = math.sqrt(n * np.sum(T**2 * d) / 3600.0)
    assert abs(fig.thermal_rms_torque - ref_hour) <= tol * math.sqrt(n * T_c / 3600.0)
    assert abs(fig.duty_factor - n * T_c / 3600.0) < 1e-15


def test_cycles_per_hour_that_do_not_fit():
    t = np.linspace(0.0, 10.0, 11)
    with pytest.raises(ValueError, match=r"duty D = n T_c / 3600 = 1.111 > 1"):
        WheelDuty(t=t, torque=t, speed=t, acceleration=t, cycles_per_hour=400.0)


# --------------------------------------------------------------------------- ratio optimum

def inertial_duty(J_L, durations, accelerations, v0):
    t, phi_dot, phi_ddot = phases(durations, accelerations, v0)
    return WheelDuty(t=t, torque=J_L * phi_ddot, speed=phi_dot, acceleration=phi_ddot)


def fminbound_tol(x, xatol):
    # SciPy's bounded search stops when |x − x_m| <= 2 tol1 − (b − a)/2 with
    # tol1 = sqrt(eps) |x| + xatol / 3, the minimiser being in [a, b]; hence
    # |x − x*| <= 2 tol1 (scipy.optimize._optimize._minimize_scalar_bounded).
    return 2.0 * (SQRT_EPS * abs(x) + xatol / 3.0)


def test_rms_optimal_ratio_pure_inertia_is_inertia_matching():
    # Pure inertial load J_L with η = 1: T_m = J_m G φ̈ + J_L φ̈ / G = (J_m G + J_L / G) φ̈,
    # so RMS(T_m) = |J_m G + J_L / G| RMS(φ̈) and dT/dG = J_m − J_L / G² = 0 at
    # G* = sqrt(J_L / J_m) (reflected-inertia matching; common practice, no source).
    J_L, J_m, xatol = 0.2, 5e-5, 1e-6
    duty = inertial_duty(J_L, [0.8, 2.0, 0.8, 1.0], [20.0, 0.0, -20.0, 0.0], v0=0.0)
    sw = sweep_ratios(duty, motor(rotor_inertia=J_m, max_speed=1e9), gearbox(ratios=(20.0, 150.0)),
                      load_inertia=J_L, xatol=xatol)
    G_star = math.sqrt(J_L / J_m)
    assert abs(sw.rms_optimal_ratio - G_star) <= fminbound_tol(G_star, xatol)
    assert not sw.rms_optimum_at_bound
    np.testing.assert_allclose(sw.inertia_matching_ratio, G_star, rtol=1e-15)


def test_rms_optimal_ratio_with_losses_when_every_sample_drives():
    # Every sample drives (φ̇ > 0, φ̈ >= 0): T_m = (J_m G + J_L / (η G)) φ̈, so
    # d/dG = J_m − J_L / (η G²) = 0 at G* = sqrt(J_L / (η J_m)) (derived as above).
    J_L, J_m, eta, xatol = 0.2, 5e-5, 0.8, 1e-6
    duty = inertial_duty(J_L, [1.0, 0.5, 1.0], [10.0, 0.0, 4.0], v0=2.0)
    sw = sweep_ratios(duty, motor(rotor_inertia=J_m, max_speed=1e9),
                      gearbox(ratios=(20.0, 150.0), efficiency=eta), xatol=xatol)
    G_star = math.sqrt(J_L / (eta * J_m))
    assert abs(sw.rms_optimal_ratio - G_star) <= fminbound_tol(G_star, xatol)


def test_rms_optimal_ratio_with_losses_accelerating_and_braking():
    # Equal ∫φ̈² dt driving (accelerating) and back-driven (braking), φ̇ > 0 throughout:
    # T_c RMS² ∝ (J_m G + J_L/(η G))² + (J_m G + J_L η / G)².  Setting the derivative
    # to zero, 2 J_m² G = (J_L²/η² + J_L² η²) / G³, i.e.
    # G*⁴ = J_L² (η⁻² + η²) / (2 J_m²)  (derived here; the root is checked with sympy).
    J_L, J_m, eta, xatol = 0.2, 5e-5, 0.7, 1e-6
    G, jl, jm, e = sp.symbols("G J_L J_m eta", positive=True)
    f = (jm * G + jl / (e * G))**2 + (jm * G + jl * e / G)**2
    vals = {jl: J_L, jm: J_m, e: eta}
    G_sympy = float(sp.nsolve(sp.diff(f, G).subs(vals), G, 60.0))
    G_star = (J_L**2 * (eta**-2 + eta**2) / (2 * J_m**2))**0.25
    np.testing.assert_allclose(G_sympy, G_star, rtol=1e-12)
    duty = inertial_duty(J_L, [0.6, 1.5, 0.6], [15.0, 0.0, -15.0], v0=3.0)
    sw = sweep_ratios(duty, motor(rotor_inertia=J_m, max_speed=1e9),
                      gearbox(ratios=(20.0, 150.0), efficiency=eta), xatol=xatol)
    assert abs(sw.rms_optimal_ratio - G_star) <= fminbound_tol(G_star, xatol)


# --------------------------------------------------------------------------- efficiency, power

@pytest.mark.parametrize("tau,phi_dot", [(5.0, 10.0), (-5.0, -10.0), (-5.0, 10.0), (5.0, -10.0)])
def test_efficiency_energy_balance_at_constant_speed(tau, phi_dot):
    # Definition of efficiency (energy balance, common practice): driving, the wheel
    # receives P_out = η P_in of the motor's power; back-driven, the motor receives
    # P_in = η P_out of the wheel's power.  Constant speed: the rotor adds nothing.
    G, eta, J_m = 24.0, 0.85, 3e-5
    T_m = motor_torque(tau, phi_dot, 0.0, gear_ratio=G, efficiency=eta, inertia=J_m)
    P_motor, P_wheel = float(T_m) * G * phi_dot, tau * phi_dot
    if tau * phi_dot > 0:
        np.testing.assert_allclose(P_wheel, eta * P_motor, rtol=1e-14)
    else:
        np.testing.assert_allclose(-P_motor, eta * -P_wheel, rtol=1e-14)


def test_copper_loss_and_energy_of_a_dc_motor():
    # DC motor at constant torque (Ohm's and Joule's laws): I = T / k_t,
    # V = R I + k_e ω with k_e = k_t in SI units, P_e = V I = T ω + I² R.
    # Hand computation: T = ±0.5 N·m, ω = 300 rad/s, k_t = 0.05 N·m/A, R = 0.4 Ω:
    # motoring I = 10 A, V = 4 + 15 = 19 V, P_e = 190 W; generating I = −10 A,
    # V = −4 + 15 = 11 V, P_e = −110 W.  One second each: E = 190 J, ρ = 110/190.
    k_t, R = 0.05, 0.4
    t = np.array([0.0, 0.5, 1.0, 1.0, 1.5, 2.0])
    T = np.array([0.5, 0.5, 0.5, -0.5, -0.5, -0.5])
    omega = np.full(6, 300.0)
    duty = WheelDuty(t=t, torque=T, speed=omega, acceleration=np.zeros(6))
    fig = drive_figures(duty, gear_ratio=1.0, efficiency=1.0, inertia=0.0,
                        torque_constant=k_t, resistance=R)
    np.testing.assert_allclose(fig.current, [10, 10, 10, -10, -10, -10], rtol=1e-14)
    np.testing.assert_allclose(fig.electrical_power, [190, 190, 190, -110, -110, -110], rtol=1e-14)
    assert fig.power_basis == "electrical"
    np.testing.assert_allclose(fig.energy, 190.0, rtol=1e-14)
    np.testing.assert_allclose(fig.regenerated_share, 110.0 / 190.0, rtol=1e-14)
    # without electrical data the mechanical power is used: ±150 W, ρ = 1
    E, rho = cycle_energy(t, fig.power)
    np.testing.assert_allclose([E, rho], [150.0, 1.0], rtol=1e-14)


def test_regenerated_share_of_an_inertial_run():
    # Work-energy theorem: accelerating J_L from rest to φ̇₁ through a gearbox of
    # efficiency η draws (J_m G² + J_L / η) φ̇₁² / 2; braking back to rest returns
    # (J_m G² + J_L η) φ̇₁² / 2 (both from (2) with P = T_m ω_m).  Power is linear
    # in t on each phase, so the trapezoid rule is exact.
    J_L, J_m, G, eta, v1 = 0.15, 4e-5, 20.0, 0.8, 12.0
    t, phi_dot, phi_ddot = phases([1.0, 1.0], [v1, -v1], v0=0.0)
    duty = WheelDuty(t=t, torque=J_L * phi_ddot, speed=phi_dot, acceleration=phi_ddot)
    fig = drive_figures(duty, gear_ratio=G, efficiency=eta, inertia=J_m)
    drawn = (J_m * G**2 + J_L / eta) * v1**2 / 2
    back = (J_m * G**2 + J_L * eta) * v1**2 / 2
    np.testing.assert_allclose(fig.energy, drawn, rtol=1e-12)
    np.testing.assert_allclose(fig.regenerated_share, back / drawn, rtol=1e-12)


# --------------------------------------------------------------------------- envelope

def dc_motor(V=24.0, k_t=0.04, R=0.3, T_rated=0.8, T_peak=2.5):
    """Catalogue data of a DC motor from its steady-state equations V = R I + k_t ω,
    T = k_t I (e.g. Hughes & Drury, Electric Motors and Drives, 2013, ch. 3; recalled
    from memory): ω_0 = V / k_t and the rated speed at T_rated on the same line."""
    line = lambda w: k_t * (V - k_t * w) / R  # noqa: E731
    w0 = V / k_t
    w_r = (V - T_rated * R / k_t) / k_t
    return motor(rated_torque=T_rated, peak_torque=T_peak, no_load_speed=w0, rated_speed=w_r,
                 max_speed=w0, rotor_inertia=1e-5), line


def constant_point(omega, T):
    t = np.linspace(0.0, 1.0, 5)
    return WheelDuty(t=t, torque=np.full(5, T), speed=np.full(5, omega),
                     acceleration=np.zeros(5))


def test_point_on_the_speed_torque_line_has_zero_margin():
    m, line = dc_motor()
    w = 520.0                       # between the rated and the no-load speed
    g = gearbox(ratios=(1.0,))
    on = check_candidate(constant_point(w, line(w)), m, g, 1.0).criterion("torque-speed envelope")
    np.testing.assert_allclose(on.margin, 0.0, atol=1e-12)
    np.testing.assert_allclose(on.limit, line(w), rtol=1e-12)
    above = check_candidate(constant_point(w, 1.001 * line(w)), m, g, 1.0)
    assert above.failed == ("torque-speed envelope",)
    np.testing.assert_allclose(above.criterion("torque-speed envelope").margin, -1e-3, rtol=1e-9)
    inside = check_candidate(constant_point(w, 0.999 * line(w)), m, g, 1.0)
    assert inside.passed


def test_beyond_no_load_speed_fails_speed_and_envelope():
    m, _ = dc_motor()
    c = check_candidate(constant_point(1.01 * m.no_load_speed, 0.01), m, gearbox(), 1.0)
    assert set(c.failed) == {"speed", "torque-speed envelope"}
    assert c.criterion("torque-speed envelope").margin == -math.inf


def test_explicit_envelope_replaces_the_default():
    # A polyline envelope [[0, 3], [300, 3], [400, 1]]: linear interpolation
    # between points, 0 beyond the last (module docstring).
    m = motor(torque_speed=((0.0, 3.0), (300.0, 3.0), (400.0, 1.0)))
    np.testing.assert_allclose(m.envelope([-100.0, 350.0, 400.0, 401.0]), [3.0, 2.0, 1.0, 0.0])
    c = check_candidate(constant_point(350.0, 2.2), m, gearbox(), 1.0)
    assert c.failed == ("RMS torque", "torque-speed envelope")


# --------------------------------------------------------------------------- candidates

def climb_duty(tau=40.0, speed=10.0):
    """5 s at constant wheel speed and torque τ (a climb), then 20 s parked."""
    t = np.array([0.0, 5.0, 5.0, 25.0])
    return WheelDuty(t=t, torque=np.array([tau, tau, 0.0, 0.0]),
                     speed=np.array([speed, speed, 0.0, 0.0]), acceleration=np.zeros(4))


def test_too_small_motor_fails_peak_torque():
    # Constant speed, so T_m = τ_out / (G η) (hand formula, common practice); with the
    # service factor s the required peak is s τ / (G η) against the motor's peak.
    small = motor(name="small", rated_torque=0.10, peak_torque=0.30, no_load_speed=700.0,
                  rated_speed=610.0, max_speed=700.0)
    large = motor(name="large", rated_torque=2.0, peak_torque=6.0, no_load_speed=450.0,
                  rated_speed=400.0, max_speed=450.0)
    pl2 = gearbox(name="planetary", ratios=(12.0, 16.0, 20.0, 25.0, 32.0, 40.0), efficiency=0.9,
                  rated_torque=20.0, peak_torque=45.0, max_input_speed=650.0)
    s, tau = 1.25, 40.0
    for G in pl2.ratios:
        c = check_candidate(climb_duty(tau), small, pl2, G, service_factor=s)
        assert "peak torque" in c.failed and "RMS torque" in c.failed
        need = s * tau / (G * pl2.efficiency)
        np.testing.assert_allclose(c.criterion("peak torque").value, need, rtol=1e-14)
        np.testing.assert_allclose(c.criterion("peak torque").margin, 1 - need / small.peak_torque,
                                   rtol=1e-14)
    # the largest motor carries it (s τ/(G η) = 2.78 N·m < 6 N·m peak); the gearbox
    # peak 45 N·m < s τ = 50 N·m does not
    c = check_candidate(climb_duty(tau), large, pl2, 20.0, service_factor=s)
    assert c.failed == ("gearbox peak torque", "gearbox rated torque")


def test_pass_interval_matches_the_closed_form():
    # Constant τ = 20 N·m at φ̇ = 15 rad/s, D = 1, η = 0.9, no acceleration.  By hand:
    # RMS: τ/(G η) <= T_r  ->  G >= τ/(η T_r);  speed: 15 G <= ω_max;
    # envelope: τ/(G η) <= T_r (ω_0 − 15 G)/(ω_0 − ω_r), i.e.
    # 15 T_r G² − T_r ω_0 G + τ (ω_0 − ω_r)/η <= 0, between the roots of the quadratic.
    tau, w, eta = 20.0, 15.0, 0.9
    m = motor(rated_torque=1.0, peak_torque=3.0, no_load_speed=500.0, rated_speed=400.0,
              max_speed=500.0)
    g = gearbox(efficiency=eta)
    t = np.linspace(0.0, 10.0, 11)
    duty = WheelDuty(t=t, torque=np.full(11, tau), speed=np.full(11, w),
                     acceleration=np.zeros(11))
    a, b, c = w * m.rated_torque, -m.rated_torque * m.no_load_speed, tau * 100.0 / eta
    roots = np.sort(np.roots([a, b, c]))
    lo = max(tau / (eta * m.rated_torque), tau / (eta * m.peak_torque), roots[0])
    hi = min(m.max_speed / w, roots[1])
    xatol = 1e-6
    sw = sweep_ratios(duty, m, g, xatol=xatol)
    assert sw.passing_ratios == (25.0,)
    assert len(sw.pass_intervals) == 1
    np.testing.assert_allclose(sw.pass_intervals[0], [lo, hi], atol=xatol)
    assert all(check_candidate(duty, m, g, G).passed for G in sw.pass_intervals[0])


def test_extra_criterion_rows_join_the_verdict():
    # A failing drive-independent row (traction use 1.2 > 1) fails every ratio.
    traction = Criterion.at_most("traction", 1.2, 1.0, "1", note="right wheel")
    assert traction.margin == pytest.approx(-0.2, rel=1e-14) and not traction.passed
    m, g = motor(), gearbox(efficiency=0.9)
    duty = climb_duty(tau=10.0, speed=5.0)
    assert sweep_ratios(duty, m, g).passing_ratios
    sw = sweep_ratios(duty, m, g, extra=[traction])
    assert sw.passing_ratios == () and sw.pass_intervals == ()
    assert all(c.failed == ("traction",) for c in sw.checks)


def test_demo_catalogue_and_json_figures():
    cat = load_catalogue(DEMO_CATALOGUE)
    assert "fictitious" in cat.name and "not any vendor's data" in cat.name
    assert 4 <= len(cat.motors) <= 5 and len(cat.gearboxes) == 2
    n = 3000
    t = np.linspace(0.0, 30.0, n)
    phi_dot = np.column_stack([18.75 * np.sin(t / 3), 15.0 * np.sin(t / 3)])
    phi_ddot = np.column_stack([6.25 * np.cos(t / 3), 5.0 * np.cos(t / 3)])
    duty = WheelDuty(t=t, torque=0.2 * phi_ddot + 1.0, speed=phi_dot, acceleration=phi_ddot,
                     cycles_per_hour=60.0, wheels=("right", "left"))
    sweeps = evaluate_catalogue(duty, cat, load_inertia=0.2)
    assert len(sweeps) == len(cat.motors) * len(cat.gearboxes)
    doc = json.loads(json.dumps([s.to_dict() for s in sweeps], allow_nan=True))

    def units(node):
        if isinstance(node, dict):
            if "value" in node and not isinstance(node["value"], dict):
                assert isinstance(node.get("unit"), str)
            for v in node.values():
                units(v)
        elif isinstance(node, list):
            for v in node:
                units(v)
    units(doc)


# --------------------------------------------------------------------------- bad input

def catalogue_doc():
    return {
        "catalogue": {"name": "test catalogue (fictitious)"},
        "motor": [
            {"name": "M-30", "rated_torque": 0.3, "peak_torque": 0.9, "no_load_speed": 600.0,
             "rated_speed": 500.0, "rotor_inertia": 1e-5},
            {"name": "M-90", "rated_torque": 0.9, "peak_torque": 2.7, "no_load_speed": 420.0,
             "rated_speed": 330.0, "rotor_inertia": 2.4e-5, "torque_constant": 0.08,
             "resistance": 0.4, "torque_speed": [[0.0, 2.7], [200.0, 2.7], [420.0, 0.0]]},
        ],
        "gearbox": [{"name": "G-1", "ratios": [12.0, 16.0, 24.0], "efficiency": 0.9,
                     "rated_torque": 40.0, "peak_torque": 80.0}],
    }


def write_catalogue(tmp_path, edit=None):
    doc = catalogue_doc()
    if edit:
        edit(doc)
    return write_toml(tmp_path / "drives.toml", doc)


def test_valid_catalogue_loads(tmp_path):
    cat = load_catalogue(write_catalogue(tmp_path))
    assert [m.name for m in cat.motors] == ["M-30", "M-90"]
    assert cat.motor("M-90").torque_speed[1] == (200.0, 2.7)
    assert cat.motor("M-30").max_speed == 600.0 and cat.gearbox("G-1").inertia == 0.0


def test_catalogue_missing_field(tmp_path):
    with pytest.raises(opspace.ConfigError,
                       match=r"^drives\.toml: \[\[motor\]\] 2 'M-90' rated_torque is missing$"):
        load_catalogue(write_catalogue(tmp_path, lambda d: d["motor"][1].pop("rated_torque")))


def _set(kind, i, key, value):
    def edit(doc):
        doc[kind][i][key] = value
    return edit


@pytest.mark.parametrize("edit,pattern", [
    (_set("motor", 0, "rotor_inertia", 0.0),
     r"\[\[motor\]\] 1 'M-30' rotor_inertia must be > 0 kg·m², got 0"),
    (_set("motor", 1, "peak_torque", -2.7),
     r"\[\[motor\]\] 2 'M-90' peak_torque must be > 0 N·m, got -2.7"),
    (_set("motor", 1, "rated_torque", 3.1),
     r"\[\[motor\]\] 2 'M-90' rated_torque must be <= peak_torque \(2.7 N·m\), got 3.1"),
    (_set("motor", 0, "rated_speed", 600.0),
     r"\[\[motor\]\] 1 'M-30' rated_speed must be < no_load_speed \(600 rad/s\), got 600"),
    (_set("gearbox", 0, "ratios", []),
     r"\[\[gearbox\]\] 1 'G-1' ratios must be a non-empty list"),
    (_set("gearbox", 0, "ratios", [12.0, -16.0]),
     r"\[\[gearbox\]\] 1 'G-1' ratios entry 2 must be a finite number > 0, got -16"),
    (_set("gearbox", 0, "ratios", [12.0, 16.0, 12.0]),
     r"\[\[gearbox\]\] 1 'G-1' ratios lists 12 more than once"),
    (_set("gearbox", 0, "efficiency", 1.1),
     r"\[\[gearbox\]\] 1 'G-1' efficiency must be <= 1, got 1.1"),
    (_set("gearbox", 0, "rated_torque", 90.0),
     r"\[\[gearbox\]\] 1 'G-1' rated_torque must be <= peak_torque \(80 N·m\), got 90"),
    (_set("motor", 1, "torque_speed", [[0.0, 2.7], [300.0, 2.0], [200.0, 1.0]]),
     r"\[\[motor\]\] 2 'M-90' torque_speed speeds must increase strictly, got 200 rad/s "
     r"at point 3 after 300 rad/s at point 2"),
    (_set("motor", 1, "torque_speed", [[0.0, 2.0], [300.0, 2.5]]),
     r"\[\[motor\]\] 2 'M-90' torque_speed torques must not increase with speed"),
    (_set("motor", 1, "torque_speed", [[0.0, 3.0], [300.0, 2.5]]),
     r"\[\[motor\]\] 2 'M-90' torque_speed point 1 torque 3 N·m must be <= peak_torque"),
    (_set("motor", 0, "resistance", 0.5),
     r"\[\[motor\]\] 1 'M-30' resistance needs torque_constant"),
    (_set("motor", 1, "name", "M-30"),
     r"\[\[motor\]\] 2 'M-30' name duplicates \[\[motor\]\] 1"),
    (_set("motor", 0, "rated_torqe", 0.3),
     r"\[\[motor\]\] 1 'M-30' rated_torqe is not a known key"),
    (lambda d: d.pop("gearbox"), r"no \[\[gearbox\]\] entry"),
])
def test_catalogue_bad_values(tmp_path, edit, pattern):
    with pytest.raises(opspace.ConfigError, match=r"^drives\.toml: " + pattern):
        load_catalogue(write_catalogue(tmp_path, edit))
