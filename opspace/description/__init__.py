"""Reading and validating the user's files (a sub-package, one module per file kind).

- `robot`: the robot description TOML and its arm URDF.
- `_toml`: shared reading/validation helpers (messages name file, key, value).
"""

from ._toml import Section, check_inertia, inertia_matrix, read_toml
from .robot import (ArmJointDrive, BaseSpec, DriveSpec, Payload, RobotDescription, WheelSpec,
                    arm_joint_names, arm_position_limits, load_arm_urdf, load_description,
                    read_payload)

__all__ = [
    "ArmJointDrive",
    "BaseSpec",
    "DriveSpec",
    "Payload",
    "RobotDescription",
    "Section",
    "WheelSpec",
    "arm_joint_names",
    "arm_position_limits",
    "check_inertia",
    "inertia_matrix",
    "load_arm_urdf",
    "load_description",
    "read_payload",
    "read_toml",
]
