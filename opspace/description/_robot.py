"""Reading and validating robot descriptions (TOML) and the arm URDF.

A description is checked completely here, before anything is computed: every
problem is a `ConfigError` whose message names the file, the key, the value
and what was expected, e.g. ``robot.toml: [base] mass must be > 0 kg, got -3``.
Unknown keys are rejected with the list of valid ones (a typo must not silently
fall back to a default).

The only Pinocchio use here is parsing the URDF (`pinocchio.buildModelFromUrdf`)
so that the tool frame, joint names and link inertias can be checked.

Keys (SI units; every key is documented in the README's reference section)::

    [robot]  name, tool_frame, and either arm_urdf (the arm alone) or
             urdf, wheel_joints, arm_root = none, xacro_args = {} (the whole
             robot: [base], [wheel], [mount] are then derived, see _whole, and
             any key given in them overrides the derived value)
    [package_paths] <package> = <directory>
    [base]   mass, com, inertia, half_track, wheel_radius,
             rolling_resistance = 0, top_speed = inf, footprint = none
    [wheel]  mass, spin_inertia, diameter_inertia
    [drive]  rotor_inertia, gear_ratio, efficiency, coulomb = 0, viscous = 0,
             torque_limit = inf
    [mount]  xyz, rpy = [0, 0, 0]
    [ground] friction = 0.6
    [payload] mass, com = [0, 0, 0], inertia = [0, 0, 0, 0, 0, 0]
    [arm_joint.<urdf joint>] coulomb, viscous, rotor_inertia = 0, gear_ratio = 1
    [poses]  <name> = [arm joint values]
    [[caster]] position = [x, y], stiffness   (or link = <URDF link>, whole-robot form)
    [support], [[rocker]], [ground] friction_range: the load model (`support`)
    [[contact_point]] name, frame | outline, offset, region, area, direction
                      (see `description._contact`)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ConfigError
from ._toml import (MAX_GEAR_RATIO, ROBOT_SIZE, Section, check_inertia, read_document,
                    read_text, referenced_path)
from ._urdf import Mimic, check_inertials, check_urdf, pinocchio_model, read_mimic
from ._sources import read_package_paths, resolve_uri, urdf_source
from ._whole import load_whole
from ._contact import read_contact_points
from ._support import SupportSpec, read_friction_range, read_support

__all__ = [
    "ArmJointDrive",
    "arm_joint_names",
    "arm_position_limits",
    "independent_joint_names",
    "load_arm",
    "Mimic",
    "BaseSpec",
    "DriveSpec",
    "Payload",
    "RobotDescription",
    "WheelSpec",
    "load_description",
    "robot_urdf",
]

#: ground friction coefficient used when [ground] friction is absent
#: (rubber tyre on a dry, sealed indoor floor; common practice, no source).
DEFAULT_GROUND_FRICTION = 0.6


# ---------------------------------------------------------------------------
# value objects
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class BaseSpec:
    """Chassis without wheels. mass kg, com m (base frame), inertia kg·m² about
    the COM as [Ixx, Iyy, Izz, Ixy, Ixz, Iyz], half_track m (pivot to each wheel
    mid-plane), wheel_radius m, rolling_resistance (dimensionless C_rr),
    top_speed m/s."""

    mass: float
    com: tuple[float, float, float]
    inertia: tuple[float, ...]
    half_track: float
    wheel_radius: float
    rolling_resistance: float = 0.0
    top_speed: float = math.inf
    footprint: tuple | None = None   # (x_min, x_max, y_min, y_max, height) m, for drawings


@dataclass(frozen=True)
class WheelSpec:
    """Each drive wheel: mass kg, spin_inertia and diameter_inertia kg·m²."""

    mass: float
    spin_inertia: float
    diameter_inertia: float


@dataclass(frozen=True)
class DriveSpec:
    """Each drive wheel's motor and gearbox. rotor_inertia kg·m² (at the
    motor), gear_ratio (motor speed / wheel speed), efficiency (0, 1],
    coulomb N·m (kinetic) and viscous N·m·s/rad friction at the wheel; stiction
    N·m the static (breakaway) level, >= coulomb (None: equal to coulomb)."""

    rotor_inertia: float
    gear_ratio: float
    efficiency: float
    coulomb: float = 0.0
    viscous: float = 0.0
    torque_limit: float = math.inf
    stiction: float | None = None

    @property
    def reflected_inertia(self):
        """J_rotor · G², kg·m² seen at the wheel (common practice)."""
        return self.rotor_inertia * self.gear_ratio**2


@dataclass(frozen=True)
class ArmJointDrive:
    """Per arm joint: coulomb (N·m or N, kinetic), viscous (N·m·s/rad or
    N·s/m), stiction (N·m or N, static breakaway level >= the kinetic one),
    rotor_inertia kg·m², gear_ratio.  None means "take the URDF value" (for
    stiction: equal to the kinetic level)."""

    coulomb: float | None = None
    viscous: float | None = None
    rotor_inertia: float = 0.0
    gear_ratio: float = 1.0
    stiction: float | None = None

    @property
    def reflected_inertia(self):
        return self.rotor_inertia * self.gear_ratio**2


@dataclass(frozen=True)
class Payload:
    """A rigid payload held at the tool: mass kg, com m in the tool frame,
    inertia kg·m² about its COM in tool axes [Ixx, Iyy, Izz, Ixy, Ixz, Iyz]."""

    mass: float
    com: tuple[float, float, float] = (0.0, 0.0, 0.0)
    inertia: tuple[float, ...] = (0.0,) * 6


@dataclass(frozen=True)
class RobotDescription:
    """A validated robot description: the TOML contents plus the parsed URDF."""

    path: Path
    name: str
    arm_urdf: Path
    tool_frame: str
    base: BaseSpec
    wheel: WheelSpec
    drive: DriveSpec
    mount_xyz: tuple[float, float, float]
    mount_rpy: tuple[float, float, float]
    casters: tuple[tuple[float, float], ...]
    ground_friction: float
    payload: Payload | None
    arm_joints: dict = field(default_factory=dict)
    poses: dict = field(default_factory=dict)
    arm_model: object = None  # pinocchio.Model of the arm alone (fixed base)
    mimic: dict = field(default_factory=dict)  # follower joint -> Mimic of an independent one
    whole: object = None  # WholeForm: what a whole-robot URDF gave, None for the arm-URDF form
    package_paths: dict = field(default_factory=dict)  # package -> directory ([package_paths])
    support: SupportSpec = SupportSpec()
    friction_range: tuple = (DEFAULT_GROUND_FRICTION, DEFAULT_GROUND_FRICTION)  # (low, high)
    contact_points: tuple = ()  # ContactPointSpec, for the contact pre-check


# ---------------------------------------------------------------------------
# the description
# ---------------------------------------------------------------------------
TOP_LEVEL = ("robot", "base", "wheel", "drive", "mount", "ground", "payload",
             "arm_joint", "poses", "caster", "support", "rocker", "contact_point",
             "package_paths")


def load_description(path, *, doc=None, urdf_text=None):
    """Read and validate a robot description TOML and its arm URDF.

    Parameters
    ----------
    path : str or Path   the robot TOML file
    doc : dict or None   its parsed content, if already at hand (the file is then
                         not read; `path` names it in messages and places the URDF)
    urdf_text : str or None   the arm URDF's text, likewise (its file is not read)

    Returns
    -------
    RobotDescription

    Raises
    ------
    ConfigError   naming file, key, value and expectation
    """
    path, doc = read_document(path, doc, TOP_LEVEL, ("robot", "drive"))
    name = path.name

    s = Section(path, "robot", doc["robot"])
    robot_name = s.string("name")
    tool_frame = s.string("tool_frame")
    if s.has("urdf") and s.has("arm_urdf"):
        s.fail("urdf", "and arm_urdf exclude each other: give the whole robot's URDF (urdf) "
                       "or the arm's alone (arm_urdf)")
    whole = load_whole(path, doc, s, urdf_text) if s.has("urdf") else None
    if whole is None:
        urdf_rel = s.string("arm_urdf")
        s.finish()
        packages = read_package_paths(path, doc.get("package_paths", {}))
        arm_urdf = referenced_path(path, resolve_uri(urdf_rel, packages, path.parent,
                                                     f"{name}: [robot] arm_urdf"))
        for table in ("base", "wheel", "mount"):
            if table not in doc:
                raise ConfigError(f"{name}: table [{table}] is missing")
        tables = {t: doc[t] for t in ("base", "wheel", "mount")}
    else:
        arm_urdf, urdf_text = whole.urdf, whole.arm_text
        given = {t: Section(path, t, doc.get(t, {})).table for t in ("base", "wheel", "mount")}
        tables = {t: {**whole.tables[t], **given[t]} for t in given}
        for table, what in (("base", "chassis links"), ("wheel", "wheel links")):
            if tables[table]["mass"] <= 0.0:   # placeholders only: nothing to derive from
                raise ConfigError(f"{name}: the {what} of {whole.urdf.name} have no mass: "
                                  f"give [{table}] mass and its inertia in {name}")

    base = _read_base(Section(path, "base", tables["base"]))
    wheel = _read_wheel(Section(path, "wheel", tables["wheel"]))
    drive = _read_drive(Section(path, "drive", doc["drive"]))

    s = Section(path, "mount", tables["mount"])
    mount_xyz = s.vector("xyz", 3, unit="m", cap=ROBOT_SIZE)
    mount_rpy = s.vector("rpy", 3, (0.0, 0.0, 0.0), unit="rad")
    s.finish()

    s = Section(path, "ground", doc.get("ground", {}))
    friction = s.number("friction", DEFAULT_GROUND_FRICTION, lo=0.0, lo_open=True, hi=100.0)
    friction_range = read_friction_range(s, friction)
    s.finish()

    payload = None
    if "payload" in doc:
        payload = read_payload(Section(path, "payload", doc["payload"]))

    casters, caster_stiffness = _read_casters(path, doc.get("caster", []), base, whole)
    arm_model, mimic = load_arm(arm_urdf, where=f"{name}: [robot] arm_urdf", text=urdf_text)
    mass = base.mass + 2 * wheel.mass + sum(arm_model.inertias[j].mass
                                            for j in range(arm_model.njoints))
    support = read_support(path, doc, casters, caster_stiffness, mass * 9.80665)
    _check_tool_frame(arm_model, tool_frame, name, arm_urdf)
    arm_joints = _read_arm_joints(path, doc.get("arm_joint", {}), arm_model)
    _check_moving_mass(arm_model, mimic, arm_joints, arm_urdf.name, name)
    poses = _read_poses(path, doc.get("poses", {}), arm_model, mimic)
    contact_points = read_contact_points(path, doc.get("contact_point", []))
    _check_contact_points(path, contact_points, arm_model, base,
                          tuple(whole.frames) if whole is not None else ())

    return RobotDescription(
        path=path, name=robot_name, arm_urdf=arm_urdf, tool_frame=tool_frame,
        base=base, wheel=wheel, drive=drive, mount_xyz=mount_xyz,
        mount_rpy=mount_rpy, casters=casters, ground_friction=friction,
        payload=payload, arm_joints=arm_joints, poses=poses, arm_model=arm_model, mimic=mimic,
        whole=whole and _sources(whole, doc, path.name),
        package_paths=read_package_paths(path, doc.get("package_paths", {})),
        contact_points=contact_points, support=support, friction_range=friction_range)


def robot_urdf(path, doc):
    """(file, text) of the URDF a parsed robot description names: its
    `[robot] arm_urdf`, or its whole robot's `[robot] urdf` (xacro expanded,
    `package://` through `[package_paths]`).  For callers that carry the text
    to where the files are not (sweep workers); ConfigError naming file and key.
    """
    path = Path(path)
    table = doc.get("robot") if isinstance(doc.get("robot"), dict) else {}
    key = "urdf" if "urdf" in table else "arm_urdf"
    uri = table.get(key)
    if not isinstance(uri, str):
        raise ConfigError(f"{path.name}: [robot] arm_urdf is missing")
    where = f"{path.name}: [robot] {key}"
    packages = read_package_paths(path, doc.get("package_paths", {}))
    if key == "urdf":
        args = table.get("xacro_args", {})
        return urdf_source(path, uri, packages, args if isinstance(args, dict) else {}, where)
    file = referenced_path(path, resolve_uri(uri, packages, path.parent, where))
    return file, read_text(file, where=where, what="URDF file")


def _check_contact_points(path, points, arm, base, chassis=()):
    """Each contact point names a frame of the arm (or the base, or `chassis`:
    a whole-robot URDF's chassis and wheel links) or, with an outline point,
    the base has a footprint."""
    for i, p in enumerate(points):
        where = f"{path.name}: [[contact_point]] {i + 1} {p.name!r}"
        if p.outline is not None and base.footprint is None:
            raise ConfigError(f"{where} outline = {p.outline!r} needs [base] footprint")
        if p.outline is None and p.frame not in _BASE_FRAMES + chassis \
                and not arm.existFrame(p.frame):
            names = ", ".join(f.name for f in arm.frames if f.name != "universe")
            raise ConfigError(f"{where} frame = {p.frame!r} is not a link or frame of the arm "
                              f"URDF (known: base, {names})")


#: frames the base model adds to the arm's (model.MobileManipulator)
_BASE_FRAMES = ("base", "wheel_right", "wheel_left")


def _read_base(s):
    base = BaseSpec(
        mass=s.number("mass", unit="kg", lo=0.0, lo_open=True),
        com=s.vector("com", 3, unit="m", cap=ROBOT_SIZE),
        inertia=s.vector("inertia", 6, unit="kg·m²"),
        half_track=s.number("half_track", unit="m", lo=0.0, lo_open=True, hi=ROBOT_SIZE / 2),
        wheel_radius=s.number("wheel_radius", unit="m", lo=0.0, lo_open=True, hi=ROBOT_SIZE / 5),
        rolling_resistance=s.number("rolling_resistance", 0.0, lo=0.0, hi=1.0),
        top_speed=s.number("top_speed", math.inf, unit="m/s", lo=0.0, lo_open=True),
        footprint=s.vector("footprint", 5, unit="m", required=False, cap=ROBOT_SIZE),
    )
    fp = base.footprint
    if fp is not None and not (fp[0] < fp[1] and fp[2] < fp[3] and fp[4] > 0):
        s.fail("footprint", f"must be [x_min, x_max, y_min, y_max, height] with x_min < x_max, "
                            f"y_min < y_max and height > 0 m, got {list(fp)}")
    check_inertia(base.inertia, s.where("inertia"))
    s.finish()
    return base


def _read_wheel(s):
    wheel = WheelSpec(
        mass=s.number("mass", unit="kg", lo=0.0, lo_open=True),
        spin_inertia=s.number("spin_inertia", unit="kg·m²", lo=0.0, lo_open=True),
        diameter_inertia=s.number("diameter_inertia", unit="kg·m²", lo=0.0, lo_open=True),
    )
    # principal moments (Id, Is, Id): the triangle inequality is Is <= 2 Id
    if wheel.spin_inertia > 2.0 * wheel.diameter_inertia * (1 + 1e-9):
        s.fail("spin_inertia", f"must be <= 2 x diameter_inertia (triangle inequality "
                               f"of principal moments), got {wheel.spin_inertia:g} > "
                               f"2 x {wheel.diameter_inertia:g} kg·m²")
    s.finish()
    return wheel


def _read_drive(s):
    drive = DriveSpec(
        rotor_inertia=s.number("rotor_inertia", unit="kg·m²", lo=0.0),
        gear_ratio=s.number("gear_ratio", lo=0.0, lo_open=True, hi=MAX_GEAR_RATIO),
        efficiency=s.number("efficiency", lo=0.0, lo_open=True, hi=1.0),
        coulomb=s.number("coulomb", 0.0, unit="N·m", lo=0.0),
        viscous=s.number("viscous", 0.0, unit="N·m·s/rad", lo=0.0),
        torque_limit=s.number("torque_limit", math.inf, unit="N·m", lo=0.0, lo_open=True),
        stiction=s.number("stiction", unit="N·m", lo=0.0, required=False),
    )
    if drive.stiction is not None and drive.stiction < drive.coulomb:
        s.fail("stiction", f"must be >= coulomb = {drive.coulomb:g} N·m (the static friction "
                           f"level is at least the kinetic one), got {drive.stiction:g}")
    s.finish()
    return drive


def read_payload(s):
    """A [payload]-shaped table (also used by scenario files)."""
    payload = Payload(
        mass=s.number("mass", unit="kg", lo=0.0, lo_open=True),
        com=s.vector("com", 3, (0.0, 0.0, 0.0), unit="m", cap=ROBOT_SIZE),
        inertia=s.vector("inertia", 6, (0.0,) * 6, unit="kg·m²"),
    )
    check_inertia(payload.inertia, s.where("inertia"), allow_zero=True)
    s.finish()
    return payload


def _read_casters(path, entries, base, whole=None):
    """[[caster]] entries: position = [x, y], or (whole-robot form) link = a URDF
    link whose collision centre or origin is the contact."""
    if not isinstance(entries, list):
        raise ConfigError(f"{path.name}: [[caster]] must be an array of tables, got {entries!r}")
    if not entries:
        raise ConfigError(f"{path.name}: no [[caster]]: two drive wheels and no passive "
                          "contact make a self-balancing base, outside opspace's scope "
                          "(add at least one caster)")
    casters, stiffness = [], []
    for i, entry in enumerate(entries):
        s = Section(path, f"caster {i + 1}", entry)
        if whole is not None and s.has("link") and not s.has("position"):
            link = s.string("link")
            if link not in whole.contacts:
                s.fail("link", f"'{link}' is not a link of {whole.urdf.name}")
            x, y = whole.contacts[link]
        else:
            x, y = s.vector("position", 2, unit="m", cap=ROBOT_SIZE)
        stiffness.append(s.number("stiffness", unit="N/m", lo=0.0, lo_open=True,
                                  required=False))
        s.finish()
        if abs(x) < 1e-9 and abs(abs(y) - base.half_track) < 1e-9:
            s.fail("position", f"coincides with a drive wheel contact, got {[x, y]}")
        casters.append((x, y))
    return tuple(casters), stiffness


def _sources(whole, doc, name):
    """The whole-robot form's record with the TOML's overrides marked as given,
    and each [[caster]] link's contact listed."""
    from dataclasses import replace
    derived = []
    for d in whole.derived:
        table, _, key = d.key.strip("[").partition("] ")
        if key and key in doc.get(table, {}):
            d = replace(d, value=f"{doc[table][key]} (given)", source=f"given in {name}")
        derived.append(d)
    for i, entry in enumerate(doc.get("caster", [])):
        if "link" in entry and "position" not in entry:
            x, y = whole.contacts[entry["link"]]
            derived.append(type(d)(f"[[caster]] {i + 1}", f"[{x:.6g}, {y:.6g}] m",
                                   f"below link '{entry['link']}' (collision centre or origin)"))
    return replace(whole, derived=tuple(derived))


def load_arm_urdf(urdf_path, *, where, text=None):
    """Parse the arm URDF with Pinocchio (fixed base) and check its inertias;
    `text`: the URDF's content (the file at urdf_path, which names it, is then
    not read)."""
    return load_arm(urdf_path, where=where, text=text)[0]


def load_arm(urdf_path, *, where, text=None):
    """(pinocchio.Model of the arm, {follower: Mimic}) from the arm URDF: see
    `load_arm_urdf`; the mimic joints are parsed as ordinary joints by Pinocchio
    and tied to their leaders by the model's reduction map."""
    urdf_path = Path(urdf_path)
    if text is None:
        text = read_text(urdf_path, where=where, what="URDF file")
    root = check_urdf(text, urdf_path.name)   # one line per problem, before urdfdom sees it
    arm = pinocchio_model(text, urdf_path.name)
    if arm.njoints < 2:
        raise ConfigError(f"{urdf_path.name}: the arm has no moving joint")
    for jid in range(1, arm.njoints):
        joint = arm.joints[jid]
        if joint.nv != 1:
            raise ConfigError(
                f"{urdf_path.name}: joint '{arm.names[jid]}' has {joint.nv} degrees "
                f"of freedom; only revolute, continuous and prismatic joints are supported")
    check_inertials(root, urdf_path.name)
    mimic = read_mimic(root, urdf_path.name, arm_joint_names(arm))
    arm_position_limits(arm, mimic, file=urdf_path.name)   # a leader with no common range
    return arm, mimic


def _check_moving_mass(arm, mimic, arm_joints, urdf_name, name):
    """Every independent arm joint moves some inertia: (Sᵀ M S)_ii > 0, with
    M the joint-space mass matrix of the arm alone (composite-rigid-body
    algorithm, Featherstone, Rigid Body Dynamics Algorithms, 2008, sec. 6.2:
    M_jj = S_jᵀ I^c_j S_j with I^c_j the inertia of the links beyond joint j),
    S the mimic map (q_f = k q_l + o), plus the joint's armature.  A joint
    whose links beyond carry no mass (or none off its axis) makes the mass
    matrix singular: caught here, naming the joint."""
    import pinocchio as pin

    names = arm_joint_names(arm)
    free = independent_joint_names(arm, mimic)
    S = np.zeros((arm.nv, len(free)))
    for jid, jname in enumerate(names, start=1):
        m = mimic.get(jname)
        lead, k = (jname, 1.0) if m is None else (m.leader, m.multiplier)
        S[arm.joints[jid].idx_v, free.index(lead)] = k
    M = pin.crba(arm, arm.createData(), pin.neutral(arm))
    diag = np.einsum("ji,jk,ki->i", S, M, S)
    for i, jname in enumerate(free):
        jd = arm_joints.get(jname)
        if jd is not None:
            diag[i] += jd.reflected_inertia
    floor = 1e-12 * max(1.0, float(np.max(diag)))
    for i, jname in enumerate(free):
        if diag[i] <= floor:
            raise ConfigError(f"{urdf_name}: joint '{jname}' moves no mass (the links beyond it "
                              f"have no mass or inertia about its axis): the mass matrix would "
                              f"be singular; give its child link an <inertial>, or the joint a "
                              f"rotor in {name} [arm_joint.{jname}] rotor_inertia")


def _check_tool_frame(arm, tool_frame, name, urdf):
    if not arm.existFrame(tool_frame):
        links = [f.name for f in arm.frames if f.type.name == "BODY"]
        raise ConfigError(f"{name}: [robot] tool_frame '{tool_frame}' is not a link or "
                          f"frame of {urdf.name} (links: {', '.join(links)})")


def arm_joint_names(arm):
    """Names of the arm's moving joints in chain order (followers included)."""
    return [arm.names[j] for j in range(1, arm.njoints)]


def independent_joint_names(arm, mimic=None):
    """The arm's independent joints in chain order: the mimic followers left out."""
    return [n for n in arm_joint_names(arm) if n not in (mimic or {})]


def arm_position_limits(arm, mimic=None, *, file="arm URDF"):
    """Lower and upper position limits per independent arm joint, shape (n,) each.

    Continuous joints (nq = 2 in Pinocchio) have no limit: ±inf.  A follower
    q_f = k q_l + o with limits [lo_f, hi_f] narrows its leader's range to
    [(lo_f − o)/k, (hi_f − o)/k] (the ends swapped when k < 0).
    """
    names = arm_joint_names(arm)
    lo, hi = {}, {}
    for jid, name in enumerate(names, start=1):
        joint = arm.joints[jid]
        lo[name], hi[name] = ((arm.lowerPositionLimit[joint.idx_q],
                               arm.upperPositionLimit[joint.idx_q])
                              if joint.nq == 1 else (-np.inf, np.inf))
    for name, m in (mimic or {}).items():
        if m.multiplier == 0.0:
            continue
        ends = sorted(((lo[name] - m.offset) / m.multiplier, (hi[name] - m.offset) / m.multiplier))
        lo[m.leader], hi[m.leader] = max(lo[m.leader], ends[0]), min(hi[m.leader], ends[1])
        if lo[m.leader] > hi[m.leader]:
            raise ConfigError(f"{file}: joint '{name}' mimics '{m.leader}' (q = {m.multiplier:g} q + "
                              f"{m.offset:g}) but no position of '{m.leader}' keeps both "
                              f"within their URDF limits")
    free = independent_joint_names(arm, mimic)
    return np.array([lo[n] for n in free], float), np.array([hi[n] for n in free], float)


def _read_arm_joints(path, table, arm):
    if not isinstance(table, dict):
        raise ConfigError(f"{path.name}: [arm_joint] must be a table of tables, got {table!r}")
    names = arm_joint_names(arm)
    drives = {}
    for jname, entry in table.items():
        if jname not in names:
            raise ConfigError(f"{path.name}: [arm_joint.{jname}] is not a joint of the arm "
                              f"URDF (joints: {', '.join(names)})")
        s = Section(path, f"arm_joint.{jname}", entry)
        drives[jname] = ArmJointDrive(
            coulomb=s.number("coulomb", unit="N·m or N", lo=0.0, required=False),
            viscous=s.number("viscous", unit="N·m·s/rad or N·s/m", lo=0.0, required=False),
            rotor_inertia=s.number("rotor_inertia", 0.0, unit="kg·m²", lo=0.0),
            gear_ratio=s.number("gear_ratio", 1.0, lo=0.0, lo_open=True, hi=MAX_GEAR_RATIO),
            stiction=s.number("stiction", unit="N·m or N", lo=0.0, required=False),
        )
        s.finish()
    return drives


def _read_poses(path, table, arm, mimic):
    if not isinstance(table, dict):
        raise ConfigError(f"{path.name}: [poses] must be a table, got {table!r}")
    names = independent_joint_names(arm, mimic)
    s = Section(path, "poses", table)
    lo, hi = arm_position_limits(arm, mimic)
    poses = {}
    for pose_name, raw in table.items():
        if not isinstance(raw, list) or len(raw) != len(names):
            s.fail(pose_name, f"must list {len(names)} joint values, one per independent arm "
                              f"joint ({', '.join(names)}; rad or m), got {raw!r}")
        values = np.array(s.vector(pose_name, len(names), unit="rad or m"))
        bad = np.flatnonzero((values < lo - 1e-9) | (values > hi + 1e-9))
        if bad.size:
            j = int(bad[0])
            s.fail(pose_name, f"puts joint '{names[j]}' at {values[j]:g}, outside "
                              f"its URDF limits [{lo[j]:g}, {hi[j]:g}]")
        poses[pose_name] = values
    s.finish()
    return poses
