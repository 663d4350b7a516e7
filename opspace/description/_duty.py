"""Reading and validating a duty-cycle file (the input of `opspace size`).

A duty cycle is a sequence of segments, each starting and ending at rest::

    [cycle]
    name = "..."                  # free text
    robot = "robot.toml"          # robot description, relative to this file
    catalogue = "drives.toml"     # motor and gearbox catalogue (optional)
    cycles_per_hour = 12          # for the thermal (RMS) figures
    sample_rate = 200             # Hz, sampling of the cycle (default 200)
    service_factor = 1.25         # multiplies required torques (default 1)
    arm_start = "carry"           # arm pose at t = 0: a [poses] name or values
    verdict_basis = "envelope"    # "envelope" (default) or "cycle": see below

    [[segment]]                   # one table per segment, in order
    kind = "straight"             # straight | arc | turn | stop | arm | dwell
    ...

`verdict_basis`: "envelope" passes a drive only when it passes the planned
cycle AND the cycle's base motions with the arm held at each worst-case pose
(with the rated payload); "cycle" restricts the verdict to the planned cycle
(the report then says what the envelope would decide).

Keys per kind (SI units; `payload = true` holds the robot's rated payload
during the segment, default false; `label` is free text):

=========  ==================================================================
straight   distance (m, signed: < 0 reverses), speed (m/s), acceleration,
           deceleration (m/s², default = acceleration), jerk (m/s³, optional:
           S-curve; then deceleration must equal acceleration), grade
           (rise/run along the robot's forward axis, nose up > 0; default 0),
           cross_grade (rise/run along its left axis, left side up > 0;
           default 0; also on stop and dwell),
           blend (default false: true carries the speed over from the straight
           or arc before, which then does not stop: the two meet at the lower
           of their speeds)
arc        radius (m, signed: > 0 turns left), angle (rad travelled, > 0),
           speed, acceleration, deceleration, jerk as for straight
turn       angle (rad, signed: > 0 turns left, on the spot), rate (rad/s),
           acceleration (rad/s²), jerk (rad/s³, optional)
stop       an emergency stop: speed (m/s) reached at `acceleration`, held
           for `cruise` s (default 0.5), then braked at `deceleration`;
           grade as for straight
arm        to (a [poses] name or joint values), duration (s), profile
           (minimum_jerk | trapezoidal | s_curve; default minimum_jerk),
           offset (s, optional: the move runs during the segment before it,
           starting `offset` s after that segment starts; without it the move
           follows that segment)
dwell      duration (s); grade (parked on a ramp)
=========  ==================================================================
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ConfigError
from ._toml import Section, check_file, read_document, referenced_path

__all__ = ["DutyCycle", "Segment", "load_duty_cycle", "SEGMENT_KINDS"]

SEGMENT_KINDS = ("straight", "arc", "turn", "stop", "arm", "dwell")
PROFILES = ("minimum_jerk", "trapezoidal", "s_curve")
VERDICT_BASES = ("envelope", "cycle")


@dataclass(frozen=True)
class Segment:
    """One validated segment; `values` holds its kind's keys (SI units)."""

    index: int
    kind: str
    label: str
    payload: bool
    grade: float
    values: dict
    cross_grade: float = 0.0

    @property
    def title(self):
        return f"segment {self.index + 1} ({self.kind}{': ' + self.label if self.label else ''})"


@dataclass(frozen=True)
class DutyCycle:
    """A validated duty cycle and the paths it refers to."""

    path: Path
    name: str
    robot_path: Path
    catalogue_path: Path | None
    cycles_per_hour: float
    sample_rate: float
    service_factor: float
    arm_start: object
    segments: tuple = field(default_factory=tuple)
    verdict_basis: str = "envelope"


