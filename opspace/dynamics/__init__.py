"""Dynamics of the reduced model (a sub-package: one module per kind of term).

- `_terms`: the one owner of the reduced terms: M_r, h_r = c + g, g_r, J_r,
  J̇ν, friction (Coulomb with sign or smoothed, viscous), rolling resistance
  and the static contact loads it needs; the `Workspace` (buffers and caches,
  like `pinocchio.Data`), the batch threads, the compiled plant.
- `_joint_space`: M, c, g, friction, inverse / forward dynamics, batches,
  locked-arm drive inertia (validated, assembled from `_terms`).
- `_stick_slip`: the simulation plant's stick-slip friction and joint stops,
  decided at each step's start (`StickSlip`, the NumPy reference of the
  compiled plant).
- `_task_space`: J, J̇ν, Λ, μ, p, J̄, N, effective mass (operational space).

The term functions without validation (`mass_matrix`, `bias_forces`,
`frame_terms`, `friction_forces`, ...) are the fast paths that the
controller, the simulator, stability and sizing call; users call the
validated ones (`joint_space`, `task_space`, `friction`, ...).
"""

from ._joint_space import (DriveInertia, JointSpaceTerms, drive_inertia, forward_dynamics,
                           friction, inverse_dynamics, inverse_dynamics_batch, joint_space,
                           kinetic_energy, potential_energy)
from ._stick_slip import StickSlip
from ._task_space import (AXIS_NAMES, DEFAULT_DAMPING, InertiaEllipsoid, TaskSpaceTerms,
                          cartesian_task_space, effective_mass, inertia_ellipsoid, task_space)
from ._task_space import _frame as resolve_frame
from ._task_space import _rows as task_rows
from ._task_space import _solve_task as solve_task
from ._task_space import _task_rhs as task_rhs
from ._task_space import _threshold as damping_threshold
from ._terms import caster_forces, static_loads_batch, wheel_rolling_torques
from ._terms import compiled_terms, friction_model
from ._terms import (RollingLoads, Workspace, batch_threads, bias_forces, compiled_plant,
                     coulomb_viscous, frame_terms, friction_batch, friction_forces,
                     gravity_forces, mass_and_jacobian, mass_matrix, rolling_loads,
                     rolling_resistance, rolling_resistance_batch, set_batch_threads, solve_spd,
                     static_contact_loads, workspace)

__all__ = [
    "AXIS_NAMES",
    "DEFAULT_DAMPING",
    "DriveInertia",
    "InertiaEllipsoid",
    "JointSpaceTerms",
    "RollingLoads",
    "StickSlip",
    "TaskSpaceTerms",
    "Workspace",
    "batch_threads",
    "bias_forces",
    "cartesian_task_space",
    "caster_forces",
    "compiled_plant",
    "compiled_terms",
    "coulomb_viscous",
    "damping_threshold",
    "drive_inertia",
    "effective_mass",
    "forward_dynamics",
    "frame_terms",
    "friction",
    "friction_batch",
    "friction_forces",
    "friction_model",
    "gravity_forces",
    "inertia_ellipsoid",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "mass_and_jacobian",
    "mass_matrix",
    "potential_energy",
    "resolve_frame",
    "rolling_loads",
    "rolling_resistance",
    "rolling_resistance_batch",
    "set_batch_threads",
    "solve_spd",
    "solve_task",
    "static_contact_loads",
    "static_loads_batch",
    "task_rhs",
    "task_rows",
    "task_space",
    "wheel_rolling_torques",
    "workspace",
]
