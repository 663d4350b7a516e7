"""Ground-reaction wrench of the whole robot and the stability figures it drives.

Newton–Euler for the whole system (rigid bodies, ground the only external
contact besides gravity):

    f = m c̈ − m g⃗,        n_G = k̇_G

with c the centre of mass, k_G the angular momentum about it, and g⃗ the
gravity vector of the model (tilted on a ramp: the world frame is the ground's
frame).  Pinocchio's `computeCentroidalMomentumTimeVariation` gives
ḣ_G = (m c̈, k̇_G) in world-aligned axes at the COM (Orin, Goswami & Lee,
"Centroidal dynamics of a humanoid robot", Autonomous Robots 35, 2013).  The
moment about the base-frame origin o (on the ground below the axle middle) is
n_o = n_G + (c − o) × f, and both are rotated into base axes.

The motor rotors have no body in the tree (their reflected inertia is the
armature of the wheel joints, which carries their energy but not their
angular momentum).  Their spin momentum is added here: each rotor spins about
an axis parallel to the wheel axle (base y) at G φ̇_i relative to the chassis,
so with the chassis turning at ω about z its momentum H_i = J_m G φ̇_i ŷ has
the rate (Euler's equation for a body in a rotating frame; Goldstein, Classical
Mechanics, 1980, § 4-9, recalled from memory)

    Ḣ_i = J_m G (φ̈_i ŷ − ω φ̇_i x̂)

which the ground must supply: n += Σ_i Ḣ_i (a couple, the same about any
point).  Assumed: the rotor turns the same way as its wheel (an in-line or
planetary gearhead); a reversing gear stage flips the sign of this term.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pinocchio as pin

from .contacts import ContactLoads, normal_loads, support_polygon, traction_use, zmp

__all__ = ["GroundWrench", "StabilityTrack", "ground_wrench", "stability_figures",
           "stability_track", "tyre_forces"]


def tyre_forces(robot, qs, nus, nu_dots, Q):
    """Longitudinal ground force on each drive wheel's tyre, (n, 2) N.

    The wheel's own balance about its axle:  F_x,i = (Q_i − f_i − (J_s + J_m G²) φ̈_i) / r,
    with Q_i the wheel torque, f_i its friction and rolling-resistance torque,
    J_s the wheel's spin inertia and J_m G² the reflected rotor inertia.
    """
    from ..dynamics.joint_space import _friction_batch

    d = robot.description
    J = d.wheel.spin_inertia + d.drive.reflected_inertia
    f = _friction_batch(robot, qs, nus)[:, :2]
    return (np.asarray(Q)[:, :2] - f - J * np.asarray(nu_dots)[:, :2]) / robot.wheel_radius


@dataclass(frozen=True)
class GroundWrench:
    """Total ground reaction on the robot, base axes, about the base origin.

    force (n, 3) N, moment (n, 3) N·m, com (n, 3) m in the base frame.
    """

    force: np.ndarray
    moment: np.ndarray
    com: np.ndarray


def ground_wrench(robot, qs, nus, nu_dots):
    """Ground wrench at many states (or one: 1-D inputs give rows of one).

    Parameters
    ----------
    qs : (n, model.nq) or (model.nq,); nus, nu_dots : (n, nv) or (nv,)

    Returns
    -------
    GroundWrench   arrays (n, 3)
    """
    qs, nus, nu_dots = (np.atleast_2d(np.asarray(x, dtype=float)) for x in (qs, nus, nu_dots))
    model, data, S = robot.model, robot.model.createData(), robot.S
    n = qs.shape[0]
    if nus.shape != (n, robot.nv) or nu_dots.shape != (n, robot.nv) or qs.shape[1] != model.nq:
        raise ValueError(f"`qs`, `nus`, `nu_dots` must have shapes (n, {model.nq}), (n, {robot.nv}), "
                         f"(n, {robot.nv}); got {qs.shape}, {nus.shape}, {nu_dots.shape}")
    m = robot.total_mass()
    V, A = nus.dot(S.T), nu_dots.dot(S.T)
    dh, c_w = np.empty((n, 6)), np.empty((n, 3))
    for i in range(n):           # only the Pinocchio call per state; the rest vectorised
        dh[i] = pin.computeCentroidalMomentumTimeVariation(model, data, qs[i], V[i], A[i]).vector
        c_w[i] = data.com[0]
    f_w = dh[:, :3] - m * model.gravity.linear
    r = c_w.copy()
    r[:, :2] -= qs[:, :2]
    n_w = dh[:, 3:] + np.cross(r, f_w)
    cth, sth = qs[:, 2:3], qs[:, 3:4]

    def to_base(x):              # R(θ)ᵀ x, row by row
        return np.column_stack([cth[:, 0] * x[:, 0] + sth[:, 0] * x[:, 1],
                                -sth[:, 0] * x[:, 0] + cth[:, 0] * x[:, 1], x[:, 2]])

    moment = to_base(n_w)
    # rotor spin momentum rate, base axes (module docstring): J_m G (Σφ̈ ŷ − ω Σφ̇ x̂)
    d = robot.description.drive
    k = d.rotor_inertia * d.gear_ratio
    if k:
        omega = V[:, 2]
        moment[:, 0] -= k * omega * (nus[:, 0] + nus[:, 1])
        moment[:, 1] += k * (nu_dots[:, 0] + nu_dots[:, 1])
    return GroundWrench(to_base(f_w), moment, to_base(r))


@dataclass(frozen=True)
class StabilityTrack:
    """Stability figures at each instant of a motion.

    zmp (n, 2) m, base frame; margin (n,) m: signed distance of the ZMP to the
    nearest support-polygon edge (> 0 inside); edge (n,) index of that edge
    (`polygon.edges`); loads: ContactLoads, N (n, k) N per contact in
    `robot.contacts` order; traction (n, 2): |F_t| / (μ N) per drive wheel
    (≥ 1 means the wheel slips); wrench: GroundWrench; polygon.
    """

    zmp: np.ndarray
    margin: np.ndarray
    edge: np.ndarray
    loads: ContactLoads
    traction: np.ndarray
    wrench: GroundWrench
    polygon: object


def stability_track(robot, qs, nus, nu_dots, wheel_force_x, *, mu=None):
    """ZMP, tip-over margin, normal loads and traction use over a motion.

    The ground wrench of `ground_wrench` at each state, then `stability_figures`.

    Parameters
    ----------
    wheel_force_x : (n, 2) N, longitudinal ground force on each drive wheel
    mu : ground friction coefficient (default: the description's)
    """
    w = ground_wrench(robot, qs, nus, nu_dots)
    if np.any(w.force[:, 2] <= 0):
        i = int(np.argmax(w.force[:, 2] <= 0))
        raise ValueError(f"the ground's normal force is {w.force[i, 2]:.3g} N <= 0 at sample {i}: "
                         f"the robot would leave the ground")
    return stability_figures(robot, w, wheel_force_x, mu=mu)


def stability_figures(robot, wrench, wheel_force_x, *, mu=None):
    """ZMP, tip-over margin, normal loads and traction use from ground wrenches.

    The lateral force f_y of the ground wrench is carried by the drive wheels
    alone (casters swivel freely), shared in proportion to their normal loads;
    the longitudinal force of drive wheel i is `wheel_force_x[:, i]` (from its
    torque balance, computed by the caller).  Traction use is
    sqrt(F_x² + F_y²) / (μ N) (friction circle; Coulomb friction).  The normal
    loads come from `normal_loads` (the description's load model).

    Parameters
    ----------
    wrench : GroundWrench with force[:, 2] > 0 (n states)
    wheel_force_x : (n, 2) N, longitudinal ground force on each drive wheel
    mu : ground friction coefficient (default: the description's)

    Returns
    -------
    StabilityTrack
    """
    mu = robot.ground_friction if mu is None else mu
    w = wrench
    P = np.array([c.position for c in robot.contacts])
    polygon = support_polygon(P)
    p = zmp(w.force, w.moment)
    margin, edge = polygon.margin(p)
    loads = normal_loads(P, p, w.force[:, 2])
    N = loads.N[:, :2]
    share = np.divide(N, N.sum(axis=1, keepdims=True), out=np.full_like(N, 0.5),
                      where=np.isfinite(N) & (N.sum(axis=1, keepdims=True) > 0))
    F_y = w.force[:, 1:2] * share
    F_t = np.hypot(np.asarray(wheel_force_x, dtype=float), F_y)
    # where the robot tips (ZMP outside the polygon) the loads are nan: no grip
    use = traction_use(F_t, np.where(np.isfinite(N), N, 0.0), mu)
    return StabilityTrack(zmp=p, margin=np.asarray(margin), edge=np.asarray(edge), loads=loads,
                          traction=use, wrench=w, polygon=polygon)
