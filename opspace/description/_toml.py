"""TOML reading and validation helpers shared by every description file
(robot, duty cycle, catalogue, simulation scenario).

Messages name the file, the table and key, the value found and what was
expected: ``robot.toml: [base] mass must be > 0 kg, got -3``.
"""

from __future__ import annotations

import errno
import math
import os
import sys
from pathlib import Path

import numpy as np

from ..errors import ConfigError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["Entry", "MAX_GEAR_RATIO", "PLAUSIBLE", "ROBOT_SIZE", "Section", "check_file", "check_inertia", "check_output_dir",
           "inertia_matrix", "option_number",
           "plausible_bound", "read_document", "read_text", "read_toml", "referenced_path"]


# ---------------------------------------------------------------------------
# files: one resolver and one reader for every input file
# ---------------------------------------------------------------------------
def _safe_resolve(path):
    """`path` made absolute and resolved as far as possible (a symlink loop or a
    missing part leaves the rest unresolved instead of raising)."""
    try:
        return Path(path).resolve()
    except (RuntimeError, OSError, ValueError):
        return Path(os.path.abspath(path))


def referenced_path(base, rel):
    """The file `rel` names, relative to the directory of the file `base`
    (absolute when `rel` is); resolved without requiring it to exist."""
    return _safe_resolve(Path(base).parent / rel)


def check_file(path, *, where=None, what="file"):
    """The resolved path of an existing regular file, else ConfigError.

    `where` names who refers to it (``"cycle.toml: [cycle] robot"``), or None
    for a file the user gave directly; the message then starts with the path.
    Catches a missing file, a dangling link, a symlink loop, a directory, a
    device or pipe, a name that is not a valid path.
    """
    def fail(problem):
        if where:
            return ConfigError(f"{where}: {what} {problem}: {path}")
        return ConfigError(f"{path}: {what} {problem}")

    try:
        resolved = Path(path).resolve(strict=True)
    except RuntimeError:          # Python < 3.13 reports a symlink loop so
        raise fail("is a symbolic link loop") from None
    except FileNotFoundError:
        raise fail("is a broken symbolic link" if os.path.islink(path) else "not found") from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise fail("is a symbolic link loop") from None
        raise fail(f"cannot be opened ({exc.strerror})") from None
    except ValueError as exc:     # e.g. an embedded NUL character
        raise fail(f"is not a valid path ({exc})") from None
    if resolved.is_dir():
        raise fail("is a directory, not a file")
    if not resolved.is_file():
        raise fail("is not a regular file")
    return resolved


def check_output_dir(path, *, option="-o"):
    """An output directory that exists and is writable, or can be created:
    checked before anything is computed (ConfigError naming `option`).
    Nothing is created here."""
    out = Path(path)
    probe = out
    try:
        while not os.path.lexists(probe):
            if probe.parent == probe:
                break
            probe = probe.parent
        if os.path.lexists(probe) and not os.path.exists(probe):
            raise ConfigError(f"{option} {out}: {probe} is a broken symbolic link or a loop")
        if not probe.is_dir():
            raise ConfigError(f"{option} {out}: {probe} exists and is not a directory")
    except OSError as exc:
        raise ConfigError(f"{option} {out}: cannot be used ({exc.strerror})") from None
    if not os.access(probe, os.W_OK | os.X_OK):
        raise ConfigError(f"{option} {out}: {probe} is not writable")
    import tempfile

    try:      # a read-only file system passes os.access for root: try it
        with tempfile.TemporaryFile(dir=probe):
            pass
    except OSError as exc:
        raise ConfigError(f"{option} {out}: cannot write in {probe} ({exc.strerror})") from None
    return out


def option_number(option, value, *, lo=None, hi=None, unit=""):
    """A command-line option's number checked like a file key: finite, within
    [lo, hi]; ConfigError naming the option otherwise."""
    if value is None:
        return None
    if not math.isfinite(value):
        raise ConfigError(f"{option} must be finite, got {value!r}")
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        raise ConfigError(f"{option} must be within [{lo:g}, {hi:g}]{_unit(unit)}, "
                          f"got {value:g}")
    return value


def read_text(path, *, where=None, what="file"):
    """The content of a text input file, decoded as strict UTF-8 (a UTF-8
    byte-order mark is allowed); ConfigError naming the file and the byte
    offset of the first undecodable byte otherwise."""
    resolved = check_file(path, where=where, what=what)
    name = Path(path).name
    try:
        data = resolved.read_bytes()
    except OSError as exc:
        raise ConfigError(f"{name}: cannot be read ({exc.strerror})") from None
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        raise ConfigError(f"{name}: is UTF-16 text; save it as UTF-8")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise ConfigError(f"{name}: is not UTF-8 text: byte 0x{data[exc.start]:02x} at offset "
                          f"{exc.start} (line {line}) cannot be decoded; save the file as "
                          f"UTF-8") from None
    return text[1:] if text.startswith("\ufeff") else text


