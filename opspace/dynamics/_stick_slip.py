"""Stick-slip friction and hard joint stops, decided once per integration step.

Friction model: Karnopp's stick-slip model (D. Karnopp, "Computer simulation
of stick-slip friction in mechanical dynamic systems", ASME J. Dynamic
Systems, Measurement, and Control 107(1), 1985, pp. 100-103), in the
event-driven form with a velocity reset (the "switch model" of R. I. Leine,
D. H. van Campen, A. de Kraker & L. van den Steen, Nonlinear Dynamics 16,
1998).  Each coordinate i has a static level F_s,i (the breakaway effort,
description key `stiction`), a kinetic level F_k,i (`coulomb`, the URDF's
`friction`) and a viscous coefficient f_v,i:

    sliding (ν_i ≠ 0):  f_i = F_k,i s_i + f_v,i ν_i,   s_i = sign(ν_i) at the step start
    stuck   (ν_i = 0):  ν̇_i = 0, and f_i is whatever holds it:
                        H_i = (Q − c − g − f_others)_i − (M ν̇)_i,   |H_i| ≤ F_s,i

On the drive wheels the rolling resistance of the static contact loads,
k_i = C_rr N_i r, adds to both levels (the casters' share acts only when they
roll).  With M ν̇ = Q − c − g − f on the free coordinates F (locked and stuck
ones held), the holding efforts of the held set are

    M_FF ν̇_F = (Q − c − g − f)_F,     H_C = (Q − c − g − f_v ν)_C − M_CF ν̇_F.

At the start of each step the candidates for sticking are the coordinates
held before, those at rest (ν_i = 0) and those whose velocity changed sign
over the last step (Karnopp's zero-velocity band, here the step's own
velocity change, so a reversal is never missed).  All are held, the
holding efforts solved, and the one exceeding its breakaway level the most
is released (it slides in the direction of H_i), until every held one is
within its level.  A newly stuck coordinate's velocity is set to zero by a
plastic impulse on that coordinate alone,

    ν_F⁺ = ν_F⁻ + M_FF⁻¹ M_FI ν_I⁻,   ν_I⁺ = 0,

which dissipates T⁻ − T⁺ = ½ ν⁻ᵀ M ν⁻ − ½ ν⁺ᵀ M ν⁺ ≥ 0 (Kelvin's theorem for
impulsive motion: a constraint added at an instant never raises the kinetic
energy); that loss is summed in `loss`, J.  A stuck coordinate's ν_i and ν̇_i
are exactly zero, so its position does not change at all, and the sign of a
sliding coordinate's friction is frozen over the step, so the integrator
never sees the sign switch inside a step (no chatter, no round-off-driven
branching).

Hard stops: an arm joint with position limits (URDF `<limit lower upper>`)
found at or past one at a step's start, and not moving away from it, is
stopped by the same plastic impulse and held while the efforts push it into
the stop, H_i ≥ −F_s,i at the upper stop (H_i ≤ F_s,i at the lower): an
inelastic stop (coefficient of restitution 0).  The stop acts at the first
step boundary at or past the limit, so a joint may pass it by less than one
step's travel, |ν_i| h (1 mrad at 1 rad/s and 1 ms); the position is not
moved back, so no energy enters or leaves but the impulse's, and
E(t) + loss(t) stays constant without input and friction.  Locked and stuck
coordinates take no part in an impulse (they are held).
"""

from __future__ import annotations

import numpy as np

from ._terms import FrictionLevels, rolling_loads, solve_spd

__all__ = ["StickSlip"]


