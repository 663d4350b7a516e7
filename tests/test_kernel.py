"""The compiled kernel (opspace/_kernel.cpp) against the NumPy reference loop.

The kernel computes the same equations as `opspace.simulate` (the plant and its
RK4 / Euler steps) and `OperationalSpaceController._command_numpy`; these tests
hold the two implementations to round-off on random states.  The physics of
both is checked against outside references in test_simulate.py and
test_control.py, which run each check on both loops.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

import opspace
from opspace import _compiled
from opspace.control import BasePlan, OperationalSpaceController, Target
from opspace.description import load_scenario
from opspace.simulation import ScenarioRun, simulate
from opspace.dynamics import compiled_plant
from opspace.simulation._loop import _Plant, _rk4
from conftest import DEMO, random_state

needs_kernel = pytest.mark.skipif(not _compiled.available(),
                                  reason="the compiled kernel is not built")


def test_kernel_is_built_where_required():
    # CI installs with OPSPACE_REQUIRE_KERNEL=1: there the kernel must import and
    # match the Pinocchio in use; elsewhere the NumPy loop is a valid fallback.
    if os.environ.get("OPSPACE_REQUIRE_KERNEL") != "1":
        pytest.skip("OPSPACE_REQUIRE_KERNEL is not set")
    assert _compiled.available()


def close(a, b, rtol=1e-11):
    """|a − b| within rtol of the larger magnitude of the two (round-off)."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    scale = max(np.abs(a).max(initial=0.0), np.abs(b).max(initial=0.0), 1.0)
    np.testing.assert_allclose(a, b, rtol=0, atol=rtol * scale)


# ------------------------------------------------------------------ the plant
@needs_kernel
@pytest.mark.parametrize("integrator", ["rk4", "euler"])
@pytest.mark.parametrize("friction", [True, False])
@pytest.mark.parametrize("locked", [None, "wheels"])
def test_plant_step_equals_numpy(demo, rng, integrator, friction, locked):
    lock = np.zeros(demo.nv, bool)
    if locked == "wheels":
        lock[:2] = True
    kernel = compiled_plant(demo, lock, friction)
    plant = _Plant(demo, lock, friction)
    h, S = 1e-3, demo.S
    for _ in range(5):
        q, nu = random_state(demo, rng)
        nu[lock] = 0.0
        Q = rng.normal(size=demo.nv) * 20.0
        Q[lock] = 0.0
        qk, nuk = q.copy(), nu.copy()
        a1 = plant.begin(q, nu, Q)           # stops and stuck set: q, ν may change in place
        if integrator == "rk4":
            q_ref, nu_ref = _rk4(demo.model, plant, (S * h / 2, S * h, S * h / 6), q, nu, a1, Q, h)
        else:
            nu_ref = nu + h * a1
            q_ref = opspace.model.pin.integrate(demo.model, q, S.dot(nu_ref) * h)
        out = np.empty(demo.nv)
        step = kernel.rk4 if integrator == "rk4" else kernel.euler
        assert step(demo.model, plant.data, qk, nuk, Q, h, out) == 0
        close(out, a1)
        close(qk, q_ref, 1e-13)
        close(nuk, nu_ref)
        assert np.all(nuk[lock] == 0.0)


@needs_kernel
def test_plant_with_a_payload_equals_numpy(demo, rng):
    # the kernel reads the model's inertias at every call: a pick seen at once
    with demo.kept():
        demo.attach_payload(demo.description.payload)
        lock = np.zeros(demo.nv, bool)
        kernel, plant = compiled_plant(demo, lock, True), _Plant(demo, lock, True)
        q, nu = random_state(demo, rng)
        Q = rng.normal(size=demo.nv)
        out = np.empty(demo.nv)
        assert kernel.accel(demo.model, plant.data, q.copy(), nu.copy(), Q, out) == 0
        close(out, plant.begin(q, nu, Q))


@needs_kernel
def test_plant_reports_a_mass_matrix_that_is_not_positive_definite(demo):
    # a zero-inertia coordinate makes M singular: the kernel returns 1 (not PD)
    with demo.kept():
        lock = np.zeros(demo.nv, bool)
        kernel = compiled_plant(demo, lock, False)
        model = demo.model
        saved = model.inertias[model.njoints - 1], model.armature.copy()
        try:
            model.inertias[model.njoints - 1] = opspace.model.pin.Inertia.Zero()
            model.armature[:] = 0.0
            q = demo.configuration(arm="carry")
            out = np.empty(demo.nv)
            assert kernel.accel(model, model.createData(), q, np.zeros(demo.nv),
                                np.zeros(demo.nv), out) == 1
        finally:
            model.inertias[model.njoints - 1] = saved[0]
            model.armature[:] = saved[1]