def read_toml(path, *, where=None, what="file"):
    """Parse a TOML file (`read_text`: strict UTF-8); a missing or unreadable
    file or bad syntax -> ConfigError naming it (and `where`, who refers to it)."""
    text = read_text(path, where=where, what=what)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{Path(path).name}: not valid TOML ({exc})") from None


def read_document(path, doc, tables, required, *, listed=None):
    """(path, doc) of an input file: its parsed TOML (or `doc`, already parsed),
    with unknown top-level tables rejected (the message lists `listed`, default
    the names of `tables`) and every `required` table present; ConfigError
    naming the file otherwise."""
    path = Path(path)
    doc = read_toml(path) if doc is None else doc
    unknown = sorted(set(doc) - set(tables))
    if unknown:
        raise ConfigError(f"{path.name}: [{unknown[0]}] is not a known table "
                          f"(valid tables: {listed or ', '.join(tables)})")
    for table in required:
        if table not in doc:
            raise ConfigError(f"{path.name}: table [{table}] is missing")
    return path, doc


class Section:
    """One TOML table being read: knows its file and name for messages, and
    rejects keys it was not asked about (`finish`)."""

    def __init__(self, file, name, table):
        self.file = Path(file).name
        self.name = name
        if not isinstance(table, dict):
            self.fail("", f"must be a table, got {table!r}")
        self.table = table
        self.seen = set()

    def where(self, key):
        return f"{self.file}: [{self.name}] {key}".rstrip()

    def fail(self, key, what):
        raise ConfigError(f"{self.where(key)} {what}")

    def has(self, key):
        return key in self.table

    def raw(self, key, default=None, *, required=True):
        self.seen.add(key)
        if key in self.table:
            return self.table[key]
        if required and default is None:
            self.fail(key, "is missing")
        return default

    def number(self, key, default=None, *, unit="", lo=None, lo_open=False,
               hi=None, required=True):
        """A finite real number within the given bounds and within the
        plausible magnitude of its unit (`PLAUSIBLE`); an infinite value only
        where the default is infinite (the key's documented "unlimited")."""
        value = self.raw(key, default, required=required)
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(key, f"must be a number{_unit(unit)}, got {value!r}")
        value = float(value)
        if math.isnan(value) or (math.isinf(value) and default != value):
            self.fail(key, f"must be finite, got {value!r}")
        if lo is not None and (value <= lo if lo_open else value < lo):
            op = ">" if lo_open else ">="
            self.fail(key, f"must be {op} {lo:g}{_unit(unit)}, got {value:g}")
        if hi is not None and value > hi:
            self.fail(key, f"must be <= {hi:g}{_unit(unit)}, got {value:g}")
        if math.isfinite(value) and (hi is None if value > 0 else lo is None):
            self.plausible(key, value, unit)     # a range the key states itself wins
        return value

    def plausible(self, key, value, unit, cap=None):
        """|value| within `cap` (default: the plausible bound of `unit`)."""
        cap = plausible_bound(unit) if cap is None else cap
        if abs(value) > cap:
            self.fail(key, f"must be within ±{cap:g}{_unit(unit)} (a plausible bound for a "
                           f"mobile manipulator: check the units), got {value:g}")

    def vector(self, key, size, default=None, *, unit="", required=True, cap=None):
        """A list of `size` finite numbers, each within `cap` (default: the
        plausible bound of `unit`)."""
        value = self.raw(key, default, required=required)
        if value is None:
            return None
        if (not isinstance(value, (list, tuple)) or len(value) != size
                or not all(isinstance(v, (int, float)) and not isinstance(v, bool)
                           for v in value)):
            self.fail(key, f"must be a list of {size} numbers{_unit(unit)}, got {value!r}")
        if not all(math.isfinite(v) for v in value):
            self.fail(key, f"must have finite entries, got {value!r}")
        for v in value:
            self.plausible(key, v, unit, cap)
        return tuple(float(v) for v in value)

    def pose(self, key, *, required=False):
        """An arm pose reference: a pose name (text) or a list of joint values
        (numbers); resolved against the robot later (`duty.resolve_pose`)."""
        value = self.raw(key, required=required)
        if value is None:
            return None
        if isinstance(value, str) and value.strip():
            return value
        if (isinstance(value, list) and value
                and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)):
            if not all(math.isfinite(v) for v in value):
                self.fail(key, f"must have finite joint values, got {value!r}")
            return value
        self.fail(key, f"must be a pose name or a list of joint values (rad or m), "
                       f"got {value!r}")

    def string(self, key, default=None, *, required=True):
        value = self.raw(key, default, required=required)
        if value is None:
            return None
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"must be a non-empty string, got {value!r}")
        return value

    def finish(self):
        unknown = sorted(set(self.table) - self.seen)
        if unknown:
            valid = ", ".join(sorted(self.seen))
            self.fail(unknown[0], f"is not a known key (valid keys: {valid})")