class StickSlip:
    """The per-step state of the stick-slip friction and the joint stops (NumPy).

    Parameters
    ----------
    robot : MobileManipulator
    locked : (nv,) bool     coordinates held still by the caller
    friction : bool         friction (static, kinetic, viscous, rolling) on
    stops : bool            arm joints stop at their position limits

    Attributes
    ----------
    held : (nv,) bool       stuck or at a stop (not `locked`)
    s : (nv,) float         frozen friction direction of the sliding coordinates
    loss : float            J, kinetic energy taken by the impulses so far
    first_stop : (nv,) int  step index of each coordinate's first arrival at a stop
                            with a speed (-1: none; resting on one is not counted)
    stop_side : (nv,) int   +1 upper, -1 lower at that first stop
    """

    def __init__(self, robot, locked, *, friction, stops):
        nv = robot.nv
        self.robot, self.locked = robot, np.asarray(locked, bool).copy()
        lv = FrictionLevels(robot, friction=friction, stops=stops)
        self.Fk, self.Fs, self.fv, self.rolling = lv.Fk, lv.Fs, lv.fv, lv.rolling
        self.frictional, self.lo, self.hi, self.qi = lv.frictional, lv.lo, lv.hi, lv.qi
        self.stop_coords = np.flatnonzero(self.qi >= 0)
        self.held = np.zeros(nv, bool)
        self.s = np.zeros(nv)
        self.loss = 0.0
        self.step = -1
        self.first_stop = np.full(nv, -1)
        self.stop_side = np.zeros(nv, int)
        self._kw = (0.0, 0.0)
        self._loads = None

    @property
    def free(self):
        """(nv,) bool: the coordinates that move during this step."""
        return ~(self.held | self.locked)

    def _impulse(self, M, nu, I, fixed):
        """ν_I → 0 by a plastic impulse on I, with `fixed` (held) coordinates still."""
        T0 = 0.5 * nu.dot(M).dot(nu)
        F = ~(I | fixed)
        if F.any():
            nu[F] += solve_spd(M[np.ix_(F, F)], M[np.ix_(F, I)].dot(nu[I]))
        nu[I] = 0.0
        self.loss += T0 - 0.5 * nu.dot(M).dot(nu)

    def _stops(self, q, nu):
        """The (nv,) contact side (+1 upper, -1 lower, 0) of joints at or past a
        limit and not moving away from it."""
        side = np.zeros(len(nu), int)
        for i in self.stop_coords:
            j = self.qi[i]
            if q[j] >= self.hi[i] and nu[i] >= 0.0:
                side[i] = 1
            elif q[j] <= self.lo[i] and nu[i] <= 0.0:
                side[i] = -1
            if side[i] and nu[i] != 0.0 and self.first_stop[i] < 0:   # arrived, not resting
                self.first_stop[i], self.stop_side[i] = self.step, side[i]
        return side

    def begin(self, plant, q, nu, Q, Mh=None):
        """Decide the step at (q, ν) under Q: stops, impulses, stuck set, frozen
        directions.  ν is changed in place (q is not); returns ν̇ (nv,) at the start."""
        self.step += 1
        side = self._stops(q, nu) if len(self.stop_coords) else np.zeros(len(nu), int)
        M = plant.mass(q) if Mh is None else Mh[0]
        impact = (side != 0) & (nu != 0.0)
        if impact.any():
            self._impulse(M, nu, impact, self.locked | (self.held & (side == 0)))
        h = Mh[1] if Mh is not None and not impact.any() else plant.bias(q, nu)
        Fk, Fs = self.Fk.copy(), self.Fs.copy()
        base = Q - h - self.fv * nu
        if self.rolling:
            loads = self._loads = rolling_loads(self.robot, q)
            Fk[:2] += loads.k
            Fs[:2] += loads.k
            c0, c1 = loads.caster_efforts(nu)
            base[0] -= c0
            base[1] -= c1
        self._Fk = Fk
        C = (self.held | (side != 0) | (self.frictional & ((nu == 0.0) | (nu * self.s < 0.0)))) \
            & ~self.locked
        s = np.sign(nu)
        s[C] = 0.0
        while True:
            F = ~(C | self.locked)
            rhs = base - Fk * s
            nu_dot = np.zeros(len(nu))
            if F.any():
                nu_dot[F] = solve_spd(M[np.ix_(F, F)], rhs[F])
            if not C.any():
                break
            H = base - M.dot(nu_dot)                         # holding efforts (rows C)
            excess = np.where(side > 0, -H - Fs, np.where(side < 0, H - Fs, np.abs(H) - Fs))
            excess[~C] = -np.inf
            i = int(np.argmax(excess))
            if not excess[i] > 0.0:
                break
            C[i] = False
            s[i] = np.sign(nu[i]) if nu[i] != 0.0 else np.sign(H[i])
        reset = C & (nu != 0.0)
        if reset.any():
            self._impulse(M, nu, reset, self.locked | (C & ~reset))
        self.held, self.s = C, s
        return nu_dot

    def stage_friction(self, nu):
        """f (nv,) on the left-hand side inside the step (frozen directions)."""
        f = self._Fk * self.s + self.fv * nu
        if self.rolling:
            c0, c1 = self._loads.caster_efforts(nu)
            f[0] += c0
            f[1] += c1
        return f

