"""Prototype an operational-space controller on the demo rover before the hardware exists.

The tool holds a fixed pose in the world while the base drives forward along a
left-hand arc and stops.  Two ways of doing it are simulated and compared:

- arm only: the wheels follow the base plan with a wheel-velocity servo, and the
  arm's task-space controller carries the coupling of the base's acceleration;
- whole body: the wheels take part in the 6-D tool task, and the base plan is
  followed in the task's null space.

The plant is the reduced model itself (rigid bodies, wheel and joint friction,
rolling resistance), stepped with fixed-step RK4 on the configuration manifold
(`pinocchio.integrate`, four sub-steps per control period) while the controller
runs at 1 kHz with a zero-order hold (a digital controller).  The friction
feed-forward smooths the Coulomb sign (tanh, 0.01 rad/s): fed forward with the
sign of a velocity sampled near zero, it pushes the wrong way half the time and
the light wrist turns that into a limit cycle of several degrees.  What error
remains is the Coulomb dead band of a PD law without integral action.
Printed: tracking errors, peak efforts against the limits.  Saved: the tool's
effective mass at three arm poses, and the tracking over time.

    python examples/osc_prototype.py [--quick] [--out DIR]
"""

from __future__ import annotations

import argparse
import math
import time
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pinocchio as pin  # noqa: E402

import opspace  # noqa: E402
from opspace import trajectory  # noqa: E402
from opspace.control import BasePlan, Gains, OperationalSpaceController, Target  # noqa: E402
from opspace.dynamics import effective_mass, inertia_ellipsoid  # noqa: E402

DEMO = Path(__file__).resolve().parent.parent / "models" / "marmot" / "robot.toml"
START_POSE = "carry"
ELLIPSOID_POSES = ("stowed", "carry", "reach_forward")
STIFFNESS = 900.0   # 1/s², every task row (ω_n = 30 rad/s, ζ = 1)
MASS_CLIP = 200.0   # kg: larger (and infinite) effective masses are drawn at this value


# ------------------------------------------------------------------ scenario
def base_timeline():
    """Drive 0.30 m along an arc of radius 1.2 m (turning left, 14°), S-curve
    profile from rest to rest, then stand still for 1 s."""
    profile = trajectory.s_curve(0.30, v_max=0.25, a_max=0.6, j_max=4.0)
    return trajectory.Timeline([trajectory.Piece(base=trajectory.arc(profile, 1.2)),
                                trajectory.Piece(duration=1.0)])


def rk4_step(robot, q, nu, Q, dt):
    """One RK4 step of M ν̇ + c + g + f = Q with Q held over the step; the
    configuration is stepped on the manifold (pinocchio.integrate)."""
    model, S = robot.model, robot.S
    fd = opspace.forward_dynamics
    k1 = fd(robot, q, nu, Q)
    n2 = nu + 0.5 * dt * k1
    k2 = fd(robot, pin.integrate(model, q, S.dot(nu) * 0.5 * dt), n2, Q)
    n3 = nu + 0.5 * dt * k2
    k3 = fd(robot, pin.integrate(model, q, S.dot(n2) * 0.5 * dt), n3, Q)
    n4 = nu + dt * k3
    k4 = fd(robot, pin.integrate(model, q, S.dot(n3) * dt), n4, Q)
    q = pin.integrate(model, q, S.dot(nu + 2 * n2 + 2 * n3 + n4) * dt / 6)
    return q, nu + dt / 6 * (k1 + 2 * k2 + 2 * k3 + k4)


def simulate(robot, mode, plan, dt, substeps=4):
    """Closed loop of one controller mode (Q held over `substeps` RK4 steps of the
    plant per control period dt); returns a dict of time series."""
    q = robot.configuration(arm=START_POSE)
    nu = np.zeros(robot.nv)
    target = Target.hold(robot, q)
    ctl = OperationalSpaceController(
        robot, mode=mode, posture=START_POSE, friction_feedforward=True, friction_velocity=0.01,
        gains=Gains.from_stiffness(STIFFNESS, 1.0, size=6), wheel_gain=15.0)
    n = len(plan.t)
    out = {k: np.zeros((n, w)) for k, w in (("error", 6), ("Q", robot.nv), ("nu", robot.nv),
                                            ("pose", 3))}
    out["saturated"] = np.zeros((n, robot.nv), dtype=bool)
    t0 = time.perf_counter()
    for i in range(n):
        Q = ctl.command(q, nu, target, base=BasePlan.from_timeline(plan, i))
        info = ctl.info
        out["error"][i], out["Q"][i], out["saturated"][i] = info.error, Q, info.saturated
        out["nu"][i], out["pose"][i] = nu, robot.base_pose(q)
        for _ in range(substeps):
            q, nu = rk4_step(robot, q, nu, Q, dt / substeps)
    out["wall"] = time.perf_counter() - t0
    return out


