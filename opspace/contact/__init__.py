"""Contact with people: effective mass and permissible speed (a design pre-check).

The robot's side of the two-body transient-contact model is its effective mass
at the contact point along the direction of motion, m_u = 1/(uᵀ Λ⁻¹ u), here
for the whole body in the reduced nonholonomic coordinates (wheels included),
with the base locked, and by the hand estimate; the person's side is a body
region of a table (ISO/TS 15066:2016 Annex A, bundled from memory, or the
user's own).  See `_two_body` for the model and `_points` for the masses.

This is a pre-check for design, not a validation: collaborative operation
needs a risk assessment and measurement with calibrated instruments; defer to
the applicable standards and licensed engineering practice.
"""

from ..description import (BodyRegion, ContactPointSpec, RegionTable, load_contact_points,
                           load_regions)
from ._check import CAUTIONS, ContactCheck, check_contacts
from ._motion import ContactTrack, SpeedMap, contact_track, heaviest_pose, speed_map
from ._points import PointMass, effective_masses, point_position
from ._two_body import contact_energy, permissible_force, permissible_speed, reduced_mass

__all__ = [
    "BodyRegion",
    "CAUTIONS",
    "check_contacts",
    "ContactCheck",
    "contact_energy",
    "contact_track",
    "ContactTrack",
    "heaviest_pose",
    "speed_map",
    "SpeedMap",
    "ContactPointSpec",
    "effective_masses",
    "load_contact_points",
    "load_regions",
    "permissible_force",
    "permissible_speed",
    "point_position",
    "PointMass",
    "reduced_mass",
    "RegionTable",
]
