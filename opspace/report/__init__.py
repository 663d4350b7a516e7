"""Output for people (a sub-package): text summaries, the sizing report
(HTML, JSON, CSV), the 3-D view of every page (`_scene3d`, `_views`).  Formats
what the physics modules computed; no physics here.
"""

from ._contact import contact_html, contact_section, contact_summary, write_contact_report
from ._html import Page, fmt
from ._limits import write_limits_report
from ._identify import identify_summary, toml_text, write_identify_outputs
from ._scene3d import Marker, Scene3D, robot_scene, scene_html
from ._simulation import (simulation_html, simulation_text, tracking_targets,
                          write_simulation_outputs)
from ._sizing import ASSUMPTIONS, CAUTIONS, sizing_summary, write_sizing_report, write_timeseries_csv
from ._text import CAUTION, check_summary, losses
from ._views import design_view, simulation_view, sizing_view

__all__ = [
    "ASSUMPTIONS",
    "CAUTION",
    "CAUTIONS",
    "Marker",
    "Page",
    "Scene3D",
    "check_summary",
    "contact_html",
    "contact_section",
    "contact_summary",
    "design_view",
    "fmt",
    "identify_summary",
    "losses",
    "robot_scene",
    "scene_html",
    "simulation_html",
    "simulation_text",
    "tracking_targets",
    "simulation_view",
    "sizing_summary",
    "sizing_view",
    "toml_text",
    "write_contact_report",
    "write_identify_outputs",
    "write_limits_report",
    "write_simulation_outputs",
    "write_sizing_report",
    "write_timeseries_csv",
]