# ------------------------------------------------------------------ reporting
def summary(robot, name, res, dt):
    e_pos = np.linalg.norm(res["error"][:, :3], axis=1)
    e_rot = np.linalg.norm(res["error"][:, 3:], axis=1)
    peak = np.abs(res["Q"]).max(axis=0)
    lim = robot.effort_limit
    print(f"\n{name}: tool position error max {1e3 * e_pos.max():.2f} mm, "
          f"RMS {1e3 * math.sqrt(np.mean(e_pos ** 2)):.2f} mm; orientation error max "
          f"{math.degrees(e_rot.max()):.3f}°   (real-time factor "
          f"{len(e_pos) * dt / res['wall']:.1f})")
    print(f"  {'coordinate':14s} {'peak':>8s} {'limit':>8s} {'use':>6s} {'saturated':>10s}")
    for j, cname in enumerate(robot.coordinate_names):
        unit = "N" if cname == "lift" else "N·m"
        sat = 100.0 * res["saturated"][:, j].mean()
        print(f"  {cname:14s} {peak[j]:8.2f} {lim[j]:8.1f} {100 * peak[j] / lim[j]:5.0f}% "
              f"{sat:9.1f}%  {unit}")


def arm_points(robot, q):
    """World positions of the arm's joints and the tool, for a side-view stick figure."""
    model, data = robot.model, robot.model.createData()
    pin.forwardKinematics(model, data, q)
    pin.updateFramePlacements(model, data)
    ids = [model.getJointId(n) for n in robot.arm_joint_names]
    pts = [data.oMi[i].translation for i in ids] + [data.oMf[robot.tool_frame_id].translation]
    return np.array(pts)


def plot_ellipsoids(robot, path, n_dir):
    """Side view of three arm poses with the x-z section of the tool's inertia
    ellipsoid (radius ∝ √m_u), and the effective mass against the push direction."""
    from matplotlib.ticker import FuncFormatter

    fig, axes = plt.subplots(2, 3, figsize=(14, 8.5), constrained_layout=True)
    phi = np.linspace(0.0, 2 * math.pi, n_dir)
    payload = robot.description.payload
    scale = 0.05   # m of drawing per √kg
    for col, pname in enumerate(ELLIPSOID_POSES):
        q = robot.configuration(arm=pname)
        pts = arm_points(robot, q)
        ax, axm = axes[0, col], axes[1, col]
        ax.fill_between([-0.35, 0.35], 0.0, 0.34, color="0.85", label="chassis")
        ax.plot(pts[:, 0], pts[:, 2], "o-", color="0.3", lw=3, label="arm joints and tool")
        ax.axhline(0.0, color="k", lw=0.8)
        for base, style, color, label in (("whole_body", "-", "C0", "whole body (wheels free)"),
                                          ("locked", "--", "C3", "arm only (wheels held)")):
            m = np.array([effective_mass(robot, q, [math.cos(a), 0.0, math.sin(a)], base=base)
                          for a in phi])
            shown = np.minimum(m, MASS_CLIP)
            r = scale * np.sqrt(shown)
            ax.plot(pts[-1, 0] + r * np.cos(phi), pts[-1, 2] + r * np.sin(phi), style,
                    color=color, label=label)
            half = phi <= math.pi + 1e-12
            axm.semilogy(np.degrees(phi[half]), shown[half], style, color=color, label=label)
            ell = inertia_ellipsoid(robot, q, base=base)
            print(f"  {pname:14s} {base:10s} principal masses "
                  + ", ".join("inf" if not math.isfinite(x) else f"{x:.2f}" for x in ell.masses)
                  + " kg")
        if payload is not None:
            axm.axhline(payload.mass, color="k", lw=1, ls=":",
                        label=f"rated payload {payload.mass:g} kg")
        axm.axhline(MASS_CLIP, color="0.5", lw=1, ls="-.",
                    label=f"drawn clipped at {MASS_CLIP:g} kg")
        ax.set(title=f"'{pname}': inertia ellipse (x-z)", xlabel="x (world), m",
               ylabel="z (world), m", aspect="equal", xlim=(-0.4, 2.0), ylim=(-0.05, 1.5))
        ax.legend(loc="upper left", fontsize=8)
        axm.set(title=f"'{pname}': effective mass at the tool",
                xlabel="push direction in the x-z plane (0° = +x, 90° = +z), deg",
                ylabel="m_u = 1 / (uᵀ Λ⁻¹ u), kg", xlim=(0, 180), ylim=(0.1, 2 * MASS_CLIP))
        axm.yaxis.set_major_formatter(FuncFormatter(lambda y, _: f"{y:g}"))
        axm.grid(True, which="both", alpha=0.3)
        axm.legend(fontsize=8, loc="upper right")
    fig.suptitle(f"{robot.name}: effective mass at the tool (linear task, orientation free); "
                 f"ellipse radius {scale:g} m per √kg", fontsize=11)
    fig.savefig(path, dpi=110)
    plt.close(fig)


