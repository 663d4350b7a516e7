"""Dynamics of the reduced model (a sub-package: one module per kind of term).

- `joint_space`: M, c, g, friction, inverse / forward dynamics, batches,
  locked-arm drive inertia.
- `task_space`: J, J̇ν, Λ, μ, p, J̄, N, effective mass (operational space).
"""

from ._joint_space import batch_threads, set_batch_threads
from ._joint_space import (DriveInertia, JointSpaceTerms, drive_inertia, forward_dynamics,
                          friction, inverse_dynamics, inverse_dynamics_batch, joint_space,
                          kinetic_energy, potential_energy, static_contact_loads)
from ._task_space import (AXIS_NAMES, DEFAULT_DAMPING, InertiaEllipsoid, TaskSpaceTerms,
                         cartesian_task_space, effective_mass, inertia_ellipsoid, task_space)

__all__ = [
    "AXIS_NAMES",
    "DEFAULT_DAMPING",
    "DriveInertia",
    "InertiaEllipsoid",
    "JointSpaceTerms",
    "TaskSpaceTerms",
    "batch_threads",
    "set_batch_threads",
    "cartesian_task_space",
    "drive_inertia",
    "effective_mass",
    "forward_dynamics",
    "friction",
    "inertia_ellipsoid",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "potential_energy",
    "static_contact_loads",
    "task_space",
]