# ------------------------------------------------------------------ the controller
CASES = [  # (mode, axes, posture, friction feed-forward, friction velocity)
    ("whole_body", "full", "carry", False, 0.0),
    ("whole_body", "linear", None, True, 0.0),
    ("arm_only", "full", "carry", True, 0.02),
    ("arm_only", "linear", "carry", False, 0.0),
    ("arm_only", ("x", "z", "rz"), None, True, 0.05),
]


@needs_kernel
@pytest.mark.parametrize("mode, axes, posture, ff, vs", CASES)
def test_command_equals_numpy(demo, rng, mode, axes, posture, ff, vs):
    kw = dict(mode=mode, axes=axes, posture=posture, friction_feedforward=ff,
              friction_velocity=vs, wheel_gain=7.0)
    fast = OperationalSpaceController(demo, compiled=True, **kw)
    ref = OperationalSpaceController(demo, compiled=False, **kw)
    for _ in range(6):
        q, nu = random_state(demo, rng, scale=0.5)
        X = demo.frame_placement(q, demo.tool_frame_id)
        R = X.rotation @ opspace.model.pin.rpy.rpyToMatrix(*rng.normal(scale=0.2, size=3))
        target = Target(X.translation + rng.normal(scale=0.05, size=3), R,
                        rng.normal(size=6) * 0.2, rng.normal(size=6))
        plan = BasePlan(*rng.normal(size=4) * 0.3)
        Q = fast.command(q, nu, target, base=plan)
        Q_ref = ref.command(q, nu, target, base=plan)
        close(Q, Q_ref, 1e-10)
        a, b = fast.info, ref.info
        for name in ("Q_demand", "error", "velocity_error", "a_star", "F"):
            close(getattr(a, name), getattr(b, name), 1e-10)
        assert a.saturated.tolist() == b.saturated.tolist() and a.damped == b.damped
        close(fast.last_demand()[1], ref.last_demand()[1], 1e-10)
        a_s = fast.fast_command(q, nu, target, plan)
        b_s = ref.fast_command(q, nu, target, plan)
        close(a_s.M, b_s.M)
        close(a_s.h, b_s.h)


@needs_kernel
def test_command_near_a_singularity_hands_over_to_the_damped_path(demo):
    # the kernel does not certify the task inertia near a singular pose: the NumPy
    # path (which owns the damped inverse) takes the call, with the same result
    q = demo.configuration(arm="reach_forward")
    target = Target.hold(demo, q)
    nu = np.zeros(demo.nv)
    fast = OperationalSpaceController(demo, mode="arm_only", posture="carry", compiled=True)
    ref = OperationalSpaceController(demo, mode="arm_only", posture="carry", compiled=False)
    np.testing.assert_array_equal(fast.command(q, nu, target), ref.command(q, nu, target))
    assert fast.info.damped and ref.info.damped


@needs_kernel
def test_command_returns_its_own_array(demo, rng):
    # the public command copies out of the kernel's buffer: earlier results stay
    ctrl = OperationalSpaceController(demo, posture="carry", compiled=True)
    q, nu = random_state(demo, rng)
    target = Target.hold(demo, q)
    Q1 = ctrl.command(q, nu, target)
    kept = Q1.copy()
    ctrl.command(q, 2 * nu, target)
    np.testing.assert_array_equal(Q1, kept)


def test_compiled_must_be_none_true_or_false(demo):
    with pytest.raises(ValueError, match="`compiled` must be None, True or False"):
        OperationalSpaceController(demo, compiled="yes")
    with pytest.raises(ValueError, match="`compiled` must be None, True or False"):
        simulate(demo, None, duration=0.01, q0=demo.configuration(), compiled=1.0)


def test_compiled_true_without_the_kernel_is_refused(demo, monkeypatch):
    monkeypatch.setattr(_compiled, "available", lambda: False)
    monkeypatch.setattr(_compiled, "kernel_plant", lambda *a: None)
    with pytest.raises(RuntimeError, match="not available"):
        OperationalSpaceController(demo, compiled=True)
    with pytest.raises(RuntimeError, match="not available"):
        simulate(demo, None, duration=0.01, q0=demo.configuration(), compiled=True)


