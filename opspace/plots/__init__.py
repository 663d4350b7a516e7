"""Figures for people (a sub-package); rendering only, no physics.

- `_style`: size, palette, limit lines, segment bands; `figure_to_png_bytes`, `save`.
- `_sizing`: torque-speed plane, drive time series, loads and traction, margin bars.
- `_topview`: support polygon and ZMP, worst-case robot poses (base frame from above).
- `_simulation`: tracking error, efforts with limits, base path.
- `_animation`: the animation of a run and its frames.
"""

from ._animation import animation, frames_from_result
from ._limits import limit_heat_map
from ._contact import contact_masses, contact_use, speed_maps
from ._simulation import base_path, efforts, tracking_error
from ._sizing import drive_time_series, loads_and_traction, margins_bar, torque_speed_plane
from ._style import DPI, FIG_WIDTH, figure_to_png_bytes, save
from ._topview import robot_poses, support_polygon_zmp

__all__ = [
    "DPI",
    "FIG_WIDTH",
    "animation",
    "base_path",
    "contact_masses",
    "contact_use",
    "drive_time_series",
    "efforts",
    "figure_to_png_bytes",
    "frames_from_result",
    "limit_heat_map",
    "loads_and_traction",
    "margins_bar",
    "robot_poses",
    "save",
    "speed_maps",
    "support_polygon_zmp",
    "torque_speed_plane",
    "tracking_error",
]
