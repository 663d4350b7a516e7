"""TOML reading and validation helpers shared by every description file
(robot, duty cycle, catalogue, simulation scenario).

Messages name the file, the table and key, the value found and what was
expected: ``robot.toml: [base] mass must be > 0 kg, got -3``.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np

from ..errors import ConfigError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["Entry", "Section", "check_inertia", "inertia_matrix", "read_document", "read_toml"]


# ---------------------------------------------------------------------------
def read_toml(path):
    """Parse a TOML file; missing file or bad syntax -> ConfigError naming it."""
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"{path}: file not found")
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc})") from None
    except OSError as exc:
        raise ConfigError(f"{path}: cannot be read ({exc})") from None


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
        """A finite real number within the given bounds."""
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
        return value

    def vector(self, key, size, default=None, *, unit="", required=True):
        value = self.raw(key, default, required=required)
        if value is None:
            return None
        if (not isinstance(value, (list, tuple)) or len(value) != size
                or not all(isinstance(v, (int, float)) and not isinstance(v, bool)
                           for v in value)):
            self.fail(key, f"must be a list of {size} numbers{_unit(unit)}, got {value!r}")
        if not all(math.isfinite(v) for v in value):
            self.fail(key, f"must have finite entries, got {value!r}")
        return tuple(float(v) for v in value)

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