# ------------------------------------------------------------------ a whole run
@needs_kernel
def test_demo_run_without_friction_equals_numpy():
    # without the Coulomb terms the closed loop is smooth, so the two loops stay
    # within round-off of each other over the whole pick (with them, a velocity
    # crossing zero can turn a 1e-15 difference into a different sign of f_C)
    sc = load_scenario(DEMO.with_name("pick.toml"))
    sc = type(sc)(**{**sc.__dict__, "friction": False,
                     "controller": {**sc.controller, "friction_feedforward": False}})
    a = ScenarioRun(sc, compiled=True).run(stability=False)
    b = ScenarioRun(sc, compiled=False).run(stability=False)
    assert a.status == b.status == "completed"
    assert (a.summary()["loop"], b.summary()["loop"]) == ("compiled", "numpy")
    close(a.q, b.q, 1e-9)
    close(a.Q, b.Q, 1e-8)
    # the tool poses: one compiled call (a) against Pinocchio's Python loop (b)
    close(a.tool_position, b.tool_position, 1e-9)
    close(a.tool_rotation, b.tool_rotation, 1e-9)
    assert a.position_error.max() < 5e-3
    # no friction, perfect model: the task rows obey ë + K_d ė + K_p e = 0 from
    # e = ė = 0 (Khatib 1987), so the orientation error stays at round-off and
    # discretisation level (the controller is sampled at 1 kHz)
    assert a.summary()["tool_orientation_error"]["peak"]["value"] < 1e-3



@needs_kernel
def test_demo_run_with_stick_slip_equals_numpy():
    # The headline check: with the stick-slip friction (the decisions taken
    # at step starts, directions frozen within a step) the compiled and NumPy loops
    # give the same summary figures (tracking error RMS and peak, efforts, margins)
    # within 1 % -- here within 1e-6, the round-off of the two loops' sums
    from opspace.simulation import compare_runs
    sc = load_scenario(DEMO.with_name("pick.toml"))
    a = ScenarioRun(sc, compiled=True).run()
    b = ScenarioRun(sc, compiled=False).run()
    assert a.status == b.status == "completed"
    agreement = compare_runs(a, b)
    assert agreement.passed and agreement.worst[4] < 1e-6, agreement.worst
    close(a.q, b.q, 1e-8)
    assert a.summary()["plant_friction"] and a.summary()["friction_feedforward"]
    assert (a.nu[:, 2:] == 0).mean() > 0.05          # the arm joints did stick at times


@needs_kernel
def test_a_kernel_built_for_another_pinocchio_is_not_used(monkeypatch):
    # the binary interface may differ between Pinocchio versions: a version
    # mismatch falls back to the NumPy loop, with a warning saying why
    monkeypatch.setattr(opspace.model.pin, "__version__", "0.0.0")
    _compiled._module.cache_clear()
    try:
        with pytest.warns(RuntimeWarning, match="built for Pinocchio"):
            assert not _compiled.available()
    finally:
        monkeypatch.undo()
        _compiled._module.cache_clear()
    assert _compiled.available()


@needs_kernel
def test_hold_and_record_options_on_both_loops(demo):
    # a controller sampled every 2 steps (zero-order hold) and every 5th step
    # kept: both loops agree, the held effort is constant over its period, and
    # the thinned record is the full one taken every 5th step
    q0 = demo.configuration(arm="carry")
    nu0 = np.array([1.0, 0.8, 0.02, 0.2, 0.1, -0.1, 0.2, 0.1, 0.3])
    g0 = opspace.joint_space(demo, q0, np.zeros(demo.nv)).g

    amp = np.array([1.5, 1.2, 40.0, 6.0, 25.0, 12.0, 3.0, 2.0, 0.5])

    def control(t, q, nu):
        return g0 + amp * np.sin(2 * np.pi * 5.0 * t), None

    kw = dict(duration=0.2, q0=q0, nu0=nu0, dt=1e-3, control_period=2e-3, friction=False,
              stability=False)
    a = simulate(demo, control, compiled=True, **kw)
    b = simulate(demo, control, compiled=False, **kw)
    close(a.q, b.q, 1e-12)
    close(a.nu, b.nu, 1e-11)
    np.testing.assert_array_equal(a.Q[0:-1:2], a.Q[1::2])
    assert not np.array_equal(a.Q[0], a.Q[2])
    c = simulate(demo, control, compiled=True, record_every=5, **kw)
    np.testing.assert_allclose(c.t, np.arange(41) * 5e-3, rtol=0, atol=1e-12)
    np.testing.assert_array_equal(c.q, a.q[::5])
    np.testing.assert_array_equal(c.nu_dot, a.nu_dot[::5])
    with pytest.raises(ValueError, match="record_every"):
        simulate(demo, control, record_every=0, **kw)


