"""The envelope basis of the verdict: the planned cycle, and the cycle's base
motions with the arm held still at each worst-case pose.

A drive that passes the planned cycle can still fail when the arm is held in a
pose it can reach while the base drives (an operator's choice, a recovery, a
different job).  The envelope cases close that gap: for each pose found by the
worst-case search (peak wheel torque, least tip-over margin, highest traction
use; `worst_case`), the duty cycle is evaluated again with

    q(t) = q_held,  q̇ = q̈ = 0,  the rated payload (if described) in every segment,

the same base motions, grades and sample grid (`evaluate_cycle(held=...)`).
Each case gets its own wheel duty, robot-level rows (traction, tip-over, arm
effort) and candidate checks.  The envelope verdict of a candidate is the
worst of its rows over the planned cycle and every case: for each criterion
the row with the smallest margin, its note naming the case.  A ratio passes the
envelope when it passes every case, so the passing ratio intervals are the
intersection of those of the planned cycle and the cases.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ._candidates import CandidateCheck, evaluate_catalogue
from ._cycle import CycleEvaluation, evaluate_cycle
from ._drives import WheelDuty

__all__ = ["EnvelopeCase", "evaluate_case", "merge_criteria", "merge_sweeps", "pose_text"]


POSE_WORDS = {"peak wheel torque": "peak-wheel-torque pose",
              "tip-over margin": "least-tip-over-margin pose",
              "traction use": "highest-traction-use pose"}


def pose_text(names, units, q):
    """An arm pose in words: "lift 0.55 m, shoulder_pan -0.36 rad, ..."."""
    return ", ".join(f"{n} {v + 0.0:.2f} {u}" for n, u, v in zip(names, units, np.round(q, 2)))


@dataclass(frozen=True, eq=False)
class EnvelopeCase:
    """The cycle's base motions with the arm held at one worst-case pose.

    objective: what the pose is worst for ("peak wheel torque", ...); label:
    "arm held at the <objective> pose"; pose (n_arm,) rad or m; evaluation:
    CycleEvaluation; wheel_duty: WheelDuty; robot_criteria: the robot-level
    Criterion rows of this case; sweeps: RatioSweep per motor × gearbox family
    (empty without a catalogue).
    """

    objective: str
    label: str
    pose: np.ndarray
    evaluation: CycleEvaluation
    wheel_duty: WheelDuty
    robot_criteria: tuple
    sweeps: tuple

    def to_dict(self, joint_names, units):
        ev = self.evaluation
        return {"objective": self.objective, "label": self.label,
                "pose": {n: {"value": float(v), "unit": u}
                         for n, u, v in zip(joint_names, units, self.pose)},
                "peak_wheel_torque": {"value": float(np.abs(ev.tau_out).max()), "unit": "N·m"},
                "criteria": [c.to_dict() for c in self.robot_criteria]}


def evaluate_case(robot, duty, objective, pose, catalogue, *, robot_rows, load_inertia,
                  wheel_duty):
    """Evaluate the duty cycle with the arm held at `pose` (module docstring).

    Parameters
    ----------
    robot, duty : as for `evaluate_cycle`
    objective : str, what the pose is worst for
    pose : (n_arm,) rad or m
    catalogue : Catalogue or None
    robot_rows : callable(robot, CycleEvaluation) -> tuple of Criterion
    load_inertia : J_load kg·m² per wheel (for the ratio sweeps)
    wheel_duty : callable(CycleEvaluation) -> WheelDuty

    Returns
    -------
    EnvelopeCase
    """
    ev = evaluate_cycle(robot, duty, held=np.asarray(pose, dtype=float))
    wd = wheel_duty(ev)
    rows = tuple(robot_rows(robot, ev))
    sweeps = ()
    if catalogue is not None:
        sweeps = evaluate_catalogue(wd, catalogue, load_inertia=load_inertia,
                                    service_factor=duty.service_factor, extra=rows)
    label = f"arm held at the {POSE_WORDS.get(objective, objective + ' pose')}"
    return EnvelopeCase(objective=objective, label=label, pose=np.array(pose, dtype=float),
                        evaluation=ev, wheel_duty=wd, robot_criteria=rows, sweeps=sweeps)


def merge_criteria(groups):
    """The worst row per criterion name over groups of rows.

    groups : sequence of (label or None, rows); the first group is the planned
    cycle (label None).  Returns a tuple of Criterion in the order names first
    appear; a row taken from a labelled group has the label before its note.
    """
    best, order = {}, []
    for label, rows in groups:
        for c in rows:
            if c.name not in best:
                order.append(c.name)
            if c.name not in best or c.margin < best[c.name].margin:
                best[c.name] = c if label is None else replace(
                    c, note=f"{label}: {c.note}" if c.note else label)
    return tuple(best[n] for n in order)


def _intersect(a, b):
    """Intersection of two unions of closed intervals ((lo, hi), ...)."""
    out = []
    for lo1, hi1 in a:
        for lo2, hi2 in b:
            lo, hi = max(lo1, lo2), min(hi1, hi2)
            if lo <= hi:
                out.append((lo, hi))
    return tuple(sorted(out))


def merge_sweeps(planned, cases):
    """RatioSweeps whose checks hold, per criterion, the worst row over the
    planned cycle and every case; passing intervals intersected.

    The other figures of a sweep (drive figures, RMS-optimal ratio, inertias)
    stay those of the planned cycle.
    """
    out = []
    for j, sweep in enumerate(planned):
        checks = []
        for i, check in enumerate(sweep.checks):
            groups = [(None, check.criteria)] + [(c.label, c.sweeps[j].checks[i].criteria)
                                                 for c in cases]
            checks.append(CandidateCheck(motor=check.motor, gearbox=check.gearbox,
                                         ratio=check.ratio, service_factor=check.service_factor,
                                         criteria=merge_criteria(groups), figures=check.figures))
        intervals = sweep.pass_intervals
        for c in cases:
            intervals = _intersect(intervals, c.sweeps[j].pass_intervals)
        out.append(replace(sweep, checks=tuple(checks), pass_intervals=intervals))
    return tuple(out)
