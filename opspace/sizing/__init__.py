"""Drive sizing (a sub-package).

- `cycle`: a duty cycle evaluated: states, efforts, tyre forces, stability track.
- `worst_case`: worst arm poses for wheel torque and tip-over, shortest stop.
- `run`: `size()`, the whole pipeline, and its `SizingResult`.
- `drives`: motor torque, speed, power and energy per drive wheel, RMS and
  thermal RMS figures.
- `candidates`: motor-and-gearbox candidate checks and gear-ratio sweeps.
"""

from ._candidates import (CandidateCheck, Criterion, RatioSweep, check_candidate,
                         evaluate_catalogue, sweep_ratios)
from ._drives import (DriveFigures, WheelDuty, cycle_energy, cycle_rms, drive_figures, duty_factor,
                     electrical_power, inertia_matching_ratio, motor_torque, thermal_rms)
from ._cycle import CycleEvaluation, evaluate_cycle
from ._run import ROBOT_CRITERIA, SizingResult, drive_margin, size
from ._worst_case import StopFigures, WorstPose, shortest_stop, worst_poses

__all__ = [
    "CandidateCheck",
    "Criterion",
    "CycleEvaluation",
    "DriveFigures",
    "RatioSweep",
    "ROBOT_CRITERIA",
    "SizingResult",
    "StopFigures",
    "WheelDuty",
    "WorstPose",
    "check_candidate",
    "cycle_energy",
    "cycle_rms",
    "drive_figures",
    "drive_margin",
    "duty_factor",
    "electrical_power",
    "evaluate_catalogue",
    "evaluate_cycle",
    "inertia_matching_ratio",
    "motor_torque",
    "shortest_stop",
    "size",
    "sweep_ratios",
    "thermal_rms",
    "worst_poses",
]
