"""The drawable geometry of a URDF: its links' <visual> and <collision> elements.

Used only for drawing (the 3-D view of the reports): nothing here enters a
computation, so a problem (a missing mesh file, a malformed shape) does not
stop a run; it is kept as a note that the page shows, naming the file, the
link and the element.

Per link the <visual> elements are taken; a link without any takes its
<collision> elements.  A shape is placed in its link frame by its <origin>
(xyz m, rpy rad, fixed-axis roll-pitch-yaw as in URDF).  Mesh file names are
resolved in this order: an absolute path or ``file://`` URL; ``package://pkg/rest``
through `package_paths` (pkg -> directory), else the nearest folder named
``pkg`` above the URDF; a relative name against the URDF's folder.
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from pathlib import Path

__all__ = ["LinkShape", "UrdfShapes", "read_shapes", "resolve_mesh"]

_KINDS = ("box", "cylinder", "sphere", "mesh")


@dataclass(frozen=True)
class LinkShape:
    """One drawable shape of a link.

    link : URDF link name; source : "visual" or "collision";
    kind : "box" (size = x, y, z m), "cylinder" (radius, length m; axis z),
    "sphere" (radius m) or "mesh" (size = scale x, y, z; mesh = resolved Path);
    xyz m and rpy rad : placement in the link frame;
    rgba : colour (0..1 each) from the URDF <material>, or None.
    """

    link: str
    source: str
    kind: str
    size: tuple
    xyz: tuple = (0.0, 0.0, 0.0)
    rpy: tuple = (0.0, 0.0, 0.0)
    mesh: Path | None = None
    rgba: tuple | None = None

    def to_dict(self):
        return {"link": self.link, "source": self.source, "kind": self.kind,
                "size": list(self.size), "xyz": list(self.xyz), "rpy": list(self.rpy),
                "mesh": None if self.mesh is None else str(self.mesh),
                "rgba": None if self.rgba is None else list(self.rgba)}


@dataclass(frozen=True)
class UrdfShapes:
    """The shapes of a URDF (tuple of LinkShape) and notes (str) on what was
    left out and why (missing meshes, malformed elements)."""

    shapes: tuple
    notes: tuple

    def to_dict(self):
        return {"shapes": [s.to_dict() for s in self.shapes], "notes": list(self.notes)}


def _numbers(text, n, where):
    """n finite numbers from an attribute's text, else ValueError naming `where`."""
    try:
        values = tuple(float(v) for v in (text or "").split())
    except ValueError:
        values = ()
    if len(values) != n or not all(math.isfinite(v) for v in values):
        raise ValueError(f"{where} must be {n} finite numbers, got {text!r}")
    return values


def resolve_mesh(filename, urdf_path, package_paths=None):
    """Path of a mesh file named in a URDF, or None when it cannot be found.

    Parameters
    ----------
    filename : str        the <mesh filename> as written
    urdf_path : Path      the URDF file (relative names and package search start there)
    package_paths : dict  package name -> directory (str or Path), optional
    """
    urdf_dir = Path(urdf_path).resolve().parent
    if filename.startswith("file://"):
        candidates = [Path(filename[len("file://"):])]
    elif filename.startswith("package://"):
        pkg, _, rest = filename[len("package://"):].partition("/")
        candidates = []
        if package_paths and pkg in package_paths:
            candidates.append(Path(package_paths[pkg]) / rest)
        candidates += [d / rest for d in (urdf_dir, *urdf_dir.parents) if d.name == pkg]
    else:
        p = Path(filename)
        candidates = [p if p.is_absolute() else urdf_dir / p]
    return next((c for c in candidates if c.is_file()), None)


def _materials(root):
    """Robot-level <material name> -> rgba."""
    out = {}
    for m in root.findall("material"):
        color = m.find("color")
        if m.get("name") and color is not None:
            try:
                out[m.get("name")] = _numbers(color.get("rgba"), 4, "rgba")
            except ValueError:
                pass
    return out


def _rgba(element, materials, where):
    m = element.find("material")
    if m is None:
        return None
    color = m.find("color")
    if color is not None:
        return tuple(min(max(v, 0.0), 1.0) for v in _numbers(color.get("rgba"), 4,
                                                              f"{where} <color rgba>"))
    return materials.get(m.get("name"))


def _shape(element, link, source, materials, urdf_path, package_paths):
    """LinkShape of one <visual>/<collision>; ValueError naming the element."""
    where = f"{Path(urdf_path).name}: link '{link}' <{source}>"
    origin = element.find("origin")
    xyz = _numbers(origin.get("xyz", "0 0 0"), 3, f"{where} <origin xyz>") if origin is not None \
        else (0.0, 0.0, 0.0)
    rpy = _numbers(origin.get("rpy", "0 0 0"), 3, f"{where} <origin rpy>") if origin is not None \
        else (0.0, 0.0, 0.0)
    geometry = element.find("geometry")
    shape = None if geometry is None else next(
        (g for g in geometry if g.tag in _KINDS), None)
    if shape is None:
        raise ValueError(f"{where} has no <box>, <cylinder>, <sphere> or <mesh> geometry")
    kind, mesh = shape.tag, None
    if kind == "box":
        size = _numbers(shape.get("size"), 3, f"{where} <box size>")
    elif kind == "cylinder":
        size = (_numbers(shape.get("radius"), 1, f"{where} <cylinder radius>")[0],
                _numbers(shape.get("length"), 1, f"{where} <cylinder length>")[0])
    elif kind == "sphere":
        size = _numbers(shape.get("radius"), 1, f"{where} <sphere radius>")
    else:
        filename = shape.get("filename") or ""
        size = _numbers(shape.get("scale", "1 1 1"), 3, f"{where} <mesh scale>")
        mesh = resolve_mesh(filename, urdf_path, package_paths)
        if mesh is None:
            raise FileNotFoundError(f"{where} <mesh filename={filename!r}>: file not found")
    if kind != "mesh" and not all(v > 0 for v in size):
        raise ValueError(f"{where} <{kind}> dimensions must be > 0 m, got {list(size)}")
    return LinkShape(link, source, kind, size, xyz, rpy, mesh, _rgba(element, materials, where))


def read_shapes(urdf_path, *, text=None, package_paths=None, sources=("visual", "collision")):
    """The drawable shapes of every link of a URDF.

    Parameters
    ----------
    urdf_path : str or Path   the URDF (names it in notes; relative meshes start there)
    text : str, optional      its content, if already at hand
    package_paths : dict, optional   package name -> directory for ``package://``
    sources : the elements to take, in order of preference per link
              (("collision",) for the collision geometry alone)

    Returns
    -------
    UrdfShapes   shapes in link order, visuals first; notes on what was skipped
    """
    urdf_path = Path(urdf_path)
    notes = []
    try:
        root = ET.fromstring(text if text is not None else urdf_path.read_text(encoding="utf-8"))
    except (OSError, ET.ParseError) as exc:
        return UrdfShapes((), (f"{urdf_path.name}: not read for drawing ({exc})",))
    materials = _materials(root)
    shapes = []
    for link in root.iter("link"):
        name = link.get("name", "")
        for source in sources:
            found = []
            for element in link.findall(source):
                try:
                    found.append(_shape(element, name, source, materials, urdf_path,
                                        package_paths))
                except (ValueError, FileNotFoundError) as exc:
                    notes.append(f"{exc}; not drawn")
            if found:
                shapes += found
                break
    return UrdfShapes(tuple(shapes), tuple(notes))
