"""Operational-space (task-space computed-torque) control of the reduced model.

The command (Khatib 1987, IEEE J. Robotics and Automation 3(1)):

    Q = Jᵀ (Λ a* + μ + p) + Nᵀ Q₀ (+ f)
    a* = ẍ_d + K_d (ẋ_d − ẋ) + K_p e,     e = [p_d − p;  log(R_d Rᵀ)]

with Λ, μ, p, J̄ and N = I − J̄ J from `opspace.dynamics._task_space`, f the
friction feed-forward (optional) and e the position error and the SO(3)
logarithm of the orientation error, both in world axes (R_d Rᵀ rotates the
frame onto its target, so log(R_d Rᵀ) ≈ ∫(ω_d − ω) dt for small errors).  With
a perfect model the task rows obey ẍ = a*, i.e. ë + K_d ė + K_p e = 0 for the
position rows, and for an orientation error about a fixed axis.

The posture task acts in the null space, dynamically consistent: Q₀ = M ν̇₀
with ν̇₀ = K_p0 (q₀ − q_arm) − K_d0 ν_arm for the arm (whole-body mode also
servoes the wheel rates there, see below), so Nᵀ Q₀ = M ν̇₀ − Jᵀ Λ J ν̇₀ adds
no task acceleration (J M⁻¹ Nᵀ = 0).  N is never formed.

Modes
-----
``"whole_body"``  the wheels take part in the task (J is (k, nv)); the wheel
    rows of ν̇₀ follow the base plan: ν̇₀,w = ν̇_w,plan + K_w (ν_w,plan − ν_w).
``"arm_only"``    the task uses the arm columns only (`task_space(...,
    base="locked")`); a wheel-velocity servo commands ν̇_w* = ν̇_w,plan +
    K_w (ν_w,plan − ν_w), the arm carries the coupling Γ ν̇_w* and the wheels get
    the inverse dynamics of their rows, Q_w = M_ww ν̇_w* + M_wa ν̇_a + h_w at the
    arm acceleration ν̇_a the arm command produces.  With a perfect model the
    wheel-rate error decays as exp(−K_w t).

Gains are matrices K_p (1/s²), K_d (1/s) per task row (`Gains`), or per axis
as a stiffness K_p = ω_n² and a damping ratio ζ, K_d = 2 ζ ω_n (the stiffness
of the decoupled unit-mass task dynamics; the physical stiffness is Λ K_p).
Efforts are clipped per coordinate to the effort limits (wheels: the drive
torque limit, arm: the URDF effort) and the saturation is reported per call
(`OperationalSpaceController.info`).
"""

from __future__ import annotations

from ._osc import OperationalSpaceController
from ._targets import BasePlan, CommandInfo, CommandSample, Gains, Target

__all__ = ["BasePlan", "CommandInfo", "CommandSample", "Gains", "OperationalSpaceController",
           "Target"]
