"""Reading and validating the user's files (a sub-package, one module per file kind).

- `_robot`: the robot description TOML and its arm URDF.
- `_duty`: the duty-cycle TOML of `opspace size`.
- `_catalogue`: the motor-and-gearbox catalogue TOML.
- `_scenario`: the simulation scenario TOML of `opspace simulate`.
- `_toml`: the one home of the input files' reading and key validation: file
  paths (`check_file`, `referenced_path`), strict UTF-8 text (`read_text`),
  TOML, keys with plausible ranges by unit (`Section`, `PLAUSIBLE`), output
  folders and command-line options; messages name file, key, value.
- `_urdf`: the arm URDF's text checked before Pinocchio parses it.
"""

from ._catalogue import Catalogue, Gearbox, Motor, load_catalogue
from ._contact import (OUTLINE_POINTS, BodyRegion, ContactPointSpec, RegionTable,
                       bundled_regions_path, load_contact_points, load_regions)
from ._duty import (DutyCycle, Segment, blend_speed, check_against_robot, load_duty_cycle,
                    resolve_pose)
from ._motion_log import MotionLog, load_motion_log
from ._robot import (ArmJointDrive, BaseSpec, DriveSpec, Mimic, Payload, RobotDescription,
                     WheelSpec, arm_joint_names, arm_position_limits, independent_joint_names,
                     load_arm, load_arm_urdf, load_description, read_payload, robot_urdf)
from ._sources import expand_xacro
from ._scenario import Scenario, check_scenario, load_scenario
from ._toml import (MAX_GEAR_RATIO, PLAUSIBLE, ROBOT_SIZE, Entry, Section, check_file,
                    check_inertia, check_output_dir, inertia_matrix, option_number,
                    plausible_bound, read_document, read_text, read_toml, referenced_path)
from ._visuals import LinkShape, UrdfShapes, read_shapes, resolve_mesh

__all__ = [
    "arm_joint_names",
    "arm_position_limits",
    "ArmJointDrive",
    "BaseSpec",
    "BodyRegion",
    "bundled_regions_path",
    "Catalogue",
    "check_against_robot",
    "check_file",
    "check_inertia",
    "check_output_dir",
    "check_scenario",
    "ContactPointSpec",
    "DriveSpec",
    "DutyCycle",
    "Entry",
    "expand_xacro",
    "Gearbox",
    "independent_joint_names",
    "inertia_matrix",
    "LinkShape",
    "load_arm",
    "load_arm_urdf",
    "load_catalogue",
    "load_contact_points",
    "load_description",
    "load_duty_cycle",
    "blend_speed",
    "load_motion_log",
    "load_regions",
    "load_scenario",
    "MAX_GEAR_RATIO",
    "Mimic",
    "MotionLog",
    "Motor",
    "option_number",
    "OUTLINE_POINTS",
    "Payload",
    "PLAUSIBLE",
    "plausible_bound",
    "read_document",
    "read_payload",
    "read_shapes",
    "read_text",
    "read_toml",
    "referenced_path",
    "RegionTable",
    "resolve_mesh",
    "resolve_pose",
    "ROBOT_SIZE",
    "robot_urdf",
    "RobotDescription",
    "Scenario",
    "Section",
    "Segment",
    "UrdfShapes",
    "WheelSpec",
]
