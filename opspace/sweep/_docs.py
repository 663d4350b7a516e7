"""The base documents of a sweep and their per-point copies.

A design point is the base robot description, duty cycle and catalogue with
some values replaced.  The loaders of `opspace.description` take a point's
parsed documents (and the URDF's text) directly, under the base files' own
names, so messages and summary.json read exactly as for the user's files.

`Documents` travels to the workers (parsed TOML tables and the URDF text: a
few kB), so a worker needs no access to the user's files.  Each worker keeps
the robots, catalogues and duty cycles it has loaded in a small cache keyed on
the digest of the effective document content: a robot is built once per
worker and content, not once per point.
"""

from __future__ import annotations

import copy
import hashlib
import json
import os
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

from ..description import read_toml, referenced_path, robot_urdf
from ..errors import ConfigError

__all__ = ["Documents", "digest", "read_documents"]

ROOTS = ("robot", "cycle", "catalogue")


def digest(obj):
    """SHA-256 (hex) of a JSON-able object in canonical form (sorted keys)."""
    text = json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class Documents:
    """The three base documents of a sweep as parsed TOML (plain dicts).

    docs: root ("robot", "cycle", "catalogue") -> dict, the catalogue None
    when the duty cycle names none; names: root -> the base file's name;
    urdf_name, urdf_text: the arm URDF, or the whole robot's (xacro expanded);
    urdf_digest: SHA-256 of its text; urdf_path: where it was read (meshes for
    drawings are found from there).
    """

    docs: dict
    names: dict
    urdf_name: str
    urdf_text: str
    urdf_digest: str
    urdf_path: Path | None = None

    def key(self, root, doc):
        """Cache key of an effective document (the robot's includes its URDF)."""
        extra = self.urdf_digest if root == "robot" else ""
        return root + ":" + digest([doc, extra])


def read_documents(duty_path, *, where):
    """Read the duty cycle at `duty_path`, the robot description and the
    catalogue it names, and the robot's arm URDF.

    `where` prefixes messages (the sweep file and key naming the duty cycle).
    The files are parsed only; the loaders validate them (`load`).
    """
    duty_path = Path(duty_path)
    cycle = read_toml(duty_path, where=where, what="duty cycle")
    table = cycle.get("cycle")
    if not isinstance(table, dict) or not isinstance(table.get("robot"), str):
        raise ConfigError(f"{duty_path.name}: [cycle] robot is missing (the duty cycle must "
                          f"name its robot description)")
    robot_path = referenced_path(duty_path, table["robot"])
    robot = read_toml(robot_path, where=f"{duty_path.name}: [cycle] robot",
                      what="robot description")
    urdf_path, urdf_text = robot_urdf(robot_path, robot)   # arm or whole robot (xacro expanded)
    catalogue, cat_name = None, None
    if isinstance(table.get("catalogue"), str):
        cat_path = referenced_path(duty_path, table["catalogue"])
        catalogue = read_toml(cat_path, where=f"{duty_path.name}: [cycle] catalogue",
                              what="catalogue")
        cat_name = cat_path.name
    return Documents(docs={"robot": robot, "cycle": cycle, "catalogue": catalogue},
                     names={"robot": robot_path.name, "cycle": duty_path.name,
                            "catalogue": cat_name},
                     urdf_name=urdf_path.name, urdf_text=urdf_text,
                     urdf_digest=hashlib.sha256(urdf_text.encode("utf-8")).hexdigest(),
                     urdf_path=urdf_path)


# ------------------------------------------------------------------ editing
def set_value(doc, steps, value):
    """Replace the value at `steps` (resolved: ("key", name) / ("index", i))
    in `doc` (mutated).  A missing last key, or a missing table before it, is
    created (the loader then accepts it or names it unknown)."""
    node = doc
    for kind, k in steps[:-1]:
        if kind == "key" and k not in node:
            node[k] = {}
        node = node[k]
    node[steps[-1][1]] = value


def apply(base_docs, assignments):
    """Copies of the documents with `assignments` applied.

    assignments: iterable of (root, steps, action, value); action "set"
    replaces the value, "one" replaces a list by [value], "select" keeps only
    the entry of an array of tables whose name is `value`.  Selections are
    applied last, so that other assignments address the base arrays' indices.
    """
    docs = dict(base_docs)
    touched = set()
    ordered = sorted(assignments, key=lambda a: a[2] == "select")
    for root, steps, action, value in ordered:
        if root not in touched:
            docs[root] = copy.deepcopy(docs[root])
            touched.add(root)
        if action == "set":
            set_value(docs[root], steps, value)
        elif action == "one":
            set_value(docs[root], steps, [value])
        else:
            node = docs[root]
            for _, k in steps[:-1]:
                node = node[k]
            last = steps[-1][1]
            node[last] = [e for e in node[last] if e.get("name") == value]
    return docs


# ------------------------------------------------------------------ loading
def load_robot_doc(documents, doc):
    """A MobileManipulator from an effective robot document."""
    from ..model import load_robot

    doc = dict(doc)
    table = dict(doc.get("robot", {}))
    if "urdf" in table:             # whole robot: its text is at hand, expanded
        table["urdf"] = documents.urdf_name
        table.pop("xacro_args", None)
        doc.pop("package_paths", None)
    else:
        table["arm_urdf"] = documents.urdf_name
    doc["robot"] = table
    return load_robot(Path(documents.names["robot"]), doc=doc, urdf_text=documents.urdf_text)


def load_catalogue_doc(documents, doc):
    from ..description import load_catalogue

    return load_catalogue(Path(documents.names["catalogue"]), doc=doc)


def load_cycle_doc(documents, doc):
    from ..description import load_duty_cycle

    doc = dict(doc)
    table = dict(doc.get("cycle", {}), robot=documents.names["robot"])
    if documents.names["catalogue"] is not None:
        table["catalogue"] = documents.names["catalogue"]
    doc["cycle"] = table
    return load_duty_cycle(Path(documents.names["cycle"]), doc=doc)


_LOADERS = {"robot": load_robot_doc, "catalogue": load_catalogue_doc, "cycle": load_cycle_doc}


class Cache:
    """Loaded objects keyed on the digest of their effective document; least
    recently used entries dropped beyond `size`.  One per process."""

    def __init__(self, size=32):
        self.size = size
        self.items = OrderedDict()
        self.loads = 0   # how many loads this process did (for tests and the benchmark)

    def get(self, documents, root, doc):
        key = documents.key(root, doc)
        if key in self.items:
            self.items.move_to_end(key)
            return self.items[key]
        obj = _LOADERS[root](documents, doc)
        self.loads += 1
        self.items[key] = obj
        while len(self.items) > self.size:
            self.items.popitem(last=False)
        return obj

    def forget(self, documents, root, doc):
        self.items.pop(documents.key(root, doc), None)


def worker_tag():
    """pid@host of this process (a record's `worker` column)."""
    import socket

    return f"{os.getpid()}@{socket.gethostname()}"
