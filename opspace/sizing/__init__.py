"""Drive sizing (a sub-package).

- `cycle`: a duty cycle evaluated: states, efforts, tyre forces, stability track.
- `worst_case`: physical worst arm poses for wheel torque, tip-over and
  traction, shortest stop.
- `envelope`: the cycle with the arm held at each worst pose; rows merged.
- `run`: `size()`, the whole pipeline, and its `SizingResult`.
- `drives`: motor torque, speed, power and energy per drive wheel, RMS and
  thermal RMS figures.
- `candidates`: motor-and-gearbox candidate checks and gear-ratio sweeps.
"""

from .candidates import (CandidateCheck, Criterion, RatioSweep, check_candidate,
                         evaluate_catalogue, sweep_ratios)
from .drives import (DriveFigures, WheelDuty, cycle_energy, cycle_rms, drive_figures, duty_factor,
                     electrical_power, inertia_matching_ratio, motor_torque, thermal_rms)
from .cycle import CycleEvaluation, evaluate_cycle
from .envelope import EnvelopeCase
from .run import SizingResult, size
from .worst_case import StopFigures, WorstPose, shortest_stop, worst_poses

__all__ = [
    "CandidateCheck",
    "CycleEvaluation",
    "EnvelopeCase",
    "SizingResult",
    "StopFigures",
    "WorstPose",
    "Criterion",
    "DriveFigures",
    "RatioSweep",
    "WheelDuty",
    "check_candidate",
    "cycle_energy",
    "cycle_rms",
    "drive_figures",
    "evaluate_cycle",
    "duty_factor",
    "electrical_power",
    "evaluate_catalogue",
    "inertia_matching_ratio",
    "motor_torque",
    "shortest_stop",
    "size",
    "sweep_ratios",
    "thermal_rms",
    "worst_poses",
]
