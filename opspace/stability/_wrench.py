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

from ..dynamics import coulomb_viscous, wheel_rolling_torques
from ._contacts import support_polygon, zmp
from ._margins import traction_use

__all__ = ["GroundWrench", "StabilityTrack", "ground_wrench", "merge_tracks", "stability_figures",
           "stability_track", "tyre_forces"]


def _rolling_parts(robot, qs, nus):
    """(N_static (n, k) N, caster forces (n, n_c, 2) N): the static contact loads
    the dynamics' rolling resistance uses, and each caster's rolling-resistance
    force F_c = −C_rr N_c v̂_c in base axes (v_c = (J_x ν, J_y ν) its ground velocity)."""
    from ..dynamics import caster_forces, static_loads_batch

    N = static_loads_batch(robot, qs)
    return N, caster_forces(robot, nus, N)


def tyre_forces(robot, qs, nus, nu_dots, Q):
    """Longitudinal ground force each drive wheel's tyre must supply, (n, 2) N.

    The wheel's own balance about its axle:
    F_x,i = (Q_i − f_C,i sign φ̇_i − f_v,i φ̇_i − C_rr N_i r sign φ̇_i − (J_s + J_m G²) φ̈_i) / r,
    with Q_i the wheel torque, f_C, f_v its drive friction, C_rr N_i r its own
    rolling-resistance moment (the normal force's offset ahead of the axle) and
    J_s + J_m G² its spin and reflected rotor inertia.  The casters' rolling
    resistance is NOT taken off: the drive tyres push against it through the
    ground, so it is part of the force they need (Newton for the whole robot:
    Σ F_x,i = m a + Σ_c C_rr N_c along a straight line).
    """
    qs, nus, nu_dots = (np.atleast_2d(np.asarray(x, dtype=float)) for x in (qs, nus, nu_dots))
    d = robot.description
    J = d.wheel.spin_inertia + d.drive.reflected_inertia
    w, w_dot = nus[:, :2], nu_dots[:, :2]
    own = coulomb_viscous(robot, nus)[:, :2]
    if robot.rolling_resistance:
        N, _ = _rolling_parts(robot, qs, nus)
        own = own + wheel_rolling_torques(robot, N, nus)
    return (np.asarray(Q)[:, :2] - own - J * w_dot) / robot.wheel_radius


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
    (`polygon.edges`); loads: SupportLoads, N (n, k) N per contact in
    `robot.contacts` order, under the robot's load model; traction (n, 2):
    |F_t| / (μ N) per drive wheel (≥ 1 means the wheel slips; inf where it has
    lifted off, nan where the robot tips); tyre_force (n, 2, 2) N: (F_x, F_y) each drive tyre supplies;
    wrench: GroundWrench; polygon: the chassis' support polygon.
    """

    zmp: np.ndarray
    margin: np.ndarray
    edge: np.ndarray
    loads: object
    traction: np.ndarray
    wrench: GroundWrench
    polygon: object
    tyre_force: np.ndarray = None


def stability_track(robot, qs, nus, nu_dots, wheel_force_x, *, mu=None, floor=None):
    """ZMP, tip-over margin, normal loads and traction use over a motion.

    The ground wrench of `ground_wrench` at each state and the casters'
    rolling-resistance forces, then `stability_figures`.

    Parameters
    ----------
    wheel_force_x : (n, 2) N, longitudinal ground force on each drive wheel
    mu : ground friction coefficient (default: the description's nominal one)
    floor : (k,) or (n, k) m, floor dip under each contact (see `support_loads`)
    """
    qs, nus = np.atleast_2d(qs), np.atleast_2d(nus)
    w = ground_wrench(robot, qs, nus, nu_dots)
    if np.any(w.force[:, 2] <= 0):
        i = int(np.argmax(w.force[:, 2] <= 0))
        raise ValueError(f"the ground's normal force is {w.force[i, 2]:.3g} N <= 0 at sample {i}: "
                         f"the robot would leave the ground")
    caster_force = _rolling_parts(robot, qs, nus)[1] if robot.rolling_resistance else None
    return stability_figures(robot, w, wheel_force_x, mu=mu, floor=floor,
                             caster_force=caster_force)


def stability_figures(robot, wrench, wheel_force_x, *, mu=None, floor=None, caster_force=None):
    """ZMP, tip-over margin, normal loads and traction use from ground wrenches.

    Normal loads follow the robot's load model (`support_model`).  The
    lateral force the drive wheels carry is the ground wrench's f_y less the
    casters' rolling-resistance forces (casters swivel freely and carry no other
    side force), shared in proportion to the drive wheels' normal loads; the
    longitudinal force of drive wheel i is `wheel_force_x[:, i]` (`tyre_forces`).
    Traction use is sqrt(F_x² + F_y²) / (μ N) (friction circle; Coulomb friction).

    Parameters
    ----------
    wrench : GroundWrench with force[:, 2] > 0 (n states)
    wheel_force_x : (n, 2) N, longitudinal ground force on each drive wheel
    mu : ground friction coefficient (default: the description's nominal one)
    floor : (k,) or (n, k) m, floor dip under each contact (see `support_loads`)
    caster_force : (n, n_casters, 2) N, optional, the casters' rolling-resistance
        forces in base axes (`stability_track` passes them; default none)

    Returns
    -------
    StabilityTrack
    """
    from ._support import support_loads, support_model

    mu = robot.ground_friction if mu is None else mu
    w = wrench
    model = support_model(robot)
    polygon = support_polygon(model.element_positions)
    p = zmp(w.force, w.moment)
    margin, edge = polygon.margin(p)
    loads = support_loads(model, p, w.force[:, 2], floor=floor)
    N = loads.N[:, :2]
    share = np.divide(N, N.sum(axis=1, keepdims=True), out=np.full_like(N, 0.5),
                      where=np.isfinite(N) & (N.sum(axis=1, keepdims=True) > 0))
    f_y = w.force[:, 1:2]
    if caster_force is not None:
        f_y = f_y - np.asarray(caster_force)[:, :, 1].sum(axis=1, keepdims=True)
    F_x = np.asarray(wheel_force_x, dtype=float)
    F_y = f_y * share
    # inf where a wheel has lifted off; nan where the robot tips (ZMP outside the
    # polygon: no load distribution exists)
    use = traction_use(np.hypot(F_x, F_y), np.where(np.isfinite(N), N, 0.0), mu)
    use = np.where(loads.supported[:, None], use, np.nan)
    return StabilityTrack(zmp=p, margin=np.asarray(margin), edge=np.asarray(edge), loads=loads,
                          traction=use, wrench=w, polygon=polygon,
                          tyre_force=np.stack([F_x, F_y], axis=-1))


def merge_tracks(pieces, n):
    """One StabilityTrack over n samples from per-group tracks.

    pieces : list of (index array into the n samples, StabilityTrack of those samples)
    """
    from ._support import SupportLoads

    first = pieces[0][1]
    k = first.loads.N.shape[1]
    zmp, margin, edge = np.empty((n, 2)), np.empty(n), np.empty(n, dtype=int)
    N, supported, tilt = np.empty((n, k)), np.empty(n, bool), np.empty((n, 2))
    lifted, top, bottom = (np.empty((n, k), bool) for _ in range(3))
    traction, tyre = np.empty((n, 2)), np.empty((n, 2, 2))
    force, moment, com = np.empty((n, 3)), np.empty((n, 3)), np.empty((n, 3))
    for m, tr_ in pieces:
        zmp[m], margin[m], edge[m], traction[m] = tr_.zmp, tr_.margin, tr_.edge, tr_.traction
        N[m], lifted[m], supported[m] = tr_.loads.N, tr_.loads.lifted, tr_.loads.supported
        top[m], bottom[m], tilt[m] = tr_.loads.topped_out, tr_.loads.bottomed, tr_.loads.tilt
        force[m], moment[m], com[m] = tr_.wrench.force, tr_.wrench.moment, tr_.wrench.com
        tyre[m] = tr_.tyre_force
    loads = SupportLoads(N=N, lifted=lifted, supported=supported, topped_out=top,
                         bottomed=bottom, tilt=tilt, model=first.loads.model)
    return StabilityTrack(zmp=zmp, margin=margin, edge=edge, loads=loads, traction=traction,
                          wrench=GroundWrench(force, moment, com), polygon=first.polygon,
                          tyre_force=tyre)
