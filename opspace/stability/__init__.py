"""Stability of the wheeled base (a sub-package).

- `contacts`: support polygon, ZMP from a ground wrench, normal loads per
  contact (with lift-off), traction use, tip angle, stopping limits.
- `_support`: the load model the description chooses (equal or per-contact
  stiffness, sprung drive wheels, rockers; floor unevenness) and the normal
  loads under it.
- `wrench`: the total ground-reaction wrench of the robot from Pinocchio's
  centroidal momentum rate and gravity, and the per-instant stability figures.
"""

from .contacts import (GRAVITY, ContactLoads, StoppingLimits, SupportPolygon, normal_loads,
                       stopping_limits, support_polygon, tip_angle, traction_use, zmp)
from ._support import (SupportLoads, SupportModel, check_standing, describe_lift_off,
                       lift_off_spans, support_loads, support_model)
from .wrench import (GroundWrench, StabilityTrack, ground_wrench, stability_figures,
                     stability_track, tyre_forces)

__all__ = [
    "GRAVITY",
    "ContactLoads",
    "GroundWrench",
    "StabilityTrack",
    "StoppingLimits",
    "SupportLoads",
    "SupportModel",
    "SupportPolygon",
    "check_standing",
    "describe_lift_off",
    "ground_wrench",
    "lift_off_spans",
    "normal_loads",
    "stability_figures",
    "stability_track",
    "stopping_limits",
    "support_loads",
    "support_model",
    "support_polygon",
    "tip_angle",
    "traction_use",
    "tyre_forces",
    "zmp",
]
