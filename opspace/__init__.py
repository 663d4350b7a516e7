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
from .errors import ConfigError, ModelError
from .model import GRAVITY, MobileManipulator, load_robot
from . import sizing, stability, trajectory  # noqa: E402  (sub-modules as namespaces)
from .sizing import SizingResult, size  # noqa: E402

__version__ = "0.1.0"

__all__ = [
    "Catalogue",
    "ConfigError",
    "DutyCycle",
    "DriveInertia",
    "GRAVITY",
    "JointSpaceTerms",
    "MobileManipulator",
    "ModelError",
    "Payload",
    "RobotDescription",
    "SizingResult",
    "drive_inertia",
    "forward_dynamics",
    "friction",
    "inverse_dynamics",
    "inverse_dynamics_batch",
    "joint_space",
    "kinetic_energy",
    "load_catalogue",
    "load_description",
    "load_duty_cycle",
    "load_robot",
    "potential_energy",
    "size",
    "sizing",
    "stability",
    "trajectory",
]