def load_duty_cycle(path, *, robot=None, doc=None):
    """Read and validate a duty-cycle TOML.

    With `robot` (a MobileManipulator), cross-checks speeds against the base's
    top speed and arm poses against the description's [poses] and limits.
    `doc`: the file's parsed content, if already at hand (not read then).

    Raises
    ------
    ConfigError   naming the file, the segment, the field, the value and the
                  expectation
    """
    from_file = doc is None
    path, doc = read_document(path, doc, ("cycle", "segment"), ("cycle",))
    s = Section(path, "cycle", doc["cycle"])
    name = s.string("name", "duty cycle")
    robot_rel = s.string("robot")
    catalogue_rel = s.string("catalogue", required=False)
    cph = s.number("cycles_per_hour", unit="1/h", lo=0.0, lo_open=True)
    rate = s.number("sample_rate", 200.0, unit="Hz", lo=1.0, hi=10000.0)
    sf = s.number("service_factor", 1.0, lo=1.0, hi=10.0)
    arm_start = s.pose("arm_start")
    basis = s.string("verdict_basis", "envelope")
    if basis not in VERDICT_BASES:
        s.fail("verdict_basis", f"must be one of {', '.join(map(repr, VERDICT_BASES))}, "
                                f"got {basis!r}")
    s.finish()
    robot_path = referenced_path(path, robot_rel)
    catalogue_path = referenced_path(path, catalogue_rel) if catalogue_rel else None
    entries = doc.get("segment", [])
    if not isinstance(entries, list) or not entries:
        raise ConfigError(f"{path.name}: the cycle has no [[segment]]: at least one is needed")
    segments = tuple(_read_segment(path, i, e) for i, e in enumerate(entries))
    _check_overlaps(path, segments)
    _check_blends(path, segments)
    if from_file:       # files named by a file the user gave exist (a sweep passes documents)
        check_file(robot_path, where=f"{path.name}: [cycle] robot", what="robot description")
        if catalogue_path is not None:
            check_file(catalogue_path, where=f"{path.name}: [cycle] catalogue", what="catalogue")
    duty = DutyCycle(path=path, name=name, robot_path=robot_path, catalogue_path=catalogue_path,
                     cycles_per_hour=cph, sample_rate=rate, service_factor=sf,
                     arm_start=arm_start, segments=segments, verdict_basis=basis)
    if robot is not None:
        check_against_robot(duty, robot)
    return duty


def _read_segment(path, i, entry):
    if not isinstance(entry, dict):
        raise ConfigError(f"{path.name}: [[segment]] {i + 1} must be a table, got {entry!r}")
    kind = entry.get("kind")
    if kind not in SEGMENT_KINDS:
        raise ConfigError(f"{path.name}: [[segment]] {i + 1} kind must be one of "
                          f"{', '.join(SEGMENT_KINDS)}, got {kind!r}")
    s = Section(path, f"segment {i + 1} ({kind})", entry)
    s.raw("kind")
    label = s.string("label", "") if s.has("label") else ""
    s.seen.add("label")
    payload = s.raw("payload", False, required=False)
    if not isinstance(payload, bool):
        s.fail("payload", f"must be true or false, got {payload!r}")
    grade = cross = 0.0
    if kind in ("straight", "stop", "dwell"):
        grade = s.number("grade", 0.0, lo=-1.0, hi=1.0)
        cross = s.number("cross_grade", 0.0, lo=-1.0, hi=1.0)
        if math.sin(math.atan(grade)) ** 2 + math.sin(math.atan(cross)) ** 2 >= 1.0:
            s.fail("cross_grade", f"together with grade {grade:g} tilts the ground past "
                                  f"vertical, got {cross:g}")
    values = _READERS[kind](s)
    s.finish()
    return Segment(index=i, kind=kind, label=label, payload=payload, grade=grade, values=values,
                   cross_grade=cross)


