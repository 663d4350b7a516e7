"""Reading and validating the inputs of the contact pre-check.

Two kinds of input (SI units; documented in the README's reference section):

- **Contact points** (``[[contact_point]]``), in the robot description or in a
  file of their own with the same tables::

      [[contact_point]]
      name = "tool"            # free text, unique
      frame = "tool"           # a link or frame of the arm URDF, or "base"
      offset = [0, 0, 0]       # m, in that frame (default: its origin)
      region = "hand_fingers"  # a body region of the table (default: the most
                               # restrictive one at the point's height)
      area = 1.0e-4            # m², contact area for the pressure limit (default: none)
      direction = [1, 0, 0]    # base frame, a direction of interest (default +x)

      [[contact_point]]
      name = "front_left_corner"
      outline = "front_left"   # a point of [base] footprint instead of a frame:
                               # front_left, front_right, rear_left, rear_right,
                               # front, rear, left, right; at half its height

- **Body regions** (``[[region]]``, with a ``[source]`` table): the bundled
  `body_regions.toml` (ISO/TS 15066:2016 Annex A, entered from memory and
  marked so) or a user's table of the same schema.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from ..errors import ConfigError
from ._toml import Entry, Section, read_document

__all__ = ["BodyRegion", "ContactPointSpec", "OUTLINE_POINTS", "RegionTable",
           "bundled_regions_path", "load_contact_points", "load_regions", "read_contact_points"]

#: outline names -> (x, y) picked from the footprint (x_min, x_max, y_min, y_max)
OUTLINE_POINTS = {
    "front_left": (1, 3), "front_right": (1, 2), "rear_left": (0, 3), "rear_right": (0, 2),
    "front": (1, None), "rear": (0, None), "left": (None, 3), "right": (None, 2),
}


@dataclass(frozen=True)
class BodyRegion:
    """A body region of the two-body model.

    spring_constant k N/m, mass m_H kg, force F_s N and pressure p_s Pa
    (quasi-static limits), transient_factor (multiplier for transient contact;
    0 = not permitted), height (low, high) m above the floor.
    """

    name: str
    label: str
    spring_constant: float
    mass: float
    force: float
    pressure: float
    transient_factor: float
    height: tuple[float, float]

    def to_dict(self):
        return {"name": self.name, "label": self.label,
                "spring_constant": self.spring_constant, "mass": self.mass,
                "force": self.force, "pressure": self.pressure,
                "transient_factor": self.transient_factor, "height": list(self.height)}


@dataclass(frozen=True)
class RegionTable:
    """The body regions in force: `regions` in file order, `source` (text),
    `from_memory` (True when the file says its values were entered from memory),
    `path` of the file."""

    regions: tuple
    source: str
    from_memory: bool
    path: Path

    def get(self, name, where="region"):
        for r in self.regions:
            if r.name == name:
                return r
        names = ", ".join(r.name for r in self.regions)
        raise ConfigError(f"{where}: unknown body region {name!r} (regions of "
                          f"{self.path.name}: {names})")

    def at_height(self, z):
        """The regions whose height band holds z (m above the floor)."""
        return tuple(r for r in self.regions if r.height[0] <= z <= r.height[1])


@dataclass(frozen=True)
class ContactPointSpec:
    """A point of the robot where a person could be struck.

    frame: a model frame ("base" for the chassis) and offset m in it; or
    outline: a footprint point name (then frame is "base" and offset computed).
    region: a body-region name or None (most restrictive at the point's height);
    area m² or None; direction (3,) unit vector in the base frame.
    """

    name: str
    frame: str
    offset: tuple[float, float, float]
    region: str | None = None
    area: float | None = None
    direction: tuple[float, float, float] = (1.0, 0.0, 0.0)
    outline: str | None = None

    def to_dict(self):
        return {"name": self.name, "frame": self.frame, "offset": list(self.offset),
                "region": self.region, "area": self.area, "direction": list(self.direction),
                "outline": self.outline}


def bundled_regions_path():
    """The bundled body-region table (ISO/TS 15066 Annex A values, from memory)."""
    return Path(__file__).resolve().with_name("body_regions.toml")


def load_regions(path=None, *, doc=None):
    """Read and validate a body-region table; None = the bundled one.

    Returns
    -------
    RegionTable

    Raises
    ------
    ConfigError   naming file, key, value and expectation
    """
    path = Path(path) if path is not None else bundled_regions_path()
    path, doc = read_document(path, doc, ("source", "region"), ("region",))
    s = Section(path, "source", doc.get("source", {}))
    title = s.string("title", "(no source given)")
    from_memory = s.raw("from_memory", False, required=False)
    if not isinstance(from_memory, bool):
        s.fail("from_memory", f"must be true or false, got {from_memory!r}")
    s.finish()
    entries = doc["region"]
    if not isinstance(entries, list) or not entries:
        raise ConfigError(f"{path.name}: [[region]] must be a non-empty array of tables, "
                          f"got {entries!r}")
    regions = _named_entries(path, "region", entries, _read_region, "region")
    return RegionTable(regions, title, from_memory, path)


def _named_entries(path, kind, entries, read, what):
    """Each table of an array of tables read by `read(Entry)`; a repeated name
    is refused naming the entry."""
    out, seen = [], set()
    for i, table in enumerate(entries):
        e = Entry(path, kind, i + 1, table)
        item = read(e)
        if item.name in seen:
            e.fail("name", f"repeats the {what} {item.name!r}")
        seen.add(item.name)
        out.append(item)
    return tuple(out)


def _read_region(e):
    name = e.string("name")
    label = e.string("label", name)
    k = e.number("spring_constant", unit="N/m", lo=0.0, lo_open=True, hi=1e8)
    m = e.number("mass", unit="kg", lo=0.0, lo_open=True, hi=500.0)
    force = e.number("force", unit="N", lo=0.0, lo_open=True, hi=1e5)
    pressure = e.number("pressure", unit="Pa", lo=0.0, lo_open=True, hi=1e9)
    factor = e.number("transient_factor", 2.0, lo=0.0, hi=10.0)
    height = e.vector("height", 2, (0.0, 3.0), unit="m")
    if not 0.0 <= height[0] < height[1] <= 5.0:
        e.fail("height", f"must be [low, high] with 0 <= low < high <= 5 m, got {list(height)}")
    e.finish()
    return BodyRegion(name, label, k, m, force, pressure, factor, height)


def load_contact_points(path, *, doc=None):
    """Contact points from a file of their own (top-level ``[[contact_point]]``).

    Frames and outline names are checked against a robot by `opspace.contact`
    (the file alone does not know the robot).
    """
    path, doc = read_document(path, doc, ("contact_point",), ("contact_point",))
    return read_contact_points(path, doc["contact_point"])


def read_contact_points(path, entries):
    """Validate ``[[contact_point]]`` tables (shape only; frames are checked
    against the model when the points are used)."""
    path = Path(path)
    if not isinstance(entries, list) or not all(isinstance(t, dict) for t in entries):
        raise ConfigError(f"{path.name}: [[contact_point]] must be an array of tables, "
                          f"got {entries!r}")
    return _named_entries(path, "contact_point", entries, _read_point, "contact point")


def _read_point(e):
    name = e.string("name")
    outline = e.string("outline", required=False)
    frame = e.string("frame", required=False)
    if (outline is None) == (frame is None):
        e.fail("frame", "or outline: exactly one of the two must be given")
    if outline is not None and outline not in OUTLINE_POINTS:
        e.fail("outline", f"must be one of {', '.join(OUTLINE_POINTS)}, got {outline!r}")
    offset = e.vector("offset", 3, (0.0, 0.0, 0.0), unit="m")
    if outline is not None and e.has("offset"):
        e.fail("offset", "goes with frame, not with outline (the footprint places the point)")
    if max(abs(x) for x in offset) > 10.0:
        e.fail("offset", f"must be within 10 m of the frame (a length in mm?), got {list(offset)}")
    region = e.string("region", required=False)
    area = e.number("area", unit="m²", lo=0.0, lo_open=True, hi=1.0, required=False)
    direction = e.vector("direction", 3, (1.0, 0.0, 0.0))
    n = math.sqrt(sum(x * x for x in direction))
    if not n > 1e-9:
        e.fail("direction", f"must have a non-zero length, got {list(direction)}")
    e.finish()
    return ContactPointSpec(name, frame or "base", offset, region, area,
                            tuple(x / n for x in direction), outline)
