"""Output for people (a sub-package): text summaries, the sizing report
(HTML, JSON, CSV).  Formats what the physics modules computed; no physics here.
"""

from ._sizing import ASSUMPTIONS, CAUTIONS, sizing_summary, write_sizing_report, write_timeseries_csv
from ._html import Page, fmt
from ._simulation import simulation_html, simulation_text, write_simulation_outputs
from ._text import CAUTION, check_summary, losses

__all__ = [
    "ASSUMPTIONS",
    "CAUTION",
    "CAUTIONS",
    "Page",
    "check_summary",
    "fmt",
    "losses",
    "simulation_html",
    "simulation_text",
    "sizing_summary",
    "write_simulation_outputs",
    "write_sizing_report",
    "write_timeseries_csv",
]