def _check_overlaps(path, segments):
    """An arm move with `offset` runs during the segment before it: that one
    must be a base segment (or a dwell) with the same payload."""
    for seg in segments:
        if seg.kind != "arm" or seg.values["offset"] is None:
            continue
        where = f"{path.name}: [[segment]] {seg.index + 1} (arm) offset"
        prev = segments[seg.index - 1] if seg.index > 0 else None
        if prev is None or prev.kind == "arm":
            raise ConfigError(f"{where} = {seg.values['offset']:g} s: an arm move with an "
                              f"offset runs during the segment before it, which must be a base "
                              f"segment or a dwell, got "
                              f"{'none' if prev is None else 'an arm move'}")
        if prev.payload != seg.payload:
            raise ConfigError(f"{where}: the move runs during segment {prev.index + 1}, so its "
                              f"payload must be the same ({str(prev.payload).lower()}), got "
                              f"{str(seg.payload).lower()}")


BLENDING = ("straight", "arc")


def blend_speed(prev, seg):
    """The speed at which `seg` (blend = true) takes over from `prev`, m/s,
    signed along the motion: the lower of their two speeds."""
    sign = -1.0 if prev.kind == "straight" and prev.values["distance"] < 0 else 1.0
    return sign * min(prev.values["speed"], seg.values["speed"])


def _check_blends(path, segments):
    """A segment with `blend = true` follows a straight or an arc, moving the
    same way, without jerk limits on either."""
    for seg in segments:
        if not seg.values.get("blend"):
            continue
        where = f"{path.name}: [[segment]] {seg.index + 1} ({seg.kind}) blend"
        prev = segments[seg.index - 1] if seg.index > 0 else None
        if prev is None or prev.kind not in BLENDING:
            raise ConfigError(f"{where} = true: it must follow a straight or an arc (the speed "
                              f"is carried over from it), got "
                              f"{'nothing' if prev is None else 'a ' + prev.kind}")
        back = lambda g: g.kind == "straight" and g.values["distance"] < 0  # noqa: E731
        if back(prev) != back(seg):
            raise ConfigError(f"{where} = true: segment {prev.index + 1} and this one move in "
                              f"opposite directions; the base must stop between them")
        for g in (prev, seg):
            if "jerk" in g.values:
                raise ConfigError(f"{where} = true: segment {g.index + 1} has a jerk limit "
                                  f"(S-curves start and end at rest); drop it to blend")


def _nonzero(s, key, unit):
    value = s.number(key, unit=unit)
    if value == 0.0:
        s.fail(key, f"must not be 0{' ' + unit if unit else ''}")
    return value


def _linear_limits(s, rate_unit="m/s", acc_unit="m/s²", jerk_unit="m/s³", speed="speed"):
    v = s.number(speed, unit=rate_unit, lo=0.0, lo_open=True)
    a = s.number("acceleration", unit=acc_unit, lo=0.0, lo_open=True)
    out = {speed: v, "acceleration": a}
    if speed == "speed":
        out["deceleration"] = s.number("deceleration", a, unit=acc_unit, lo=0.0, lo_open=True)
    jerk = s.number("jerk", unit=jerk_unit, lo=0.0, lo_open=True, required=False)
    if jerk is not None:
        if out.get("deceleration", a) != a:
            s.fail("deceleration", f"must equal acceleration ({a:g}) when jerk is given "
                                   f"(the S-curve is symmetric), got {out['deceleration']:g}")
        out["jerk"] = jerk
    return out


def _blend(s):
    blend = s.raw("blend", False, required=False)
    if not isinstance(blend, bool):
        s.fail("blend", f"must be true or false, got {blend!r}")
    return {"blend": blend}


def _straight(s):
    return {"distance": _nonzero(s, "distance", "m"), **_linear_limits(s), **_blend(s)}


def _arc(s):
    return {"radius": _nonzero(s, "radius", "m"),
            "angle": s.number("angle", unit="rad", lo=0.0, lo_open=True), **_linear_limits(s),
            **_blend(s)}


def _turn(s):
    return {"angle": _nonzero(s, "angle", "rad"),
            **_linear_limits(s, "rad/s", "rad/s²", "rad/s³", speed="rate")}


