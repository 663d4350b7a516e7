"""Motion limits of the base over the arm's workspace (a sub-package).

How hard may the base accelerate, brake, turn and spin with the arm held
here?  Built on the public dynamics (`inverse_dynamics_batch`) and stability
(`ground_wrench`, `tyre_forces`, `stability_figures`) functions.

- `motion_limits`, `motion_limits_batch`: the limits at one or many arm
  configurations, each with what limits it.
"""

from ._limits import (BatchLimits, Limit, MotionLimits, NAMES, motion_limits,
                      motion_limits_batch)

__all__ = ["BatchLimits", "Limit", "MotionLimits", "NAMES", "motion_limits",
           "motion_limits_batch"]
