"""Motion limits of the base over the arm's workspace (a sub-package).

How hard may the base accelerate, brake, turn and spin with the arm held
here?  Built on the public dynamics (`inverse_dynamics_batch`) and stability
(`ground_wrench`, `tyre_forces`, `stability_figures`) functions.

- `motion_limits`, `motion_limits_batch`: the limits at one or many arm
  configurations, each with what limits it.
- `limits_map`, `pose_limits`: over a grid of tool positions (side and top
  views, redundancy resolved from a posture) and over the named poses.
- `protective_speed`: the top speed whose stop fits in a protective field.
"""

from ._limits import (BatchLimits, Limit, MotionLimits, NAMES, UNITS, motion_limits,
                      motion_limits_batch)
from ._maps import (CAUTIONS, RULE, LimitsMap, LimitsStudy, PoseLimits, evaluate_map_chunk,
                    limits_map, limits_study, pose_limits, protective_speed, reach_positions)

__all__ = ["BatchLimits", "CAUTIONS", "Limit", "LimitsMap", "LimitsStudy", "MotionLimits", "NAMES", "PoseLimits", "RULE",
           "UNITS", "evaluate_map_chunk", "limits_map", "limits_study", "motion_limits", "motion_limits_batch", "pose_limits",
           "protective_speed", "reach_positions"]
