"""Drive sizing (a sub-package).

- `_cycle`: a duty cycle evaluated: states, efforts, tyre forces, stability track.
- `_worst_case`: physical worst arm poses for wheel torque, tip-over and
  traction, shortest stop.
- `_envelope`: the cycle with the arm held at each worst pose; rows merged.
- `_run`: `size()`, the whole pipeline, the verdict basis and its `SizingResult`.
- `_drives`: motor torque, speed, power and energy per drive wheel, RMS and
  thermal RMS figures.
- `_candidates`: motor-and-gearbox candidate checks and gear-ratio sweeps.
"""

from ._candidates import (CandidateCheck, Criterion, RatioSweep, check_candidate,
                          evaluate_catalogue, sweep_ratios)
from ._drives import (DriveFigures, WheelDuty, cycle_energy, cycle_rms, drive_figures, duty_factor,
                      electrical_power, inertia_matching_ratio, motor_torque, thermal_rms)
from ._cycle import CycleEvaluation, evaluate_cycle
from ._envelope import EnvelopeCase, pose_text
from ._run import (ROBOT_CRITERIA, SizingResult, drive_margin, edge_name, margin_text,
                   robot_level, size)
from ._worst_case import (ArmGeometry, Instant, StopFigures, WorstPose, arm_geometry, clearance,
                          critical_instants, shortest_stop, worst_poses)

__all__ = [
    "ArmGeometry",
    "CandidateCheck",
    "Criterion",
    "CycleEvaluation",
    "DriveFigures",
    "EnvelopeCase",
    "Instant",
    "RatioSweep",
    "ROBOT_CRITERIA",
    "SizingResult",
    "StopFigures",
    "WheelDuty",
    "WorstPose",
    "arm_geometry",
    "check_candidate",
    "clearance",
    "critical_instants",
    "cycle_energy",
    "cycle_rms",
    "drive_figures",
    "drive_margin",
    "duty_factor",
    "edge_name",
    "electrical_power",
    "evaluate_catalogue",
    "evaluate_cycle",
    "inertia_matching_ratio",
    "margin_text",
    "motor_torque",
    "pose_text",
    "robot_level",
    "shortest_stop",
    "size",
    "sweep_ratios",
    "thermal_rms",
    "worst_poses",
]
