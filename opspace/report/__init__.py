"""Output for people (a sub-package): text summaries, the sizing report
(HTML, JSON, CSV), the 3-D view of every page (`_scene3d`, `_views`).  Formats
what the physics modules computed; no physics here.
"""

from ._scene3d import Marker, Scene3D, robot_scene, scene_html
from ._views import design_view, simulation_view, sizing_view
from .sizing import ASSUMPTIONS, CAUTIONS, sizing_summary, write_sizing_report, write_timeseries_csv
from .text import CAUTION, check_summary, losses

__all__ = ["ASSUMPTIONS", "CAUTION", "CAUTIONS", "Marker", "Scene3D", "check_summary",
           "design_view", "losses", "robot_scene", "scene_html", "simulation_view",
           "sizing_summary", "sizing_view", "write_sizing_report", "write_timeseries_csv"]
