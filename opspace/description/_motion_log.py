"""Reading and validating a motion log (CSV) for identification.

Format (our own; documented in the README): comment lines start with ``#``;
the first other line is the header; one row per sample, comma separated.

    time                       s, strictly increasing, about uniform
    <coordinate>               position of each reduced coordinate: wheel_right,
                               wheel_left (wheel angles, rad), each independent arm
                               joint (rad or m) — robot.coordinate_names
    effort:<coordinate>        measured effort at the joint / wheel, N·m or N
    current:<coordinate>       or the motor current, A: effort = k_t · i · G with the
                               torque constant k_t (N·m/A, given per coordinate) and
                               the gear ratio G of the description
    velocity:<coordinate>      optional, rad/s or m/s (else differentiated)
    acceleration:<coordinate>  optional, rad/s² or m/s² (else differentiated)
    payload                    optional, 1 while the rated payload is held, else 0

A coordinate without an effort or current column contributes no equations.
Efforts follow the model's sign convention: positive effort accelerates the
coordinate positively (a positive wheel torque drives the robot forward).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import ConfigError

__all__ = ["MotionLog", "load_motion_log"]

#: jitter of the sampling interval accepted (max |dt − median| / median)
MAX_JITTER = 0.05


@dataclass(frozen=True, eq=False)
class MotionLog:
    """A validated log: t (n,) s; positions (n, nv); efforts (n, nv) with nan
    where the coordinate has no effort column; velocity, acceleration (n, nv)
    or None; payload (n,) bool; path; coordinate names."""

    path: Path
    t: np.ndarray
    positions: np.ndarray
    efforts: np.ndarray
    velocity: np.ndarray | None
    acceleration: np.ndarray | None
    payload: np.ndarray
    coordinates: tuple

    @property
    def measured(self):
        """Coordinates with an effort, (nv,) bool."""
        return ~np.all(np.isnan(self.efforts), axis=0)


def _read_rows(path):
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{path}: not UTF-8 text (byte {exc.start}): a motion log is a "
                          f"CSV file") from None
    except OSError as exc:
        raise ConfigError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise ConfigError(f"{path.name}: no header line (a motion log is a CSV file with a "
                          f"header: time, positions, efforts)")
    rows = list(csv.reader(lines))
    return [h.strip() for h in rows[0]], rows[1:]


def _ratio(robot, k):
    """Gear ratio of reduced coordinate k from the description (1 if none)."""
    d = robot.description
    if k < 2:
        return d.drive.gear_ratio
    jd = d.arm_joints.get(robot.coordinate_names[k])
    return jd.gear_ratio if jd is not None else 1.0


def load_motion_log(path, robot, *, torque_constants=None, min_samples=20):
    """Read a motion log against `robot`; ConfigError naming the file, column,
    row and value otherwise.

    torque_constants: {coordinate: k_t N·m/A} for current columns.
    """
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"{path}: motion log not found")
    header, rows = _read_rows(path)
    names = list(robot.coordinate_names)
    known = {"time", "payload", *names}
    for prefix in ("effort:", "current:", "velocity:", "acceleration:"):
        known |= {prefix + n for n in names}
    for h in header:
        if h not in known:
            raise ConfigError(f"{path.name}: column {h!r} is not a known column (time, "
                              f"payload, the coordinates {', '.join(names)}, and effort:, "
                              f"current:, velocity:, acceleration: of each)")
    if len(set(header)) != len(header):
        dup = next(h for h in header if header.count(h) > 1)
        raise ConfigError(f"{path.name}: column {dup!r} appears twice")
    missing = [c for c in ["time", *names] if c not in header]
    if missing:
        raise ConfigError(f"{path.name}: column {missing[0]!r} is missing (needed: time and "
                          f"the position of every coordinate: {', '.join(names)})")
    data = np.empty((len(rows), len(header)))
    for i, row in enumerate(rows):
        if len(row) != len(header):
            raise ConfigError(f"{path.name}: row {i + 2} has {len(row)} values, the header "
                              f"{len(header)}")
        for j, cell in enumerate(row):
            try:
                data[i, j] = float(cell)
            except ValueError:
                raise ConfigError(f"{path.name}: row {i + 2} column {header[j]!r}: {cell!r} "
                                  f"is not a number") from None
            if not math.isfinite(data[i, j]):
                raise ConfigError(f"{path.name}: row {i + 2} column {header[j]!r}: {cell!r} "
                                  f"is not finite")
    col = {h: data[:, j] for j, h in enumerate(header)}
    t = col["time"]
    if len(t) < min_samples:
        raise ConfigError(f"{path.name}: {len(t)} samples; at least {min_samples} are needed")
    dt = np.diff(t)
    if np.any(dt <= 0):
        i = int(np.argmax(dt <= 0))
        raise ConfigError(f"{path.name}: time must increase strictly: row {i + 3} has "
                          f"{t[i + 1]!r} after {t[i]!r}")
    med = float(np.median(dt))
    if np.max(np.abs(dt - med)) > MAX_JITTER * med:
        raise ConfigError(f"{path.name}: the sampling interval varies by more than "
                          f"{MAX_JITTER:.0%} around {med:g} s: resample the log to a uniform "
                          f"rate")
    nv = robot.nv
    efforts = np.full((len(t), nv), np.nan)
    kt = dict(torque_constants or {})
    for k, n in enumerate(names):
        if f"effort:{n}" in col and f"current:{n}" in col:
            raise ConfigError(f"{path.name}: give effort:{n} or current:{n}, not both")
        if f"effort:{n}" in col:
            efforts[:, k] = col[f"effort:{n}"]
        elif f"current:{n}" in col:
            if n not in kt:
                raise ConfigError(f"{path.name}: column current:{n} needs a torque constant "
                                  f"for {n} (--torque-constant {n}=K, N·m/A)")
            efforts[:, k] = kt.pop(n) * _ratio(robot, k) * col[f"current:{n}"]
    if kt:
        raise ConfigError(f"torque constant given for {sorted(kt)[0]!r}, which has no current "
                          f"column in {path.name}")
    if np.all(np.isnan(efforts)):
        raise ConfigError(f"{path.name}: no effort:<coordinate> or current:<coordinate> column")
    payload = np.zeros(len(t), bool)
    if "payload" in col:
        bad = ~np.isin(col["payload"], (0.0, 1.0))
        if bad.any():
            i = int(np.argmax(bad))
            raise ConfigError(f"{path.name}: row {i + 2} column 'payload' must be 0 or 1, got "
                              f"{col['payload'][i]!r}")
        payload = col["payload"] == 1.0
        if payload.any() and robot.description.payload is None:
            raise ConfigError(f"{path.name}: the payload column marks held samples but "
                              f"{robot.description.path.name} has no [payload]")

    def optional(prefix):
        cols = [f"{prefix}{n}" for n in names]
        have = [c in col for c in cols]
        if any(have) and not all(have):
            raise ConfigError(f"{path.name}: column {cols[have.index(False)]!r} is missing "
                              f"(give {prefix}<coordinate> for every coordinate, or none)")
        return np.column_stack([col[c] for c in cols]) if all(have) else None

    positions = np.column_stack([col[n] for n in names])
    return MotionLog(path, t, positions, efforts, optional("velocity:"),
                     optional("acceleration:"), payload, tuple(names))
