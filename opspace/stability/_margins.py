"""Margins of the wheeled base: traction use, tip angle, stopping limits.

Equations (3)-(6) of `opspace.stability._contacts` (quasi-static, rigid robot)::

    θ_tip = atan(d / h)                                                 (3)
    a_tip = g d / h                                                     (4)
    a_trac = μ g ρ                       (no load transfer)             (5a)
    a_trac = μ g ρ / (1 + μ h / L)       (two contact lines)            (5b)
    t_stop = v / a,   s_stop = v² / (2 a),   a = min(a_tip, a_trac)     (6)

Sources and derivations are in that module's docstring and in `stopping_limits`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._common import GRAVITY
from ._contacts import _out, _positive, _real, _scalar

__all__ = ["StoppingLimits", "stopping_limits", "tip_angle", "traction_use"]


# --------------------------------------------------------------------------- margins

def traction_use(f_tangential, N, mu):
    """Fraction of the available friction used: |F_t| / (μ N).

    Coulomb friction (common practice, no source): a contact slips when the
    result exceeds 1.  Where N <= 0 (lifted) the result is inf, also when
    F_t = 0, so a lifted drive wheel always shows.

    Parameters
    ----------
    f_tangential : float or array_like
        Tangential (traction or braking) force magnitude at each contact, N;
        its sign is ignored.  Broadcast against N and mu.
    N : float or array_like
        Normal load at each contact, N.
    mu : float or array_like
        Friction coefficient, > 0.

    Returns
    -------
    float or ndarray
        Dimensionless.
    """
    F = _real("f_tangential", f_tangential)
    N = _real("N", N)
    mu = _positive("mu", mu)
    try:
        shape = np.broadcast_shapes(F.shape, N.shape, mu.shape)
    except ValueError as exc:
        raise ValueError(f"`f_tangential` {F.shape}, `N` {N.shape} and `mu` {mu.shape} "
                         "do not broadcast together") from exc
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.where(N > 0.0, np.abs(F) / (mu * N), np.inf)
    return _out(np.broadcast_to(u, shape).copy())


def tip_angle(polygon_edge_distance, com_height):
    """Static tip-over angle of a ramp: θ = atan(d / h).

    Statics of a rigid body (common practice): on a ramp of slope θ, falling
    towards the downhill edge, gravity passes through that edge when
    tan θ = d / h.

    Parameters
    ----------
    polygon_edge_distance : float or array_like
        d, horizontal distance from the COM projection to the downhill edge
        of the support polygon, m (for the worst direction, the
        `SupportPolygon.margin` of the COM projection);
        negative if the COM projection is already outside.
    com_height : float or array_like
        h, COM height above the ground, normal to it, m, > 0.

    Returns
    -------
    float or ndarray
        θ, rad, in (−π/2, π/2).
    """
    d = _real("polygon_edge_distance", polygon_edge_distance)
    h = _positive("com_height", com_height)
    return _out(np.arctan2(d, h))


@dataclass(frozen=True)
class StoppingLimits:
    """Largest decelerations and the resulting stop from `speed`.

    Attributes
    ----------
    a_tip : float        deceleration at which the ZMP reaches the front edge, m/s²
    a_trac : float       deceleration at which the braked drive wheels slide, m/s²
                         (inf: load transfer outpaces the braking force)
    a_stop : float       min(a_tip, a_trac), m/s²
    limited_by : str     "tip-over" or "traction"
    v : float            initial (top) speed, m/s
    t_stop : float       v / a_stop, s
    s_stop : float       v² / (2 a_stop), m
    traction_model : str how a_trac was obtained
    """

    a_tip: float
    a_trac: float
    a_stop: float
    limited_by: str
    v: float
    t_stop: float
    s_stop: float
    traction_model: str

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def stopping_limits(com_height, edge_distance, mu, drive_load_fraction, speed, *,
                    caster_offset=None, g=GRAVITY) -> StoppingLimits:
    """Largest forward-braking deceleration that keeps the robot upright and gripping.

    a_tip = g d / h (eq. 4): under deceleration a the ZMP moves forward by
    a h / g (d'Alembert force m a at the COM), and reaches the front edge at
    a = g d / h (statics).

    Traction, the drive wheels being the only braked contacts (casters roll
    freely), braking force m a <= μ N_d:

    * ``caster_offset=None``: N_d = ρ m g, the static load, so a_trac = μ g ρ
      (eq. 5a).  This ignores the load transfer, which under braking unloads
      the drive wheels when the casters are ahead of them (optimistic) and
      loads them when the casters are behind (conservative).
    * ``caster_offset=L`` (casters on one line at signed distance L ahead of
      the drive axle, L < 0 behind): moments about the COM at height h give
      N_d = m (g ρ − a h / L), with ρ = (x_caster − x_com) / L, hence
      μ m (g ρ − a h / L) = m a  →  a_trac = μ g ρ / (1 + μ h / L)  (eq. 5b;
      the traction-limited performance of a single braked axle, Gillespie,
      Fundamentals of Vehicle Dynamics, 1992, ch. 2-3).  If 1 + μ h / L <= 0
      the drive wheels never slide, whatever the deceleration: a_trac = inf.

    Parameters
    ----------
    com_height : float
        h, COM height above the ground, m, > 0.
    edge_distance : float
        d, horizontal distance from the COM projection to the front edge of
        the support polygon, m, > 0.
    mu : float
        Tyre-ground friction coefficient, > 0.
    drive_load_fraction : float
        ρ, static fraction of the weight on the drive wheels, in (0, 1].
    speed : float
        v, speed at which braking starts, m/s, >= 0.
    caster_offset : float, optional, keyword-only
        L, signed x of the caster contact line relative to the drive axle, m,
        nonzero; when given, a_trac includes the load transfer (eq. 5b).
    g : float, keyword-only
        Gravity, m/s², > 0.

    Returns
    -------
    StoppingLimits
    """
    h = float(_positive("com_height", _scalar("com_height", com_height)))
    d = float(_positive("edge_distance", _scalar("edge_distance", edge_distance)))
    mu = float(_positive("mu", _scalar("mu", mu)))
    rho = _scalar("drive_load_fraction", drive_load_fraction)
    if not 0.0 < rho <= 1.0:
        raise ValueError(f"`drive_load_fraction` must be in (0, 1], got {rho}")
    v = _scalar("speed", speed)
    if v < 0.0:
        raise ValueError(f"`speed` must be >= 0 m/s, got {v}")
    g = float(_positive("g", _scalar("g", g)))

    a_tip = g * d / h
    if caster_offset is None:
        a_trac = mu * g * rho
        model = "a = μ g ρ: static drive-wheel load, longitudinal load transfer ignored"
    else:
        L = _scalar("caster_offset", caster_offset)
        if L == 0.0:
            raise ValueError("`caster_offset` must be nonzero: casters on the drive axle "
                             "line give no pitch support")
        den = 1.0 + mu * h / L
        a_trac = mu * g * rho / den if den > 0.0 else np.inf
        model = (f"a = μ g ρ / (1 + μ h / L), L = {L:g} m: two contact lines with "
                 "longitudinal load transfer")
    a = min(a_tip, a_trac)
    return StoppingLimits(a_tip=a_tip, a_trac=float(a_trac), a_stop=a,
                          limited_by="tip-over" if a_tip <= a_trac else "traction",
                          v=v, t_stop=v / a, s_stop=v * v / (2.0 * a),
                          traction_model=model)