class Entry(Section):
    """One table of an array of tables ([[motor]], [[parameter]], ...): messages
    read ``drives.toml: [[motor]] 2 'M-90' rated_torque must ...`` (the entry's
    1-based index and, when it has one, its `name_key` value)."""

    def __init__(self, file, kind, index, table, name_key="name"):
        self.label = f"[[{kind}]] {index}"
        super().__init__(file, kind, table)
        name = table.get(name_key) if isinstance(table, dict) else None
        if isinstance(name, str) and name.strip():
            self.label += f" {name!r}"

    def where(self, key):
        return f"{self.file}: {self.label} {key}".rstrip()


#: Plausible magnitude of a value by unit for a mobile manipulator and its
#: duty (common practice, no source): larger values are refused as a unit
#: mistake (mm for m, g for kg) or a typo.  Keys with a tighter documented
#: range check it themselves; README "Plausible ranges" lists these.
PLAUSIBLE = {
    "": 1e6, "m": 1e4, "kg": 1e5, "kg·m²": 1e5, "s": 1e6, "rad": 1e3,
    "m/s": 100.0, "rad/s": 1e4, "rad/s or m/s": 1e4, "m/s²": 1e3, "rad/s²": 1e4,
    "m/s³": 1e5, "rad/s³": 1e5, "N": 1e6, "N·m": 1e6, "N·m or N": 1e6,
    "N·m·s/rad": 1e6, "N·m·s/rad or N·s/m": 1e6, "N·m/A": 1e3, "Ω": 1e4,
    "Hz": 1e6, "1/h": 1e4, "1/s": 1e5, "1/s²": 1e8, "rad or m": 1e3,
    "Pa": 1e10, "N/m": 1e10, "m²": 1e3,
}


#: largest plausible robot dimension, m (centre-of-mass offsets, mount,
#: footprint, casters, track, wheel radius, URDF joint offsets): a larger one
#: is a unit mistake (a file written in millimetres) or a typo (common
#: practice, no source).
ROBOT_SIZE = 10.0
#: largest plausible gear ratio (motor speed / output speed); multi-stage
#: industrial gearboxes stay below it (common practice, no source).
MAX_GEAR_RATIO = 1e4


def plausible_bound(unit):
    """The plausible magnitude of a value in `unit` (`PLAUSIBLE`, else 1e6)."""
    return PLAUSIBLE.get(unit, 1e6)


def _unit(unit):
    return f" {unit}" if unit else ""


def inertia_matrix(values):
    """3x3 tensor from [Ixx, Iyy, Izz, Ixy, Ixz, Iyz]."""
    ixx, iyy, izz, ixy, ixz, iyz = values
    return np.array([[ixx, ixy, ixz], [ixy, iyy, iyz], [ixz, iyz, izz]])


def check_inertia(values, where, *, allow_zero=False):
    """Physical validity of a rotational inertia about the COM.

    The principal moments (eigenvalues) must be positive and satisfy the
    triangle inequality I_a <= I_b + I_c (a property of any mass distribution,
    e.g. Meriam & Kraige, Engineering Mechanics: Dynamics, appendix B).
    `where` prefixes the message (file and key).
    """
    I = inertia_matrix(values)
    if allow_zero and not np.any(I):
        return
    lam = np.linalg.eigvalsh(I)
    if lam[0] <= 0.0:
        raise ConfigError(
            f"{where} must be positive definite, got {list(values)} "
            f"(principal moments {np.round(lam, 9).tolist()} kg·m²)")
    tol = 1e-9 * lam[-1]
    if lam[2] > lam[0] + lam[1] + tol:
        raise ConfigError(
            f"{where} violates the triangle inequality of principal moments "
            f"(I1 <= I2 + I3), got {list(values)} (principal moments "
            f"{np.round(lam, 9).tolist()} kg·m²)")


