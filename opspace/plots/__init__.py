"""Figures for people (a sub-package); rendering only, no physics.

- `sizing`: torque-speed plane, drive time series, support polygon and ZMP,
  loads and traction, worst-case arm poses, margin bars; shared helpers
  (`figure_to_png_bytes`, `save`).
- `simulation`: tracking error, efforts with limits, base path, animation.
"""

from .simulation import animation, base_path, efforts, frames_from_result, tracking_error
from .sizing import (DPI, FIG_WIDTH, drive_time_series, figure_to_png_bytes, loads_and_traction,
                     margins_bar, robot_poses, save, support_polygon_zmp, torque_speed_plane)

__all__ = [
    "DPI",
    "FIG_WIDTH",
    "animation",
    "base_path",
    "efforts",
    "frames_from_result",
    "tracking_error",
    "drive_time_series",
    "figure_to_png_bytes",
    "loads_and_traction",
    "margins_bar",
    "robot_poses",
    "save",
    "support_polygon_zmp",
    "torque_speed_plane",
]
