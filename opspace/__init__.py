"""opspace: dynamics of mobile manipulators (an arm in URDF on a
differential-drive base): whole-body model, joint- and task-space dynamics,
drive sizing, stability and simulation.

Results are model estimates: apply service factors, verify on hardware, and
defer to the applicable safety standards and licensed engineering practice.
"""

from .description import (Catalogue, DutyCycle, Payload, RobotDescription, load_catalogue,
                          load_description, load_duty_cycle)
from .dynamics import (DriveInertia, JointSpaceTerms, drive_inertia, forward_dynamics,
                       friction, inverse_dynamics, inverse_dynamics_batch, joint_space,
                       kinetic_energy, potential_energy)
from .dynamics import (InertiaEllipsoid, TaskSpaceTerms, cartesian_task_space, effective_mass,
                       inertia_ellipsoid, task_space)
from .control import BasePlan, CommandInfo, Gains, OperationalSpaceController, Target
from ._version import __version__
from .errors import ConfigError, ModelError
from .model import GRAVITY, MobileManipulator, load_robot
from . import contact, identify, sizing, stability, trajectory  # noqa: E402  (sub-modules as namespaces)
from .simulation import SimulationError, SimulationResult, run_scenario, simulate  # noqa: E402
from . import sweep  # noqa: E402
from .sweep import load_sweep, run_sweep  # noqa: E402
from .sizing import SizingResult, size  # noqa: E402
from . import limits  # noqa: E402
from .limits import MotionLimits, motion_limits, motion_limits_batch  # noqa: E402


__all__ = [
    "BasePlan",
    "cartesian_task_space",
    "Catalogue",
    "contact",
    "CommandInfo",
    "ConfigError",
    "drive_inertia",
    "DriveInertia",
    "DutyCycle",
    "effective_mass",
    "forward_dynamics",
    "friction",
    "Gains",
    "GRAVITY",
    "identify",
    "inertia_ellipsoid",
    "InertiaEllipsoid",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "JointSpaceTerms",
    "kinetic_energy",
    "limits",
    "load_catalogue",
    "load_description",
    "load_duty_cycle",
    "load_robot",
    "load_sweep",
    "MobileManipulator",
    "motion_limits",
    "motion_limits_batch",
    "MotionLimits",
    "ModelError",
    "OperationalSpaceController",
    "Payload",
    "potential_energy",
    "RobotDescription",
    "run_scenario",
    "run_sweep",
    "simulate",
    "SimulationError",
    "SimulationResult",
    "size",
    "sizing",
    "SizingResult",
    "stability",
    "sweep",
    "Target",
    "task_space",
    "TaskSpaceTerms",
    "trajectory",
]