def plot_tracking(robot, results, plan, path):
    t = plan.t
    fig, axes = plt.subplots(4, 1, figsize=(10, 11), sharex=True, constrained_layout=True)
    styles = {"arm only": ("C3", "-"), "whole body": ("C0", "--")}
    for name, res in results.items():
        color, ls = styles[name]
        axes[0].plot(t, 1e3 * np.linalg.norm(res["error"][:, :3], axis=1), ls, color=color,
                     label=name)
        axes[1].plot(t, np.degrees(np.linalg.norm(res["error"][:, 3:], axis=1)), ls,
                     color=color, label=name)
        use = np.abs(res["Q"]) / robot.effort_limit
        axes[2].plot(t, 100 * use[:, :2].max(axis=1), ls, color=color, label=f"{name}: wheels")
        axes[2].plot(t, 100 * use[:, 2:].max(axis=1), ls, color=color, alpha=0.45,
                     label=f"{name}: arm joints")
        v, _ = robot.base_twist(res["nu"])
        axes[3].plot(t, v, ls, color=color, label=f"{name}: actual")
    axes[3].plot(t, plan.v, ":", color="k", label="plan")
    t_stop = t[np.nonzero(np.abs(plan.v) > 1e-9)[0][-1]]
    for ax in axes:
        ax.axvline(t_stop, color="0.5", lw=0.8, ls="--")
    axes[0].annotate("base stops", (t_stop, 0), xytext=(3, 3), textcoords="offset points",
                     fontsize=8, color="0.4")
    axes[2].axhline(100.0, color="k", lw=1.2, label="effort limit")
    axes[0].set(title="tool position error |p_d − p|", ylabel="mm")
    axes[1].set(title="tool orientation error |log(R_d Rᵀ)|", ylabel="deg")
    axes[2].set(title="largest effort as a share of its limit (wheels: drive torque limit, "
                      "arm: URDF effort)", ylabel="% of limit", ylim=(0, 110))
    axes[3].set(title="base forward speed", ylabel="m/s", xlabel="time, s")
    for ax in axes:
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=8, loc="best")
    fig.suptitle(f"{robot.name}: tool holds its world pose while the base drives a 1.2 m "
                 "arc (1 kHz operational-space control)", fontsize=11)
    fig.savefig(path, dpi=110)
    plt.close(fig)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true",
                        help="coarser time step and plots (a smoke test, a few seconds)")
    parser.add_argument("--out", type=Path, default=Path("out"),
                        help="directory for the figures (default ./out)")
    args = parser.parse_args(argv)
    robot = opspace.load_robot(DEMO)
    dt, substeps = (2e-3, 2) if args.quick else (1e-3, 4)
    plan = base_timeline().sample(dt)
    print(f"{robot!r}: tool holds its pose; base arc of 0.30 m in {plan.t[-1] - 1.0:.2f} s, "
          f"then 1 s still; control period {1e3 * dt:g} ms, plant step {1e3 * dt / substeps:g} ms")
    if args.quick:
        print("(quick: the coarse plant step overstates the Coulomb-friction chatter)")
    results = {}
    for name, mode in (("arm only", "arm_only"), ("whole body", "whole_body")):
        results[name] = simulate(robot, mode, plan, dt, substeps)
        summary(robot, name, results[name], dt)
    args.out.mkdir(parents=True, exist_ok=True)
    print("\nprincipal effective masses at the tool (linear task):")
    plot_ellipsoids(robot, args.out / "osc_effective_mass.png", 73 if args.quick else 361)
    plot_tracking(robot, results, plan, args.out / "osc_tracking.png")
    print(f"\nfigures: {args.out / 'osc_effective_mass.png'}, {args.out / 'osc_tracking.png'}")


if __name__ == "__main__":
    main()
