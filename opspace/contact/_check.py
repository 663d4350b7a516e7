"""The contact pre-check of a robot: at a pose, along a motion, heaviest poses, maps."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..description import load_regions
from ..errors import ConfigError
from ._motion import contact_track, heaviest_pose, speed_map
from ._points import effective_masses

__all__ = ["CAUTIONS", "ContactCheck", "check_contacts"]

CAUTIONS = (
    "This is a pre-check for design, not a validation of collaborative operation.",
    "Collaborative operation needs a risk assessment and measurement of forces and "
    "pressures with calibrated instruments on the real robot.",
    "The body-region values are those of the table named below; where it says they were "
    "entered from memory, verify them against the applicable edition of the standard.",
    "Effective masses and speeds are model estimates; defer to the applicable safety "
    "standards for mobile robots and manipulators, local codes and licensed engineering "
    "practice.",
)


@dataclass(frozen=True, eq=False)
class ContactCheck:
    """Result of `check_contacts`.

    points: the ContactPointSpec checked; regions: the RegionTable used;
    pose: its name (or "given"); at_pose: a PointMass per point (at the pose,
    along each point's direction of interest); heaviest: per point a dict
    (name, arm configuration, mass kg, direction); track: a ContactTrack over
    the motion, or None; maps: SpeedMap objects; speed: the speed checked at
    the pose (m/s) or None; status: "exceeded" (a speed above its permissible
    speed), "within" (speeds checked, none above) or "computed" (no speed to
    check); message.
    """

    robot: str
    points: tuple
    regions: object
    pose: str
    at_pose: tuple
    heaviest: tuple
    track: object
    maps: tuple
    speed: float | None
    status: str
    message: str

    def to_dict(self):
        return {"robot": self.robot, "status": self.status, "message": self.message,
                "pose": self.pose, "speed_checked": self.speed,
                "regions": {"source": self.regions.source, "from_memory": self.regions.from_memory,
                            "file": self.regions.path.name,
                            "table": [r.to_dict() for r in self.regions.regions]},
                "points": [p.to_dict() for p in self.points],
                "at_pose": [m.to_dict() for m in self.at_pose],
                "heaviest": [dict(h, arm=list(map(float, h["arm"])),
                              mass=h["mass"] if math.isfinite(h["mass"]) else None)
                         for h in self.heaviest],
                "along_motion": None if self.track is None else self.track.to_dict(),
                "maps": [m.to_dict() for m in self.maps],
                "cautions": list(CAUTIONS)}


def _pose(robot, pose, q):
    if q is not None:
        return "given", np.asarray(q, float)
    if pose is None:
        return "neutral", robot.configuration()
    if pose not in robot.description.poses:
        names = ", ".join(robot.description.poses) or "none"
        raise ConfigError(f"unknown pose {pose!r} (poses of {robot.description.path.name}: "
                          f"{names})")
    return pose, robot.configuration(arm=robot.description.poses[pose])


def _status(at_pose, track, speed):
    uses = [m.speed / m.v_whole_body if m.v_whole_body else math.inf
            for m in at_pose if speed is not None and m.v_whole_body is not None]
    worst_track = None if track is None else track.worst()
    over = [w for w in (worst_track or []) if w["use"] is not None and w["use"] > 1.0]
    if any(u > 1.0 for u in uses) or over:
        where = [f"{w['name']} at t = {w['time']:.2f} s ({w['speed']:.2f} m/s against "
                 f"{w['v_max']:.2f} m/s, {w['region']})" for w in over]
        where += [f"{m.name} at the pose ({m.speed:.2f} m/s against {m.v_whole_body:.2f} m/s, "
                  f"{m.region})" for m in at_pose
                  if speed is not None and m.v_whole_body is not None and m.speed > m.v_whole_body]
        return "exceeded", "permissible contact speed exceeded: " + "; ".join(where)
    if speed is not None or track is not None:
        return "within", "every contact point stays below its permissible speed"
    return "computed", "effective masses and permissible speeds computed (no speed checked)"


def check_contacts(robot, points=None, regions=None, *, pose=None, q=None, speed=None,
                   motion=None, heaviest=True, maps=False, map_samples=1500, map_cell=0.1):
    """The contact pre-check of `robot`.

    Parameters
    ----------
    points : sequence of ContactPointSpec or None   None: the description's
    regions : RegionTable or None                   None: the bundled table
    pose : str or None; q : (nq,) or None           the configuration (default neutral)
    speed : float or None   m/s: each point's speed along its direction to check
    motion : dict or None   {"qs", "nu", "t", "payload_flags", "payload"} of a
             duty cycle or a simulation, for the check along the motion
    heaviest : bool         search the arm pose of highest effective mass per point
    maps : bool             top and side maps of each arm point's permissible speed

    Returns
    -------
    ContactCheck
    """
    points = tuple(robot.description.contact_points if points is None else points)
    if not points:
        raise ConfigError(f"{robot.description.path.name}: no [[contact_point]] is listed "
                          f"and none was given")
    regions = load_regions() if regions is None else regions
    for p in points:
        if p.region is not None:
            regions.get(p.region, f"contact point {p.name!r} region")
        if p.outline is None:
            robot.frame_id(p.frame)
    if speed is not None and not (math.isfinite(speed) and 0.0 <= speed <= 20.0):
        raise ConfigError(f"contact speed must be within 0..20 m/s, got {speed}")
    name, qv = _pose(robot, pose, q)
    at_pose = []
    for p in points:
        m = effective_masses(robot, qv, p, regions=regions, direction=p.direction)
        if speed is not None:
            m = _with_speed(m, speed)
        at_pose.append(m)
    heavy = []
    if heaviest:
        for p in points:
            if p.outline is None and p.frame != "base":
                a, mass = heaviest_pose(robot, p, direction=p.direction)
                heavy.append({"name": p.name, "arm": a, "mass": mass,
                              "direction": list(p.direction)})
    track = None
    if motion is not None:
        track = contact_track(robot, motion["qs"], motion["nu"], points, regions,
                              t=motion["t"], payload_flags=motion.get("payload_flags"),
                              payload=motion.get("payload"))
    found = []
    if maps:
        for p in points:
            if p.outline is None and p.frame != "base":
                for view in ("top", "side"):
                    found.append(speed_map(robot, p, regions, view=view, direction=p.direction,
                                           samples=map_samples, cell=map_cell))
    status, message = _status(at_pose, track, speed)
    return ContactCheck(robot.name, points, regions, name, tuple(at_pose), tuple(heavy), track,
                        tuple(found), speed, status, message)


def _with_speed(m, speed):
    from dataclasses import replace
    return replace(m, speed=float(speed))
