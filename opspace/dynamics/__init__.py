"""Dynamics of the reduced model (a sub-package: one module per kind of term).

- `joint_space`: M, c, g, friction, inverse / forward dynamics, batches,
  locked-arm drive inertia.
- `task_space`: J, J̇ν, Λ, μ, p, J̄, N, effective mass (operational space).
"""

from .joint_space import (DriveInertia, JointSpaceTerms, drive_inertia, forward_dynamics,
                          friction, inverse_dynamics, inverse_dynamics_batch, joint_space,
                          kinetic_energy, potential_energy, static_contact_loads)

__all__ = [
    "DriveInertia",
    "JointSpaceTerms",
    "drive_inertia",
    "forward_dynamics",
    "friction",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "potential_energy",
    "static_contact_loads",
]
