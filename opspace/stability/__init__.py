"""Stability of the wheeled base (a sub-package).

- `_contacts`: support polygon, ZMP from a ground wrench, normal loads per
  contact (with lift-off).
- `_margins`: traction use, tip angle, stopping limits.
- `_support`: the load model the description chooses (equal or per-contact
  stiffness, sprung drive wheels, rockers; floor unevenness) and the normal
  loads under it.
- `_wrench`: the total ground-reaction wrench of the robot from Pinocchio's
  centroidal momentum rate and gravity, and the per-instant stability figures.
"""

from .._common import GRAVITY
from ._contacts import ContactLoads, SupportPolygon, normal_loads, support_polygon, zmp
from ._margins import StoppingLimits, stopping_limits, tip_angle, traction_use
from ._support import (SupportLoads, SupportModel, check_standing, describe_lift_off,
                       lift_off_spans, support_loads, support_model)
from ._wrench import (GroundWrench, StabilityTrack, ground_wrench, merge_tracks,
                      stability_figures, stability_track, tyre_forces)

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
    "merge_tracks",
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
