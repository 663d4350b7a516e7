"""Reading and validating the user's files (a sub-package, one module per file kind).

- `_robot`: the robot description TOML and its arm URDF.
- `_duty`: the duty-cycle TOML of `opspace size`.
- `_catalogue`: the motor-and-gearbox catalogue TOML.
- `_scenario`: the simulation scenario TOML of `opspace simulate`.
- `_toml`: shared reading/validation helpers (messages name file, key, value).
"""

from ._catalogue import Catalogue, Gearbox, Motor, load_catalogue
from ._contact import (OUTLINE_POINTS, BodyRegion, ContactPointSpec, RegionTable,
                       bundled_regions_path, load_contact_points, load_regions)
from ._duty import DutyCycle, Segment, check_against_robot, load_duty_cycle, resolve_pose
from ._motion_log import MotionLog, load_motion_log
from ._robot import (ArmJointDrive, BaseSpec, DriveSpec, Mimic, Payload, RobotDescription,
                     WheelSpec, arm_joint_names, arm_position_limits, independent_joint_names,
                     load_arm, load_arm_urdf, load_description, read_payload, robot_urdf)
from ._sources import expand_xacro
from ._scenario import Scenario, check_scenario, load_scenario
from ._toml import Entry, Section, check_inertia, inertia_matrix, read_document, read_toml
from ._visuals import LinkShape, UrdfShapes, read_shapes, resolve_mesh

__all__ = [
    "ArmJointDrive",
    "BaseSpec",
    "BodyRegion",
    "Catalogue",
    "ContactPointSpec",
    "DriveSpec",
    "DutyCycle",
    "Entry",
    "Gearbox",
    "LinkShape",
    "Mimic",
    "MotionLog",
    "Motor",
    "OUTLINE_POINTS",
    "Payload",
    "RegionTable",
    "RobotDescription",
    "Scenario",
    "Section",
    "Segment",
    "UrdfShapes",
    "WheelSpec",
    "arm_joint_names",
    "arm_position_limits",
    "bundled_regions_path",
    "check_against_robot",
    "check_inertia",
    "check_scenario",
    "expand_xacro",
    "independent_joint_names",
    "inertia_matrix",
    "load_arm",
    "load_arm_urdf",
    "load_catalogue",
    "load_contact_points",
    "load_description",
    "load_duty_cycle",
    "load_motion_log",
    "load_regions",
    "load_scenario",
    "read_document",
    "read_payload",
    "read_shapes",
    "read_toml",
    "robot_urdf",
    "resolve_mesh",
    "resolve_pose",
]
