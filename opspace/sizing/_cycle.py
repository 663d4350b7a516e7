"""Evaluating a duty cycle: motion → states → efforts → ground loads.

For every sample of the cycle (base speed v, yaw rate ω and their rates; arm
q, q̇, q̈) the reduced state is

    ν = (φ̇_r, φ̇_l, q̇),  φ̇_r,l = (v ± b ω) / r,      ν̇ likewise from (a, α, q̈)

and the efforts come from inverse dynamics with friction and rolling
resistance, Q = M ν̇ + c + g + f (batch, `inverse_dynamics_batch`), with the
payload attached in the segments that carry it and gravity tilted on ramps
(`MobileManipulator.set_ground_slope`).  The dynamics do not depend on where
the robot stands or which way it faces, so every state is evaluated with the
base at the world origin, heading 0: on a ramp the ground rises along the
robot's forward axis.

Per drive wheel i the torque the gearbox output delivers to the wheel is

    τ_out,i = Q_i − J_m G² φ̈_i         (the described rotor's armature removed,
                                        so that each motor candidate adds its own)

and the longitudinal ground force on its tyre follows from the wheel's own
balance about its axle,  F_x,i = (Q_i − f_i − (J_s + J_m G²) φ̈_i) / r,  with f_i
the wheel's friction and rolling-resistance torque.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .. import trajectory as tr
from ..description import blend_speed, resolve_pose
from ..dynamics import inverse_dynamics_batch
from ..errors import ConfigError
from ..stability import merge_tracks, stability_track, tyre_forces

__all__ = ["CycleEvaluation", "build_timeline", "evaluate_cycle"]


def _move(seg, robot, duty, q_arm):
    v = seg.values
    target = resolve_pose(duty, robot, v["to"], f"[[segment]] {seg.index + 1} (arm) to")
    return tr.joint_move(q_arm, target, v["duration"], profile=v["profile"],
                         delay=v.get("offset") or 0.0), target


def start_pose(duty, robot):
    if duty.arm_start is None:
        return np.zeros(robot.n_arm)
    return resolve_pose(duty, robot, duty.arm_start, "[cycle] arm_start")


def build_timeline(duty, robot):
    """The duty cycle as a `trajectory.Timeline` and, per piece, the index of
    the segment it comes from (an arm move with an `offset` shares the piece of
    the segment before it, whose index it takes)."""
    q_arm = start_pose(duty, robot)
    pieces, owner = [], []
    segs = duty.segments
    for seg in segs:
        if seg.kind == "arm":
            move, q_arm = _move(seg, robot, duty, q_arm)
            if seg.values.get("offset") is not None:
                pieces[-1] = tr.Piece(base=pieces[-1].base, arm=move,
                                      duration=max(pieces[-1].duration, move.duration))
                continue
            pieces.append(tr.Piece(arm=move))
        else:
            nxt = segs[seg.index + 1] if seg.index + 1 < len(segs) else None
            v0 = blend_speed(segs[seg.index - 1], seg) if seg.values.get("blend") else 0.0
            v1 = blend_speed(seg, nxt) if nxt is not None and nxt.values.get("blend") else 0.0
            try:
                pieces.append(tr.base_piece(seg.kind, seg.values, v_start=v0, v_end=v1))
            except ValueError as exc:
                raise ConfigError(f"{duty.path.name}: {seg.title}: {exc}") from None
        owner.append(seg.index)
    try:
        return tr.Timeline(pieces, q_start=start_pose(duty, robot)), np.array(owner)
    except ValueError as exc:
        raise ConfigError(f"{duty.path.name}: the segments do not join: {exc} (a blend needs "
                          f"the same yaw rate on both sides: straight to straight, or arcs "
                          f"of one radius)") from None


@dataclass(frozen=True, eq=False)
class CycleEvaluation:
    """A duty cycle evaluated on its sample grid; arrays of length n = len(t).

    t s; segment (n,) index; x, y, theta: base path in the world (m, m, rad);
    v m/s, a m/s², omega rad/s, alpha rad/s²; payload (n,) bool; grade (n,);
    cross_grade (n,) (rise/run across, left side up > 0);
    qs (n, nq) states evaluated (base at the origin); nu, nu_dot (n, nv);
    Q (n, nv) efforts N·m / N with friction; tau_out (n, 2) N·m gearbox output
    torque per drive wheel (rotor excluded); wheel_speed, wheel_acc (n, 2)
    rad/s, rad/s²; wheel_force (n, 2) N longitudinal tyre force; stability:
    `StabilityTrack` (ZMP, margins, loads, traction use).
    """

    t: np.ndarray
    segment: np.ndarray
    x: np.ndarray
    y: np.ndarray
    theta: np.ndarray
    v: np.ndarray
    a: np.ndarray
    omega: np.ndarray
    alpha: np.ndarray
    payload: np.ndarray
    grade: np.ndarray
    qs: np.ndarray
    nu: np.ndarray
    nu_dot: np.ndarray
    Q: np.ndarray
    tau_out: np.ndarray
    wheel_speed: np.ndarray
    wheel_acc: np.ndarray
    wheel_force: np.ndarray
    stability: object
    cross_grade: np.ndarray | None = None

    @property
    def duration(self):
        return float(self.t[-1])


def _states(robot, sample):
    qs = robot.configurations(sample.q)
    wr, wl = robot.wheel_rates(sample.v, sample.omega)
    ar, al = robot.wheel_rates(sample.a, sample.alpha)
    nu = np.column_stack([wr, wl, sample.qd])
    nu_dot = np.column_stack([ar, al, sample.qdd])
    return qs, nu, nu_dot


def evaluate_cycle(robot, duty, *, sample_rate=None, progress=None, held=None):
    """Evaluate a duty cycle on `robot` (see the module docstring).

    The robot's payload and ground slope are restored on return.

    Parameters
    ----------
    robot : MobileManipulator
    duty : DutyCycle (validated against this robot)
    sample_rate : Hz, default the cycle's
    progress : callable(done, total) or None
    held : arm pose (n_arm,) rad or m, or None.  Given, the arm is held still at
        it through the whole cycle (q̇ = q̈ = 0; arm segments become waits of the
        same duration) with the rated payload, if described, in every segment:
        the cycle's base motions with the arm in that pose (the envelope basis).

    Returns
    -------
    CycleEvaluation
    """
    timeline, owner = build_timeline(duty, robot)
    rate = sample_rate or duty.sample_rate
    sample = timeline.sample(1.0 / rate)
    sample = replace(sample, segment=owner[sample.segment])
    if held is not None:
        q = np.broadcast_to(np.asarray(held, dtype=float), sample.q.shape).copy()
        sample = replace(sample, q=q, qd=np.zeros_like(q), qdd=np.zeros_like(q))
    if len(sample.t) < 2:
        raise ConfigError(f"{duty.path.name}: the cycle lasts {timeline.duration:g} s: too short "
                          f"to sample at {rate:g} Hz")
    if robot.description.payload is None and any(s.payload for s in duty.segments):
        raise ConfigError(f"{duty.path.name}: a segment holds the payload but "
                          f"{robot.description.path.name} has no [payload]")
    seg_payload = np.array([s.payload for s in duty.segments])
    seg_grade = np.array([s.grade for s in duty.segments])
    seg_cross = np.array([s.cross_grade for s in duty.segments])
    payload, grade = seg_payload[sample.segment], seg_grade[sample.segment]
    cross = seg_cross[sample.segment]
    if held is not None:
        payload = np.full(payload.shape, robot.description.payload is not None)
    qs, nu, nu_dot = _states(robot, sample)
    n, nv = nu.shape
    Q = np.empty((n, nv))
    F = np.empty((n, 2))
    groups = sorted({(bool(p), float(g), float(c)) for p, g, c in zip(payload, grade, cross)})
    pieces = []
    with robot.kept():
        for k, (has_payload, g, c) in enumerate(groups):
            m = (payload == has_payload) & (grade == g) & (cross == c)
            if has_payload:
                robot.attach_payload()
            else:
                robot.detach_payload()
            robot.set_ground_slope(math.atan(g), math.atan(c))
            Q[m] = inverse_dynamics_batch(robot, qs[m], nu[m], nu_dot[m])
            F[m] = tyre_forces(robot, qs[m], nu[m], nu_dot[m], Q[m])
            pieces.append((m, stability_track(robot, qs[m], nu[m], nu_dot[m], F[m])))
            if progress:
                progress(k + 1, len(groups))
    J_refl = robot.description.drive.reflected_inertia
    tau_out = Q[:, :2] - J_refl * nu_dot[:, :2]
    return CycleEvaluation(
        t=sample.t, segment=sample.segment, x=sample.x, y=sample.y, theta=sample.theta,
        v=sample.v, a=sample.a, omega=sample.omega, alpha=sample.alpha, payload=payload,
        grade=grade, cross_grade=cross, qs=qs, nu=nu, nu_dot=nu_dot, Q=Q, tau_out=tau_out,
        wheel_speed=nu[:, :2].copy(), wheel_acc=nu_dot[:, :2].copy(), wheel_force=F,
        stability=merge_tracks(pieces, n))
