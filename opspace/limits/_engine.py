"""Motion limits of the base at many arm configurations: the probes and the solver.

The state
---------
The arm is held (q̇_arm = q̈_arm = 0) at configuration q; the base runs
straight at speed v (rad/s of each wheel φ̇ = v / r) and is given the base
acceleration a and yaw acceleration α, so that (`MobileManipulator.wheel_rates`)

    ν = (v / r, v / r, 0),    ν̇ = ((a + b α) / r, (a − b α) / r, 0).           (1)

For a steady turn at speed v_t and yaw rate ω (lateral acceleration a_y = v_t ω):

    ν = ((v_t + b ω) / r, (v_t − b ω) / r, 0),    ν̇ = 0.                        (2)

Whole-body dynamics, not a point mass
-------------------------------------
Every figure comes from the public dynamics and stability functions, evaluated
at a few probe states:

* efforts Q = M ν̇ + c + g + f      (`opspace.dynamics.inverse_dynamics_batch`)
* tyre forces F_x                   (`opspace.stability.tyre_forces`)
* ground wrench (f, n) from the centroidal momentum rate, with the wheels' and
  rotors' spin momentum           (`opspace.stability.ground_wrench`)
* ZMP, margin, normal loads, traction use (`opspace.stability.stability_figures`,
  the load model of the description).

Two exact structures of the equations of motion make a few probes enough:

* at fixed (q, ν), Q, F_x and (f, n) are AFFINE in ν̇ (M ν̇ + terms of (q, ν);
  the momentum rate is A_G(q) v̇ + Ȧ_G(q, v) v): three probes, ν̇ = 0 and one
  unit acceleration per wheel, give them for every (a, α) exactly;
* at fixed q and ν̇ = 0 the rigid-body terms are QUADRATIC in ν (Coriolis and
  centrifugal), and ν of (2) is affine in ω: three probes ω ∈ {0, ±ω₁} give
  them for every ω exactly.  The friction of the drives and the rolling
  resistance are not polynomial in ω (Coulomb signs, caster drag directions):
  in a turn they are interpolated by the same quadratic, exact at the probes
  (stated in the result; they change the drive torque of a turn only).

The limit along a direction
---------------------------
Along a ray (a, α) = s d (or ω = s for a turn) every criterion is a "use"
u_k(s) that may not exceed 1 (drive torque |τ| / τ_max, traction use / ceiling,
ZMP margin, joint effort, drive speed).  The limit is the smallest s > 0 where
max_k u_k(s) = 1: found by a bracketed regula falsi (the Illinois variant;
Dowell & Jarratt, BIT 11, 1971), which ends on a piecewise-linear function
once both ends lie on the same piece, to 1e-12 relative in s.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..dynamics import inverse_dynamics_batch
from ..sizing import motor_torque
from ..stability import GroundWrench, stability_figures, tyre_forces, ground_wrench

# The criteria, in the order of the columns of `uses` (joint efforts follow).
DRIVE_TORQUE, DRIVE_SPEED, TRACTION, TIP_OVER = range(4)
CAUSES = ("drive torque", "drive speed", "traction", "tip-over")

_REL_TOL = 1e-12
_MAX_ITER = 200
_S_MAX = 1e4          # no limit beyond 1e4 m/s² (or rad/s², rad/s): "unbounded"


@dataclass(frozen=True)
class Policy:
    """The margins in force: `zmp_margin` m (least ZMP distance to a support
    edge), `traction_ceiling` (largest traction use, in (0, 1])."""

    zmp_margin: float = 0.0
    traction_ceiling: float = 1.0

    def to_dict(self):
        return {"zmp_margin": {"value": self.zmp_margin, "unit": "m"},
                "traction_ceiling": {"value": self.traction_ceiling, "unit": "1"}}


class Probes:
    """Affine / quadratic pieces of the figures over n configurations.

    Arrays per quantity X: X0 at the probe state, Xr / Xl the change per unit
    right / left wheel acceleration (rad/s²), and for the turn X_t0, X_t1, X_t2
    the coefficients of 1, ω, ω² at speed v_t.
    """

    def __init__(self, robot, qs, speed, turn_speed):
        n, nv = len(qs), robot.nv
        r = robot.wheel_radius
        nu = np.zeros((n, nv))
        nu[:, :2] = speed / r
        acc = np.zeros((3 * n, nv))
        acc[n:2 * n, 0] = 1.0
        acc[2 * n:, 1] = 1.0
        q3, nu3 = np.tile(qs, (3, 1)), np.tile(nu, (3, 1))
        Q, F, W = _evaluate(robot, q3, nu3, acc)
        self.n = n
        self.qs = qs
        self.nu = nu
        self.Q0, self.Qr, self.Ql = Q[:n], Q[n:2 * n] - Q[:n], Q[2 * n:] - Q[:n]
        self.F0, self.Fr, self.Fl = F[:n], F[n:2 * n] - F[:n], F[2 * n:] - F[:n]
        self.W0, self.Wr, self.Wl = W[:n], W[n:2 * n] - W[:n], W[2 * n:] - W[:n]
        self.turn_speed = turn_speed
        # turn probes at ω = 0, ±ω₁ (ω₁ = g / v_t: a lateral acceleration of one g)
        self.w1 = w1 = 9.80665 / turn_speed
        rates = [robot.wheel_rates(turn_speed, w) for w in (0.0, w1, -w1)]
        nut = np.zeros((3 * n, nv))
        for k, (wr, wl) in enumerate(rates):
            nut[k * n:(k + 1) * n, 0], nut[k * n:(k + 1) * n, 1] = wr, wl
        Qt, Ft, Wt = _evaluate(robot, q3, nut, np.zeros((3 * n, nv)))
        self.Qt = _quadratic(Qt[:n], Qt[n:2 * n], Qt[2 * n:], w1)
        self.Ft = _quadratic(Ft[:n], Ft[n:2 * n], Ft[2 * n:], w1)
        self.Wt = _quadratic(Wt[:n], Wt[n:2 * n], Wt[2 * n:], w1)


def _evaluate(robot, qs, nus, nu_dots):
    """Q (m, nv), tyre forces (m, 2), ground wrench stacked (m, 9): force, moment, com."""
    Q = inverse_dynamics_batch(robot, qs, nus, nu_dots, threads=1)
    F = tyre_forces(robot, qs, nus, nu_dots, Q)
    w = ground_wrench(robot, qs, nus, nu_dots)
    return Q, F, np.hstack([w.force, w.moment, w.com])


def _quadratic(y0, yp, ym, h):
    """Coefficients (c0, c1, c2) of y = c0 + c1 ω + c2 ω² through ω = 0, ±h."""
    return y0, (yp - ym) / (2 * h), (yp + ym - 2 * y0) / (2 * h * h)


class Criteria:
    """The uses u_k of every criterion at given states (see `uses`)."""

    def __init__(self, robot, policy, mu, drive):
        self.robot = robot
        self.policy = policy
        self.mu = mu
        self.drive = drive
        self.joint_limit = robot.effort_limit[2:]
        self.joint_names = list(robot.arm_joint_names)
        # a length of the layout, to express the ZMP margin as a use
        P = np.array([c.position for c in robot.contacts])
        self.size = float(np.max(np.linalg.norm(P - P.mean(axis=0), axis=1)))

    @property
    def causes(self):
        return list(CAUSES) + [f"joint effort ({n})" for n in self.joint_names]

    def uses(self, Q, F, W, wheel_speed, wheel_acc):
        """Uses (m, 4 + n_arm): each criterion holds while its use <= 1.

        Q (m, nv) efforts; F (m, 2) tyre forces; W (m, 9) ground wrench;
        wheel_speed, wheel_acc (m, 2) rad/s, rad/s².
        """
        m = len(Q)
        u = np.empty((m, 4 + len(self.joint_limit)))
        u[:, DRIVE_TORQUE], u[:, DRIVE_SPEED] = self.drive.uses(Q[:, :2], wheel_speed, wheel_acc)
        with np.errstate(invalid="ignore", divide="ignore"):
            fz_ok = W[:, 2] > 0
            W_ok = np.where(fz_ok[:, None], W, np.r_[0, 0, 1.0, np.zeros(6)])
            track = stability_figures(self.robot, GroundWrench(W_ok[:, :3], W_ok[:, 3:6],
                                                               W_ok[:, 6:]), F, mu=self.mu)
            # nan where the robot tips (no load distribution): no grip either
            trac = np.max(np.where(np.isnan(track.traction), np.inf, track.traction),
                          axis=1) / self.policy.traction_ceiling
            tip = 1.0 + (self.policy.zmp_margin - track.margin) / self.size
            tip = np.where(track.loads.supported & fz_ok, tip, np.inf)
            u[:, TRACTION] = np.where(fz_ok, trac, np.inf)
            u[:, TIP_OVER] = tip
            u[:, 4:] = np.abs(Q[:, 2:]) / self.joint_limit
        return u


class DescribedDrive:
    """The drive limits of the description: |τ| <= torque_limit at the wheel
    (N·m, the drive's peak), |φ̇| <= top_speed / r."""

    def __init__(self, robot):
        self.torque = robot.description.drive.torque_limit
        self.speed = robot.velocity_limit[0]
        self.name = (f"description: torque_limit {self.torque:g} N·m, "
                     f"wheel speed limit {self.speed:g} rad/s")

    def uses(self, tau, wheel_speed, wheel_acc):
        return (np.max(np.abs(tau), axis=1) / self.torque,
                np.max(np.abs(wheel_speed), axis=1) / self.speed)


class CandidateDrive:
    """A catalogue motor and gearbox at ratio G on each drive wheel.

    Motor torque (`opspace.sizing.motor_torque`, eq. (2) of `sizing.drives`)
    T_m = J_m G φ̈ + τ_out / (G η) (or τ_out η / G back-driven), with
    τ_out = Q − J_rotor,described G_described² φ̈ (the described rotor removed)
    and J_m = rotor + gearbox input inertia; held within the motor's
    intermittent envelope T_env(G |φ̇|) and the gearbox's peak torque; speed
    within the motor's and gearbox's speed limits.
    """

    def __init__(self, robot, motor, gearbox, ratio):
        self.robot, self.motor, self.gearbox, self.G = robot, motor, gearbox, float(ratio)
        self.J_m = motor.rotor_inertia + gearbox.inertia
        self.J_desc = robot.description.drive.reflected_inertia
        top = motor.max_speed if gearbox.max_input_speed is None else min(
            motor.max_speed, gearbox.max_input_speed)
        self.speed = min(top / self.G, robot.velocity_limit[0])
        self.name = f"candidate: motor {motor.name}, gearbox {gearbox.name}, ratio {self.G:g}"

    def uses(self, tau, wheel_speed, wheel_acc):
        tau_out = tau - self.J_desc * wheel_acc
        T_m = motor_torque(tau_out, wheel_speed, wheel_acc, gear_ratio=self.G,
                           efficiency=self.gearbox.efficiency, inertia=self.J_m)
        with np.errstate(divide="ignore", invalid="ignore"):
            u = np.abs(T_m) / self.motor.envelope(self.G * wheel_speed)
            u = np.where(np.abs(T_m) == 0, 0.0, u)
            if self.gearbox.peak_torque is not None:
                u = np.maximum(u, np.abs(tau_out) / self.gearbox.peak_torque)
        return np.max(u, axis=1), np.max(np.abs(wheel_speed), axis=1) / self.speed


# --------------------------------------------------------------------------- rays

class Rays:
    """Rays through the probes: straight (a, α) = s d and turns ω = s σ.

    Rows index (configuration i, direction j) as j * n + i.
    """

    def __init__(self, probes, criteria, dirs, turns):
        self.p, self.c = probes, criteria
        self.dirs = np.asarray(dirs, dtype=float).reshape(-1, 2)      # (J, 2) (a, α)
        self.turns = np.asarray(turns, dtype=float).reshape(-1)        # (K,) ±1
        robot = criteria.robot
        self.r, self.b = robot.wheel_radius, robot.half_track

    def _tile(self, X, k):
        return np.tile(X, (k,) + (1,) * (X.ndim - 1))

    def straight(self, s, rows):
        """Uses along the straight rays at scale s (m,) for `rows` (m,)."""
        p, n = self.p, self.p.n
        i, j = rows % n, rows // n
        a, al = s * self.dirs[j, 0], s * self.dirs[j, 1]
        ar, all_ = (a + self.b * al) / self.r, (a - self.b * al) / self.r
        lin = lambda X0, Xr, Xl: X0[i] + ar[:, None] * Xr[i] + all_[:, None] * Xl[i]  # noqa: E731
        Q, F, W = lin(p.Q0, p.Qr, p.Ql), lin(p.F0, p.Fr, p.Fl), lin(p.W0, p.Wr, p.Wl)
        speed = p.nu[i, :2]
        return self.c.uses(Q, F, W, speed, np.column_stack([ar, all_]))

    def turn(self, s, rows):
        """Uses in a steady turn at yaw rate ω = s σ for `rows` (m,)."""
        p, n = self.p, self.p.n
        i, k = rows % n, rows // n
        w = s * self.turns[k]
        quad = lambda C: C[0][i] + w[:, None] * C[1][i] + (w * w)[:, None] * C[2][i]  # noqa: E731
        Q, F, W = quad(p.Qt), quad(p.Ft), quad(p.Wt)
        wr, wl = self.c.robot.wheel_rates(p.turn_speed, w)
        return self.c.uses(Q, F, W, np.column_stack([wr, wl]), np.zeros((len(w), 2)))


def solve(uses_at, m, s_guess):
    """Largest s >= 0 with max_k u_k(s) <= 1 along m rays.

    uses_at(s (m',), rows (m',)) -> uses (m', K).  Returns s (m,) (inf when no
    criterion binds below 1e4), the binding criterion index (m,) (−1 when
    unbounded) and the uses at s = 0 (m, K).
    """
    rows = np.arange(m)
    u0 = uses_at(np.zeros(m), rows)
    g0 = np.max(u0, axis=1) - 1.0
    s = np.zeros(m)
    cause = np.argmax(u0, axis=1)
    live = g0 < 0
    lo, glo = np.zeros(m), g0.copy()
    hi, ghi = np.full(m, np.nan), np.full(m, np.nan)
    # bracket: grow from the guess until a criterion fails
    trial = np.full(m, float(s_guess))
    open_ = live.copy()
    while np.any(open_):
        idx = np.flatnonzero(open_)
        g = np.max(uses_at(trial[idx], idx), axis=1) - 1.0
        bad = g >= 0
        hi[idx[bad]], ghi[idx[bad]] = trial[idx[bad]], g[bad]
        ok = idx[~bad]
        lo[ok], glo[ok] = trial[ok], g[~bad]
        trial[ok] *= 4.0
        open_[idx[bad]] = False
        beyond = ok[trial[ok] > _S_MAX]
        open_[beyond] = False
    unbounded = live & np.isnan(hi)
    active = live & ~unbounded
    side = np.zeros(m, dtype=int)            # Illinois: which end was kept last
    root = lo.copy()
    for _ in range(_MAX_ITER):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        a, b, ga, gb = lo[idx], hi[idx], glo[idx], ghi[idx]
        with np.errstate(invalid="ignore", divide="ignore"):
            x = np.where(np.isfinite(gb), a - ga * (b - a) / (gb - ga), 0.5 * (a + b))
        x = np.where((x > a) & (x < b), x, 0.5 * (a + b))
        g = np.max(uses_at(x, idx), axis=1) - 1.0
        left = g < 0
        # Illinois: halve the value kept at the end that stays twice in a row
        keep_hi = left & (side[idx] == 1)
        keep_lo = ~left & (side[idx] == -1)
        ghi[idx[keep_hi]] *= 0.5
        glo[idx[keep_lo]] *= 0.5
        lo[idx[left]], glo[idx[left]] = x[left], g[left]
        hi[idx[~left]], ghi[idx[~left]] = x[~left], g[~left]
        side[idx] = np.where(left, 1, -1)
        exact = np.abs(g) <= 1e-13
        done = exact | (hi[idx] - lo[idx] <= _REL_TOL * hi[idx])
        root[idx[done]] = np.where(exact[done], x[done], lo[idx[done]])
        active[idx[done]] = False
    root[active] = lo[active]                # iteration cap: the last feasible scale
    s[live] = np.where(unbounded[live], np.inf, root[live])
    # at the limit, the binding criterion: the largest use there (a use that
    # jumps, like a lifted wheel's, only jumps once another has reached 1)
    fin = np.flatnonzero(live & ~unbounded)
    if fin.size:
        cause[fin] = np.argmax(uses_at(s[fin], fin), axis=1)
    cause[unbounded] = -1
    return s, cause, u0
