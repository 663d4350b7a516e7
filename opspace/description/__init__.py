"""Reading and validating the user's files (a sub-package, one module per file kind).

- `robot`: the robot description TOML and its arm URDF.
- `duty`: the duty-cycle TOML of `opspace size`.
- `catalogue`: the motor-and-gearbox catalogue TOML.
- `_toml`: the one home of the shared reading/validation helpers: file paths
  (`check_file`, `referenced_path`), strict UTF-8 text (`read_text`), TOML,
  keys with plausible ranges (`Section`, `PLAUSIBLE`); messages name file, key, value.
- `_urdf`: checks of an arm URDF's text before Pinocchio parses it.
"""

from .catalogue import Catalogue, Gearbox, Motor, load_catalogue
from .duty import DutyCycle, Segment, load_duty_cycle
from ._toml import (PLAUSIBLE, Entry, Section, check_file, check_inertia, check_output_dir,
                    inertia_matrix, option_number, plausible_bound, read_document, read_text, read_toml, referenced_path)
from .robot import (ArmJointDrive, BaseSpec, DriveSpec, Payload, RobotDescription, WheelSpec,
                    Mimic, arm_joint_names, arm_position_limits, independent_joint_names,
                    load_arm, load_arm_urdf, load_description, read_payload)

__all__ = [
    "PLAUSIBLE",
    "Entry",
    "check_file",
    "check_output_dir",
    "option_number",
    "plausible_bound",
    "read_document",
    "read_text",
    "referenced_path",
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
    "inertia_matrix",
    "load_arm_urdf",
    "load_catalogue",
    "load_duty_cycle",
    "load_description",
    "read_payload",
    "read_toml",
]
