"""Output for people (a sub-package): text summaries, the sizing report
(HTML, JSON, CSV).  Formats what the physics modules computed; no physics here.
"""

from .sizing import ASSUMPTIONS, CAUTIONS, sizing_summary, write_sizing_report, write_timeseries_csv
from .text import CAUTION, check_summary, losses

__all__ = ["ASSUMPTIONS", "CAUTION", "CAUTIONS", "check_summary", "losses", "sizing_summary",
           "write_sizing_report", "write_timeseries_csv"]