def _stop(s):
    return {"speed": s.number("speed", unit="m/s", lo=0.0, lo_open=True),
            "acceleration": s.number("acceleration", unit="m/s²", lo=0.0, lo_open=True),
            "deceleration": s.number("deceleration", unit="m/s²", lo=0.0, lo_open=True),
            "cruise": s.number("cruise", 0.5, unit="s", lo=0.0)}


def _arm(s):
    target = s.pose("to", required=True)
    profile = s.string("profile", "minimum_jerk")
    if profile not in PROFILES:
        s.fail("profile", f"must be one of {', '.join(PROFILES)}, got {profile!r}")
    return {"to": target, "duration": s.number("duration", unit="s", lo=0.0, lo_open=True),
            "profile": profile, "offset": s.number("offset", unit="s", lo=0.0, required=False)}


def _dwell(s):
    return {"duration": s.number("duration", unit="s", lo=0.0, lo_open=True)}


_READERS = {"straight": _straight, "arc": _arc, "turn": _turn, "stop": _stop,
            "arm": _arm, "dwell": _dwell}


def resolve_pose(duty, robot, value, where):
    """Arm joint values from a pose name or a list, checked against the limits."""
    name = duty.path.name
    if not (isinstance(value, str) or (isinstance(value, (list, tuple, np.ndarray)) and all(
            isinstance(v, (int, float, np.floating)) and not isinstance(v, bool) for v in value))):
        raise ConfigError(f"{name}: {where} must be a pose name or a list of joint values "
                          f"(rad or m), got {value!r}")
    if isinstance(value, str):
        if value not in robot.description.poses:
            known = ", ".join(sorted(robot.description.poses)) or "none"
            raise ConfigError(f"{name}: {where} names the pose '{value}', which the robot "
                              f"description does not define (poses: {known})")
        return robot.description.poses[value].copy()
    q = np.asarray(value, dtype=float)
    if q.shape != (robot.n_arm,) or not np.all(np.isfinite(q)):
        raise ConfigError(f"{name}: {where} must list {robot.n_arm} finite joint values "
                          f"({', '.join(robot.arm_joint_names)}), got {value!r}")
    bad = np.flatnonzero((q < robot.lower - 1e-9) | (q > robot.upper + 1e-9))
    if bad.size:
        j = int(bad[0])
        raise ConfigError(f"{name}: {where} puts joint '{robot.arm_joint_names[j]}' at "
                          f"{q[j]:g}, outside its limits [{robot.lower[j]:g}, {robot.upper[j]:g}]")
    return q


def check_against_robot(duty, robot):
    """Speeds within the base's top speed; arm targets resolvable and in limits."""
    name = duty.path.name
    top = robot.top_speed
    for seg in duty.segments:
        where = f"[[segment]] {seg.index + 1} ({seg.kind})"
        v = seg.values
        if seg.kind in ("straight", "arc", "stop") and v["speed"] > top * (1 + 1e-12):
            raise ConfigError(f"{name}: {where} speed = {v['speed']:g} m/s exceeds the base's "
                              f"top_speed {top:g} m/s ({robot.description.path.name} [base])")
        if seg.kind == "turn":
            wheel = robot.half_track * v["rate"]
            if wheel > top * (1 + 1e-12):
                raise ConfigError(f"{name}: {where} rate = {v['rate']:g} rad/s drives the wheels "
                                  f"at {wheel:g} m/s, beyond the base's top_speed {top:g} m/s")
        if seg.kind == "arc":
            outer = v["speed"] * (1 + robot.half_track / abs(v["radius"]))
            if outer > top * (1 + 1e-12):
                raise ConfigError(f"{name}: {where} speed = {v['speed']:g} m/s on radius "
                                  f"{v['radius']:g} m drives the outer wheel at {outer:g} m/s, "
                                  f"beyond the base's top_speed {top:g} m/s")
        if seg.kind == "arm":
            resolve_pose(duty, robot, v["to"], f"{where} to")
    if duty.arm_start is not None:
        resolve_pose(duty, robot, duty.arm_start, "[cycle] arm_start")
