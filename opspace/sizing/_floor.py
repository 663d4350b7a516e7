"""The cycle's critical instants on the worst floor the description allows.

The description gives the floor as ranges: a friction coefficient between
`[ground] friction_range` = [μ_low, μ_high] (nominal μ inside) and an
unevenness e (`[support] unevenness`), a dip or a step of height e under any
one contact.  Traction use |F_t| / (μ N) grows as μ falls, so its worst is at
μ_low; the floor's shape changes the normal loads (`support_loads`, eq. 1 of
`stability._support`: the contact's deflection loses e) and tilts the chassis
by (β, γ), which moves the centre of mass, and so the ZMP, by h (β, γ) (small
angles, h the COM height; statics of the tilted rigid body).

At each critical sample (the extremes of a, α and v ω per payload and grade,
and the samples of least tip-over margin and largest traction use), every
case is evaluated: the flat floor and, for each contact in turn, a dip and a
step of e.  The worst traction use and the least tip-over margin over them are
reported beside the nominal figures (flat floor, nominal μ) of the same
samples.  Floor flatness: see README (the unevenness is the user's choice; the
README quotes what common floor classes allow).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..dynamics import caster_forces, static_loads_batch
from ..stability import ground_wrench, stability_figures

__all__ = ["FloorRange", "worst_floor"]


@dataclass(frozen=True)
class FloorRange:
    """Traction use and tip-over margin at nominal and on the worst floor.

    mu_nominal, mu_worst; unevenness m; samples: how many critical samples;
    traction_nominal, traction_worst: largest use (inf: a drive wheel lifts off);
    margin_nominal, margin_worst: least ZMP margin, m; traction_case,
    margin_case: the floor case that sets each worst ("flat", "3 mm dip under
    wheel_right", ...) and traction_t, margin_t the instant, s; traction_wheel.
    """

    mu_nominal: float
    mu_worst: float
    unevenness: float
    samples: int
    traction_nominal: float
    traction_worst: float
    traction_case: str
    traction_t: float
    traction_wheel: str
    margin_nominal: float
    margin_worst: float
    margin_case: str
    margin_t: float

    @property
    def lift_off(self):
        return math.isinf(self.traction_worst)

    def to_dict(self) -> dict:
        def q(v, unit):
            return {"value": v, "unit": unit}
        return {"friction": {"nominal": q(self.mu_nominal, "1"), "worst": q(self.mu_worst, "1")},
                "unevenness": q(self.unevenness, "m"),
                "critical_samples": q(self.samples, "1"),
                "traction_use": {"nominal": q(self.traction_nominal, "1"),
                                 "worst": q(self.traction_worst, "1"),
                                 "worst_case": self.traction_case,
                                 "worst_wheel": self.traction_wheel,
                                 "worst_t": q(self.traction_t, "s"),
                                 "lift_off": self.lift_off},
                "tip_over_margin": {"nominal": q(self.margin_nominal, "m"),
                                    "worst": q(self.margin_worst, "m"),
                                    "worst_case": self.margin_case,
                                    "worst_t": q(self.margin_t, "s")}}


def _critical_samples(ev):
    """Sample indices: extremes of a, α, v ω per (payload, grade) group, and the
    samples of least margin and largest traction use."""
    picks = set()
    lateral = ev.v * ev.omega
    for key in {(bool(p), float(g)) for p, g in zip(ev.payload, ev.grade)}:
        m = np.flatnonzero((ev.payload == key[0]) & (ev.grade == key[1]))
        for series in (ev.a, -ev.a, ev.alpha, -ev.alpha, lateral, -lateral):
            picks.add(int(m[np.argmax(series[m])]))
    st = ev.stability
    picks.add(int(np.argmin(st.margin)))
    use = np.where(np.isnan(st.traction), np.inf, st.traction)
    picks.update(int(i) for i in np.argmax(use, axis=0))
    return np.array(sorted(picks))


def _cases(names, e):
    """(label, floor (k,)) for the flat floor and a dip and a step under each contact."""
    k = len(names)
    out = [("flat floor", np.zeros(k))]
    if e > 0:
        for i, name in enumerate(names):
            for sign, what in ((1.0, "dip"), (-1.0, "step")):
                f = np.zeros(k)
                f[i] = sign * e
                out.append((f"{e * 1000:g} mm {what} under {name}", f))
    return out


def worst_floor(robot, ev):
    """`FloorRange` of a `CycleEvaluation` (module docstring)."""
    d = robot.description
    mu, (mu_low, _) = robot.ground_friction, d.friction_range
    names = [c.name for c in robot.contacts]
    idx = _critical_samples(ev)
    cases = _cases(names, d.support.unevenness)
    n = len(idx)
    use = np.full((len(cases), n, 2), np.nan)
    margin = np.full((len(cases), n), np.nan)
    with robot.kept():
        for has_payload, grade in {(bool(ev.payload[i]), float(ev.grade[i])) for i in idx}:
            sel = np.flatnonzero((ev.payload[idx] == has_payload) & (ev.grade[idx] == grade))
            j = idx[sel]
            if has_payload:
                robot.attach_payload()
            else:
                robot.detach_payload()
            robot.set_ground_slope(math.atan(grade))
            w = ground_wrench(robot, ev.qs[j], ev.nu[j], ev.nu_dot[j])
            cf = None
            if robot.rolling_resistance:
                cf = caster_forces(robot, ev.nu[j], static_loads_batch(robot, ev.qs[j]))
            flat = None
            for c, (_, floor) in enumerate(cases):
                tr = stability_figures(robot, w, ev.wheel_force[j], mu=mu_low, floor=floor,
                                       caster_force=cf)
                flat = tr if flat is None else flat
                use[c, sel] = np.where(np.isnan(tr.traction), np.inf, tr.traction)
                shift = w.com[:, 2:3] * (tr.loads.tilt - flat.loads.tilt)
                z = tr.zmp + shift
                # no finite ZMP or tilt: the chassis finds no rest on that floor (tips)
                ok = np.all(np.isfinite(z), axis=1)
                m = np.full(len(z), -np.inf)
                if ok.any():
                    m[ok] = tr.polygon.margin(z[ok])[0]
                margin[c, sel] = m
    st = ev.stability
    nominal = np.where(np.isnan(st.traction[idx]), np.inf, st.traction[idx])
    c_u, i_u, w_u = np.unravel_index(int(np.argmax(use)), use.shape)
    c_m, i_m = np.unravel_index(int(np.argmin(margin)), margin.shape)
    return FloorRange(
        mu_nominal=mu, mu_worst=mu_low, unevenness=d.support.unevenness, samples=n,
        traction_nominal=float(np.max(nominal)), traction_worst=float(use[c_u, i_u, w_u]),
        traction_case=cases[c_u][0], traction_t=float(ev.t[idx[i_u]]),
        traction_wheel=names[w_u],
        margin_nominal=float(np.min(st.margin[idx])), margin_worst=float(margin[c_m, i_m]),
        margin_case=cases[c_m][0], margin_t=float(ev.t[idx[i_m]]))