@needs_kernel
def test_a_continuous_joint_and_a_prismatic_joint_on_both_loops(tmp_path):
    # an arm unlike the demo's: a continuous joint (two configuration entries,
    # cos and sin) after a prismatic one; the kernel integrates on the manifold
    # with Pinocchio as the NumPy loop does, and the controller (posture on a
    # continuous joint: the NumPy command) drives both plants alike
    from conftest import make_robot, urdf, urdf_joint, urdf_link
    arm = urdf(
        urdf_link("root"),
        urdf_joint("slide", "prismatic", "root", "carriage", axis=(0, 0, 1), lower=0.0,
                   upper=0.5, effort=400.0, damping=2.0),
        urdf_link("carriage", 3.0, (0, 0, 0.05), (0.02, 0.02, 0.02, 0, 0, 0)),
        urdf_joint("spin", "continuous", "carriage", "link", xyz=(0, 0, 0.1), axis=(0, 0, 1),
                   effort=50.0, friction=0.3),
        urdf_link("link", 1.2, (0.2, 0, 0), (0.004, 0.02, 0.02, 0, 0, 0)),
        urdf_joint("tool_joint", "fixed", "link", "tool", xyz=(0.35, 0, 0)),
        urdf_link("tool"))
    robot = make_robot(tmp_path, arm)
    assert robot.model.nq == robot.model.nv + 2          # planar root + continuous joint
    q0 = robot.configuration(arm=[0.2, 0.5])
    X0 = robot.frame_placement(q0, robot.tool_frame_id)
    runs = []
    for compiled in (True, False):
        ctrl = OperationalSpaceController(robot, axes=("x", "z"), mode="arm_only",
                                          posture=[0.2, 0.5], compiled=None)
        assert ctrl._kernel is None                    # continuous joint under a posture

        def control(t, q, nu):
            target = Target(X0.translation + [0.1 * t, 0.0, 0.05 * t], None, [0.1, 0, 0.05])
            return ctrl.command(q, nu, target, base=BasePlan(0.1)), ctrl.info

        runs.append(simulate(robot, control, duration=0.5, q0=q0, dt=1e-3, friction=False,
                             stability=False, compiled=compiled))
    a, b = runs
    assert a.extra["loop"] == "compiled" and b.extra["loop"] == "numpy"
    close(a.q, b.q, 1e-9)
    # the task rows (x, z) are tracked; the tool's y is free here
    assert np.abs(a.error).max() < 5e-3
    assert np.ptp(a.q[:, 0]) > 0.03 and np.ptp(a.q[:, 6]) > 0.02     # base and slide moved


@needs_kernel
def test_inverse_dynamics_equals_numpy(demo, rng):
    # opspace.inverse_dynamics makes one compiled call for Sᵀ RNEA(q, S ν, S ν̇):
    # the same as the NumPy products (the outside checks of inverse dynamics are
    # in test_joint_space.py and test_properties.py)
    pin, S = opspace.model.pin, demo.S
    with demo.kept():
        for payload in (None, demo.description.payload):
            if payload is not None:
                demo.attach_payload(payload)
            for _ in range(4):
                q, nu = random_state(demo, rng)
                nu_dot = rng.normal(size=demo.nv)
                ref = demo.St.dot(pin.rnea(demo.model, demo.model.createData(), q, S.dot(nu),
                                           S.dot(nu_dot)))
                close(opspace.inverse_dynamics(demo, q, nu, nu_dot, with_friction=False), ref,
                      1e-12)


@pytest.mark.parametrize("which", ["q", "nu", "nu_dot"])
def test_inverse_dynamics_names_a_non_finite_input(demo, which):
    # the compiled call checks finiteness itself; the message still names the input
    args = {"q": demo.configuration(), "nu": np.zeros(demo.nv), "nu_dot": np.zeros(demo.nv)}
    args[which] = args[which].copy()
    args[which][-1] = np.nan
    with pytest.raises(ValueError, match=f"`{which}` has non-finite entries"):
        opspace.inverse_dynamics(demo, args["q"], args["nu"], args["nu_dot"])
