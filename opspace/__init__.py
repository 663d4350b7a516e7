"""opspace: dynamics of mobile manipulators (an arm in URDF on a
differential-drive base): whole-body model, joint- and task-space dynamics,
drive sizing, stability and simulation.

Results are model estimates: apply service factors, verify on hardware, and
defer to the applicable safety standards and licensed engineering practice.
"""

from .description import Payload, RobotDescription, load_description
from .dynamics import (DriveInertia, JointSpaceTerms, drive_inertia, forward_dynamics,
                       friction, inverse_dynamics, inverse_dynamics_batch, joint_space,
                       kinetic_energy, potential_energy)
from .errors import ConfigError, ModelError
from .model import GRAVITY, MobileManipulator, load_robot
from . import stability, trajectory  # noqa: E402  (sub-modules as namespaces)

__version__ = "0.1.0"

__all__ = [
    "ConfigError",
    "DriveInertia",
    "GRAVITY",
    "JointSpaceTerms",
    "MobileManipulator",
    "ModelError",
    "Payload",
    "RobotDescription",
    "drive_inertia",
    "forward_dynamics",
    "friction",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "load_description",
    "load_robot",
    "potential_energy",
    "stability",
    "trajectory",
]
