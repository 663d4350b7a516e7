"""Design-space sweeps (a sub-package): many sizing runs over varied designs,
on local processes or a Dask cluster, with a CSV and an HTML page.

- `spec`: the sweep file, its validation against the base files, the design
  points (full factorial × Latin hypercube).
- `paths`: the dotted paths into the base files and into summary.json.
- `docs`: the base documents, per-point copies, the per-worker cache.
- `engine`: `evaluate_point`, the executors, `run_sweep`, the CSV.
- `pareto`: the Pareto front of two figures.
- `page`: the figures and the HTML page.

The sweep file (TOML; SI units, paths relative to the file)::

    [sweep]
    name = "..."                        # free text (default: the file's stem)
    duty_cycle = "shift.toml"           # base duty cycle: names its robot and catalogue
    figures = ["stability.min_tip_over_margin", "max(wheels.peak_torque.*)"]
    search = false                      # worst-case arm search per point (default false)
    samples = 20                        # Latin hypercube points (with random parameters)
    seed = 0                            # of the Latin hypercube (default 0)
    require_pass = true                 # feasible designs pass sizing (default true)
    best = 10                           # rows of the best-designs table

    [fixed]                             # optional: set for every point
    "cycle.sample_rate" = 100

    [[parameter]]                       # one per varied value
    key = "robot.mount.xyz[0]"          # robot. / cycle. / catalogue. + path
    label = "mount x"                   # optional, for tables and plots
    unit = "m"                          # optional, for plots
    values = [0.0, 0.1, 0.2]            # or range = {start, stop, step | num}
                                        # or random = {low, high}

    [pareto]                            # optional (defaults below)
    x = "max(described_drive.thermal_rms_motor_torque)"   # motor-size proxy
    x_goal = "min"
    y = "stability.criteria[name=tip-over].margin"
    y_goal = "max"

    [[constraint]]                      # optional: more feasibility limits
    figure = "stability.min_tip_over_margin"
    min = 0.05
"""

from ._engine import (PointRecord, SweepResult, check_options, evaluate_point, make_executor,
                      progress_bar, run_sweep)
from ._pareto import pareto_front
from ._paths import Figure, parse_figure, parse_path
from ._spec import Constraint, Parameter, Point, Sweep, latin_hypercube, load_sweep

__all__ = [
    "Constraint",
    "Figure",
    "Parameter",
    "Point",
    "PointRecord",
    "Sweep",
    "SweepResult",
    "check_options",
    "evaluate_point",
    "latin_hypercube",
    "load_sweep",
    "make_executor",
    "pareto_front",
    "parse_figure",
    "parse_path",
    "progress_bar",
    "run_sweep",
]
