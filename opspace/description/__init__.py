"""Reading and validating the user's files (a sub-package, one module per file kind).

- `robot`: the robot description TOML and its arm URDF.
- `duty`: the duty-cycle TOML of `opspace size`.
- `catalogue`: the motor-and-gearbox catalogue TOML.
- `_toml`: shared reading/validation helpers (messages name file, key, value).
"""

from .catalogue import Catalogue, Gearbox, Motor, load_catalogue
from .duty import DutyCycle, Segment, load_duty_cycle
from ._sources import expand_xacro
from ._toml import Section, check_inertia, inertia_matrix, read_toml
from .robot import (ArmJointDrive, BaseSpec, DriveSpec, Payload, RobotDescription, WheelSpec,
                    Mimic, arm_joint_names, arm_position_limits, independent_joint_names,
                    load_arm, load_arm_urdf, load_description, read_payload, robot_urdf)

__all__ = [
    "ArmJointDrive",
    "BaseSpec",
    "Catalogue",
    "DutyCycle",
    "Gearbox",
    "Motor",
    "Segment",
    "DriveSpec",
    "Payload",
    "RobotDescription",
    "Section",
    "WheelSpec",
    "arm_joint_names",
    "arm_position_limits",
    "independent_joint_names",
    "load_arm",
    "Mimic",
    "check_inertia",
    "expand_xacro",
    "inertia_matrix",
    "load_arm_urdf",
    "load_catalogue",
    "load_duty_cycle",
    "load_description",
    "read_payload",
    "read_toml",
    "robot_urdf",
]
