"""Motor-and-gearbox candidate checks and gear-ratio sweeps over a duty.

Built on the drive figures of `opspace.sizing._drives` (equations (1)-(7) there).

Candidate check
---------------
A service factor s >= 1 multiplies every required torque (motor and gearbox),
never a speed: a margin for model error and unmodelled loads (common practice).
Every criterion is "required <= limit" with the margin 1 − required / limit
(dimensionless; passed when margin >= 0):

=======================  ==================================  ====================
criterion                required (worst wheel)              limit
=======================  ==================================  ====================
peak torque              s max |T_m|                         motor peak_torque
RMS torque               s max RMS_thermal(T_m)  (7)         motor rated_torque
speed                    max |ω_m|                           motor max_speed
torque-speed envelope    s |T_m| at the worst point          T_env(|ω_m|) there
gearbox peak torque      s max |τ_out|                       gearbox peak_torque
gearbox rated torque     s max RMS(τ_out)  (6), no rest      gearbox rated_torque
gearbox input speed      max |ω_m|                           gearbox max_input_speed
=======================  ==================================  ====================

The envelope margin is min over all samples of 1 − s |T_m| / T_env(|ω_m|)
(T_env in `opspace.description._catalogue`), −inf at a sample beyond the
envelope's speed range (T_env = 0).  Gearbox rows appear when the catalogue
gives the limit.  The gearbox rated torque is compared with the RMS over the
cycle without credit for the rest between cycles (a simple stand-in for a
life calculation, which is not made).  Rows that do not depend on the drive
(traction, tip-over) are passed in as `extra` `Criterion`s.

Ratio sweep
-----------
For one motor and one gearbox family: every catalogue ratio is checked; a
continuous scan over [G_min, G_max] (a log-spaced grid plus the catalogue
ratios, boundaries refined by bisection to `xatol`) gives the intervals of
ratios that pass (an island narrower than the grid step can be missed); the
ratio minimising the worst wheel's thermal RMS motor torque comes from
`scipy.optimize.minimize_scalar` (bounded).  Per wheel, by (2) and (6),
T_c RMS²(G) = G² ∫(J_m φ̈)² dt + 2 ∫ J_m φ̈ b dt + ∫ b² dt / G² with
b = τ_out / η or τ_out η independent of G: one minimum on G > 0, at
G⁴ = ∫ b² dt / ∫ (J_m φ̈)² dt, so the maximum over wheels is unimodal and the
bounded search finds its global minimum.  The inertia-matching ratio
G_J = sqrt(J_load / J_m) is given for comparison: for a pure inertial load with
η = 1, T_m = (J_m G + J_load / G) φ̈ is smallest where
d/dG = J_m − J_load / G² = 0.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize_scalar

from ._drives import (DIMENSIONLESS, DriveFigures, WheelDuty, _positive, _quantity, _rms,
                     _service_factor, drive_figures, inertia_matching_ratio)

__all__ = [
    "CandidateCheck",
    "Criterion",
    "RatioSweep",
    "check_candidate",
    "evaluate_catalogue",
    "sweep_ratios",
]


# --------------------------------------------------------------------------- criteria

@dataclass(frozen=True)
class Criterion:
    """One pass / fail row: the required `value` against its `limit`, both in `unit`.

    margin is dimensionless (1 − value / limit for "at most" rows); passed is
    margin >= 0.  `note` says where the worst case occurs (wheel, time, point).
    Build rows with `Criterion.at_most`; rows of another form (e.g. a tip-over
    margin already dimensionless) may be built directly.
    """

    name: str
    value: float
    limit: float
    unit: str
    margin: float
    passed: bool
    note: str = ""

    @classmethod
    def at_most(cls, name, value, limit, unit, *, note=""):
        """Row for "value <= limit", limit > 0: margin = 1 − value / limit."""
        value, limit = float(value), float(limit)
        if not (math.isfinite(limit) and limit > 0.0):
            raise ValueError(f"criterion {name!r}: `limit` must be finite and > 0, got {limit!r}")
        if math.isnan(value):
            raise ValueError(f"criterion {name!r}: `value` is nan")
        margin = 1.0 - value / limit
        return cls(name=name, value=value, limit=limit, unit=unit, margin=margin,
                   passed=bool(margin >= 0.0), note=note)

    def to_dict(self):
        return {"name": self.name, "value": _quantity(self.value, self.unit),
                "limit": _quantity(self.limit, self.unit),
                "margin": _quantity(self.margin, DIMENSIONLESS), "passed": self.passed,
                "note": self.note}


@dataclass(frozen=True, eq=False)
class CandidateCheck:
    """A motor with a gearbox family at one ratio, checked against a duty.

    motor, gearbox: names; ratio G; service_factor s; criteria: the rows (motor,
    gearbox, then `extra`); figures: `DriveFigures` (unfactored).
    """

    motor: str
    gearbox: str
    ratio: float
    service_factor: float
    criteria: tuple[Criterion, ...]
    figures: DriveFigures

    @property
    def passed(self):
        return all(c.passed for c in self.criteria)

    @property
    def failed(self):
        """Names of the criteria that fail, in table order."""
        return tuple(c.name for c in self.criteria if not c.passed)

    @property
    def worst(self):
        """The criterion with the smallest margin."""
        return min(self.criteria, key=lambda c: c.margin)

    def criterion(self, name):
        for c in self.criteria:
            if c.name == name:
                return c
        raise KeyError(f"no criterion {name!r} (criteria: {[c.name for c in self.criteria]})")

    def with_criteria(self, extra):
        """A copy with the `extra` Criterion rows appended."""
        return CandidateCheck(motor=self.motor, gearbox=self.gearbox, ratio=self.ratio,
                              service_factor=self.service_factor,
                              criteria=self.criteria + _extra(extra), figures=self.figures)

    def to_dict(self):
        return {"motor": self.motor, "gearbox": self.gearbox,
                "ratio": _quantity(self.ratio, DIMENSIONLESS),
                "service_factor": _quantity(self.service_factor, DIMENSIONLESS),
                "passed": self.passed, "failed": list(self.failed),
                "criteria": [c.to_dict() for c in self.criteria],
                "figures": self.figures.to_dict()}


def _extra(extra):
    extra = tuple(extra)
    for c in extra:
        if not isinstance(c, Criterion):
            raise ValueError(f"`extra` must hold Criterion rows, got {type(c).__name__}")
    return extra


@dataclass(frozen=True)
class _Rows:
    """Criteria over k ratios at once: value, limit, margin (k,) and the flat
    index (into the (n, w) samples, or the wheel for RMS rows) of the worst case."""

    name: str
    unit: str
    value: np.ndarray
    limit: np.ndarray
    margin: np.ndarray
    index: np.ndarray | None
    kind: str  # "sample", "wheel" or "none": what `index` points at


def _rows(duty, motor, gearbox, G, s):
    """Every drive criterion at the ratios G (k,), vectorised (the table above)."""
    k = G.size
    tau, phi_dot, phi_ddot = duty._2d
    J_m = motor.rotor_inertia + gearbox.inertia
    Gx = G[:, None, None]
    T_m = J_m * Gx * phi_ddot + duty._b(gearbox.efficiency) / Gx   # (2), (k, n, w)
    absT = s * np.abs(T_m).reshape(k, -1)                       # (k, n w)
    abs_w = G[:, None] * np.abs(phi_dot).reshape(1, -1)         # (k, n w)
    rms = s * math.sqrt(duty.duty_factor) * np.sqrt(
        np.einsum("knw,n->kw", T_m * T_m, duty._weights) / duty.cycle_time)   # (k, w)
    rows = []

    def at_most(name, unit, required, limit, index, kind):
        limit = np.broadcast_to(np.asarray(limit, dtype=float), required.shape)
        rows.append(_Rows(name, unit, required, limit, 1.0 - required / limit, index, kind))

    i = np.argmax(absT, axis=1)
    at_most("peak torque", "N·m", absT[np.arange(k), i], motor.peak_torque, i, "sample")
    i = np.argmax(rms, axis=1)
    at_most("RMS torque", "N·m", rms[np.arange(k), i], motor.rated_torque, i, "wheel")
    i_w = np.argmax(abs_w, axis=1)
    w_peak = abs_w[np.arange(k), i_w]
    at_most("speed", "rad/s", w_peak, motor.max_speed, i_w, "sample")

    T_env = motor.envelope(abs_w)
    ratio = np.divide(absT, T_env, out=np.full_like(absT, np.inf), where=T_env > 0.0)
    i = np.argmax(ratio, axis=1)
    kk = np.arange(k)
    rows.append(_Rows("torque-speed envelope", "N·m", absT[kk, i], T_env[kk, i],
                      1.0 - ratio[kk, i], i, "sample"))

    if gearbox.peak_torque is not None:
        a = s * np.abs(tau).reshape(-1)
        i = int(np.argmax(a))
        at_most("gearbox peak torque", "N·m", np.full(k, a[i]), gearbox.peak_torque,
                np.full(k, i), "sample")
    if gearbox.rated_torque is not None:
        r = s * _rms(duty, tau)
        i = int(np.argmax(r))
        at_most("gearbox rated torque", "N·m", np.full(k, r[i]), gearbox.rated_torque,
                np.full(k, i), "wheel")
    if gearbox.max_input_speed is not None:
        at_most("gearbox input speed", "rad/s", w_peak, gearbox.max_input_speed, i_w, "sample")
    return rows


def _note(duty, row, j):
    """Where the worst case of row `row` at ratio number j occurs."""
    if row.kind == "wheel":
        return f"{duty.wheels[int(row.index[j])]} wheel" if duty.n_wheels > 1 else ""
    if row.kind != "sample":
        return ""
    n_i, w_i = divmod(int(row.index[j]), duty.n_wheels)
    where = f"{duty.wheels[w_i]} wheel, " if duty.n_wheels > 1 else ""
    return f"{where}t = {duty.t[n_i]:.4g} s"


def _min_margin(duty, motor, gearbox, G, s, extra_margin):
    rows = _rows(duty, motor, gearbox, G, s)
    return np.minimum(np.min([r.margin for r in rows], axis=0), extra_margin)


def check_candidate(duty, motor, gearbox, ratio, *, service_factor=1.0, extra=()):
    """Check `motor` with `gearbox` at gear ratio `ratio` against `duty`.

    Parameters
    ----------
    duty : WheelDuty
    motor : catalogue.Motor
    gearbox : catalogue.Gearbox   (its efficiency, inertia and limits; `ratio` need
                                   not be one of its catalogue ratios)
    ratio : float                 G, motor speed / wheel speed, > 0
    service_factor : float        s >= 1, multiplies every required torque
    extra : sequence of Criterion rows appended unchanged (traction, tip-over, ...)

    Returns
    -------
    CandidateCheck   rows in the order of the module docstring's table, then `extra`
    """
    if not isinstance(duty, WheelDuty):
        raise ValueError(f"`duty` must be a WheelDuty, got {type(duty).__name__}")
    G = _positive("ratio", ratio)
    s = _service_factor(service_factor)
    rows = _rows(duty, motor, gearbox, np.array([G]), s)
    criteria = []
    for r in rows:
        note = _note(duty, r, 0)
        if r.name == "torque-speed envelope":
            n_i, w_i = divmod(int(r.index[0]), duty.n_wheels)
            omega = G * abs(duty._2d[1][n_i, w_i])
            note = f"{note}, |ω_m| = {omega:.4g} rad/s, s |T_m| = {r.value[0]:.4g} N·m"
        criteria.append(Criterion(name=r.name, value=float(r.value[0]), limit=float(r.limit[0]),
                                  unit=r.unit, margin=float(r.margin[0]),
                                  passed=bool(r.margin[0] >= 0.0), note=note))
    figures = drive_figures(duty, gear_ratio=G, efficiency=gearbox.efficiency,
                            inertia=motor.rotor_inertia + gearbox.inertia,
                            torque_constant=motor.torque_constant, resistance=motor.resistance)
    return CandidateCheck(motor=motor.name, gearbox=gearbox.name, ratio=G, service_factor=s,
                          criteria=tuple(criteria) + _extra(extra), figures=figures)


# --------------------------------------------------------------------------- ratio sweep

@dataclass(frozen=True, eq=False)
class RatioSweep:
    """One motor with one gearbox family over its ratios.

    checks: a `CandidateCheck` per catalogue ratio (ascending); scan_range
    (G_min, G_max) of the continuous scan; pass_intervals: ((G_lo, G_hi), ...)
    the ratios of the scan that pass every criterion (usually one interval; empty
    when none passes); rms_optimal_ratio G minimising the worst wheel's thermal
    RMS motor torque on scan_range (or on the caller's bounds) and
    rms_optimal_torque that torque, N·m (unfactored); rms_optimum_at_bound: the
    optimum lies on a bound (a wider range could do better); motor_inertia J_m
    kg·m² (rotor + gearbox input); load_inertia J_load kg·m² at the wheel and
    inertia_matching_ratio sqrt(J_load / J_m) (None when J_load was not given).
    """

    motor: str
    gearbox: str
    checks: tuple[CandidateCheck, ...]
    scan_range: tuple[float, float]
    pass_intervals: tuple[tuple[float, float], ...]
    rms_optimal_ratio: float
    rms_optimal_torque: float
    rms_optimum_at_bound: bool
    motor_inertia: float
    load_inertia: float | None
    inertia_matching_ratio: float | None
    service_factor: float

    @property
    def ratios(self):
        return tuple(c.ratio for c in self.checks)

    @property
    def passing_ratios(self):
        """The catalogue ratios that pass every criterion."""
        return tuple(c.ratio for c in self.checks if c.passed)

    @property
    def best(self):
        """The passing catalogue ratio's check with the largest smallest margin, or None."""
        ok = [c for c in self.checks if c.passed]
        return max(ok, key=lambda c: c.worst.margin) if ok else None

    def to_dict(self):
        q = lambda v, u=DIMENSIONLESS: None if v is None else _quantity(v, u)  # noqa: E731
        return {"motor": self.motor, "gearbox": self.gearbox,
                "passing_ratios": list(self.passing_ratios),
                "scan_range": list(self.scan_range),
                "pass_intervals": [list(iv) for iv in self.pass_intervals],
                "rms_optimal_ratio": q(self.rms_optimal_ratio),
                "rms_optimal_torque": q(self.rms_optimal_torque, "N·m"),
                "rms_optimum_at_bound": self.rms_optimum_at_bound,
                "motor_inertia": q(self.motor_inertia, "kg·m²"),
                "load_inertia": q(self.load_inertia, "kg·m²"),
                "inertia_matching_ratio": q(self.inertia_matching_ratio),
                "service_factor": q(self.service_factor),
                "checks": [c.to_dict() for c in self.checks]}


def _thermal_rms_worst(duty, G, eta, J_m):
    """Worst wheel's thermal RMS motor torque (7) at one ratio G, N·m (unfactored)."""
    T_m = J_m * G * duty._2d[2] + duty._b(eta) / G                  # (2)
    return float(np.max(_rms(duty, T_m))) * math.sqrt(duty.duty_factor)


def _pass_intervals(duty, motor, gearbox, lo, hi, s, extra_margin, scan_points, xatol):
    """Intervals of [lo, hi] where every criterion passes (grid, then bisection)."""
    if hi <= lo:
        ok = _min_margin(duty, motor, gearbox, np.array([lo]), s, extra_margin)[0] >= 0.0
        return ((lo, lo),) if ok else ()
    grid = np.union1d(np.geomspace(lo, hi, scan_points), np.clip(gearbox.ratios, lo, hi))
    ok = _min_margin(duty, motor, gearbox, grid, s, extra_margin) >= 0.0
    change = np.flatnonzero(ok[1:] != ok[:-1])            # between grid[i] and grid[i + 1]
    a, b, pa = grid[change], grid[change + 1], ok[change]
    for _ in range(200):                                   # bisection of every boundary at once
        if a.size == 0 or np.max(b - a) <= xatol:
            break
        m = 0.5 * (a + b)
        pm = _min_margin(duty, motor, gearbox, m, s, extra_margin) >= 0.0
        same = pm == pa
        a, b = np.where(same, m, a), np.where(same, b, m)
    edge = dict(zip(change.tolist(), np.where(pa, a, b).tolist()))  # the passing end
    intervals, start = [], None
    for i, flag in enumerate(ok):
        if flag and start is None:
            start = grid[0] if i == 0 else edge[i - 1]
        if flag and (i == ok.size - 1 or not ok[i + 1]):
            intervals.append((float(start), float(grid[-1] if i == ok.size - 1 else edge[i])))
            start = None
    return tuple(intervals)


def sweep_ratios(duty, motor, gearbox, *, load_inertia=None, service_factor=1.0, extra=(),
                 bounds=None, scan_points=64, xatol=1e-3):
    """Check every ratio of a gearbox family with one motor; scan, optimise, compare.

    Parameters
    ----------
    duty : WheelDuty
    motor : catalogue.Motor
    gearbox : catalogue.Gearbox
    load_inertia : float or None   J_load, kg·m² at the wheel (per wheel), for the
                                   inertia-matching ratio
    service_factor : float         s >= 1 (see `check_candidate`)
    extra : sequence of Criterion  drive-independent rows, the same for every ratio
    bounds : (G_lo, G_hi) or None  range of the scan and the RMS optimisation
                                   (default: the family's smallest and largest ratio)
    scan_points : int              log-spaced grid points of the scan, >= 2
    xatol : float                  absolute tolerance on ratios (bisection and the
                                   bounded search's `xatol`)

    Returns
    -------
    RatioSweep
    """
    if not isinstance(duty, WheelDuty):
        raise ValueError(f"`duty` must be a WheelDuty, got {type(duty).__name__}")
    s = _service_factor(service_factor)
    extra = _extra(extra)
    xatol = _positive("xatol", xatol)
    if isinstance(scan_points, bool) or not isinstance(scan_points, int) or scan_points < 2:
        raise ValueError(f"`scan_points` must be an integer >= 2, got {scan_points!r}")
    lo, hi = (gearbox.ratios[0], gearbox.ratios[-1]) if bounds is None else bounds
    lo, hi = _positive("bounds[0]", lo), _positive("bounds[1]", hi)
    if hi < lo:
        raise ValueError(f"`bounds` must be increasing, got {bounds!r}")
    J_m = motor.rotor_inertia + gearbox.inertia
    eta = gearbox.efficiency
    checks = tuple(check_candidate(duty, motor, gearbox, G, service_factor=s, extra=extra)
                   for G in gearbox.ratios)
    extra_margin = min((c.margin for c in extra), default=math.inf)
    intervals = _pass_intervals(duty, motor, gearbox, lo, hi, s, extra_margin, scan_points, xatol)

    f = lambda G: _thermal_rms_worst(duty, G, eta, J_m)  # noqa: E731
    if hi > lo:
        res = minimize_scalar(f, bounds=(lo, hi), method="bounded", options={"xatol": xatol})
        # the bounded search never samples a bound itself: compare with both ends
        G_opt, T_opt = min(((float(res.x), float(res.fun)), (lo, f(lo)), (hi, f(hi))),
                           key=lambda p: p[1])
        at_bound = G_opt in (lo, hi)
    else:
        G_opt, T_opt, at_bound = lo, f(lo), True
    J_L = None if load_inertia is None else _positive("load_inertia", load_inertia)
    return RatioSweep(
        motor=motor.name, gearbox=gearbox.name, checks=checks, scan_range=(lo, hi),
        pass_intervals=intervals, rms_optimal_ratio=G_opt, rms_optimal_torque=T_opt,
        rms_optimum_at_bound=at_bound, motor_inertia=J_m, load_inertia=J_L,
        inertia_matching_ratio=None if J_L is None else inertia_matching_ratio(J_L, J_m),
        service_factor=s)


def evaluate_catalogue(duty, catalogue, *, load_inertia=None, service_factor=1.0, extra=(),
                       scan_points=64, xatol=1e-3):
    """`sweep_ratios` for every motor with every gearbox family of `catalogue`.

    Returns a tuple of RatioSweep, motors in catalogue order, each with every
    family in catalogue order.
    """
    return tuple(sweep_ratios(duty, m, g, load_inertia=load_inertia,
                              service_factor=service_factor, extra=extra,
                              scan_points=scan_points, xatol=xatol)
                 for m in catalogue.motors for g in catalogue.gearboxes)
