"""The two-body model of a transient contact between a robot and a person.

A moving robot of effective mass m_R strikes a body region of effective mass
m_H and effective spring constant k.  All the relative kinetic energy of the
two masses goes into the spring at the largest compression:

    E = ½ μ v²,   μ = (1/m_H + 1/m_R)⁻¹                      (reduced mass)
    E = F² / (2 k)                                          (linear spring)

so the force stays within the permissible transient force F_T when

    v ≤ v_max = F_T / √(μ k)

(ISO/TS 15066:2016, Annex A, eqs. A.1-A.6).  With a contact area A the
pressure limit gives a second force bound p_T A, and the smaller force rules.
The transient limits are the quasi-static ones times the region's transient
factor (Table A.2; 0 = transient contact not permitted, v_max = 0).  An
infinite m_R (the point cannot move along the direction) gives μ = m_H.
"""

from __future__ import annotations

import math

__all__ = ["contact_energy", "permissible_force", "permissible_speed", "reduced_mass"]


def reduced_mass(m_H, m_R):
    """μ = (1/m_H + 1/m_R)⁻¹, kg; m_R = inf gives m_H."""
    if math.isinf(m_R):
        return float(m_H)
    return 1.0 / (1.0 / m_H + 1.0 / m_R)


def permissible_force(region, area=None):
    """Largest transient contact force, N: F_T = f_T F_s, or f_T p_s A when a
    contact area A (m²) makes the pressure limit the smaller."""
    force = region.transient_factor * region.force
    if area is not None:
        force = min(force, region.transient_factor * region.pressure * area)
    return force


def permissible_speed(region, m_R, area=None):
    """v_max = F_T / √(μ k), m/s, for a robot of effective mass m_R (kg) striking
    `region` (a `BodyRegion`)."""
    mu = reduced_mass(region.mass, m_R)
    return permissible_force(region, area) / math.sqrt(mu * region.spring_constant)


def contact_energy(force, k):
    """E = F² / (2 k), J: the energy a spring of constant k (N/m) stores at force F (N)."""
    return force * force / (2.0 * k)
