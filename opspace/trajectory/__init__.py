"""Motion profiles, differential-drive base paths, arm moves and duty-cycle timelines.

Kinematics only: nothing here knows masses or forces (that is `dynamics`).

Scalar profiles
---------------
A scalar profile moves a coordinate s (m, or rad for a spin or a joint) from 0 to
``distance`` in ``duration`` seconds. The trapezoidal, S-curve, velocity-ramp,
cruise and dwell profiles are tables of phases of constant jerk; on phase k, with
τ = t − t_k,

    j = j_k,   a = a_k + j_k τ,   v = v_k + a_k τ + j_k τ²/2,
    s = s_k + v_k τ + a_k τ²/2 + j_k τ³/6,

where (s_k, v_k) are carried over from the end of phase k − 1 and a_k is set per
phase (trapezoidal profiles step a_k and have j_k = 0; the jerk impulse at a step is
not represented). The minimum-jerk profile is the quintic of Flash & Hogan (1985).

Sampling rule, for every profile: values are right-continuous (at a switch the later
phase holds); for t < 0 the start state (0, v_start, 0, 0) holds and for
t ≥ duration the end state (distance, v_end, 0, 0).

Base paths
----------
A differential-drive base moves in its own frame with forward speed v and yaw rate
ω (x forward, y left, z up; DESIGN.md). A segment turns a scalar profile s(t) into
(v, ω) and integrates the pose exactly from the segment start (x, y, θ) = 0:

    line:  v = ṡ, ω = 0,      x = s, y = 0, θ = 0
    arc:   v = ṡ, ω = ṡ / R,  θ = s / R, x = R sin θ, y = R (1 − cos θ)
    spin:  v = 0, ω = ṡ,      x = y = 0, θ = s

(the arc is the unicycle ẋ = v cos θ, ẏ = v sin θ, θ̇ = v / R integrated in closed
form; R is signed, R > 0 turns left).
"""

from __future__ import annotations

from ._motions import (ArmMotion, BaseMotion, BaseSegment, DelayedMove, JointMove, arc, joint_move,
                      line, spin)
from ._pieces import BASE_PIECE_KINDS, base_piece
from ._profiles import (MinimumJerkProfile, Phase, PiecewiseProfile, ProfileSample,
                       constant_velocity, dwell, minimum_jerk, s_curve, trapezoidal,
                       velocity_change)
from ._timeline import Piece, Timeline, TimelineSample
from ._tool_path import ToolPath, ToolSample

__all__ = [
    "BASE_PIECE_KINDS",
    "ToolPath",
    "ToolSample",
    "base_piece",
    "ArmMotion",
    "BaseMotion",
    "BaseSegment",
    "DelayedMove",
    "JointMove",
    "MinimumJerkProfile",
    "Phase",
    "Piece",
    "PiecewiseProfile",
    "ProfileSample",
    "Timeline",
    "TimelineSample",
    "arc",
    "constant_velocity",
    "dwell",
    "joint_move",
    "line",
    "minimum_jerk",
    "s_curve",
    "spin",
    "trapezoidal",
    "velocity_change",
]
