"""The files of a sweep's output directory: the CSV (a row per design point,
appended and flushed as each arrives) and the manifest `sweep.json`.

Resuming reads both strictly before anything is written: a file that is not
UTF-8, a row that does not parse, a manifest that is not a sweep's (or of
another sweep) is a ConfigError naming the file and the line, and the files
are left as they are.  The one tolerated damage is a last line without its
newline: the half-written row of a process killed while writing it.  It is
ignored when reading and cut off when the CSV is opened to append (after
every check has passed), so no finished point is lost and none is counted
from a truncated value.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

from ..errors import ConfigError

__all__ = ["FIXED_COLUMNS", "STATUSES", "PointRecord", "Table", "read_manifest", "write_json"]

FIXED_COLUMNS = ("id", "status", "message", "elapsed", "worker")
STATUSES = ("ok", "failed", "error")
#: keys every manifest's "base" record has
BASE_KEYS = ("id", "status", "message", "elapsed", "worker", "verdict", "figures")


@dataclass(frozen=True)
class PointRecord:
    """One design point's row.

    id; status "ok" (sized), "failed" (invalid combination: message says
    why) or "error" (unexpected: recomputed on resume); message (the sizing
    verdict's message when ok); elapsed s (in the worker); worker pid@host;
    values: parameter key -> value; verdict: the sizing status ("pass",
    "fail", "no catalogue") or None; figures: figure text -> value (None when
    the point's summary lacks it).
    """

    id: str
    status: str
    message: str
    elapsed: float
    worker: str
    values: dict
    verdict: str | None
    figures: dict

    @property
    def ok(self):
        return self.status == "ok"


def _cell(value):
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (list, dict)):
        return json.dumps(value, allow_nan=True)
    return str(value)


def _parse(cell):
    if cell == "":
        return None
    if cell in ("true", "false"):
        return cell == "true"
    try:
        return float(cell)
    except ValueError:
        return cell


def _damaged(path, line, what):
    return ConfigError(f"{path}: line {line} {what}: the file is damaged or not this sweep's "
                       f"CSV (it is left as it is): choose another output directory")


class Table:
    """The CSV of a sweep: header, rows appended and flushed one by one."""

    def __init__(self, path, sweep):
        self.path = Path(path)
        self.sweep = sweep
        self.columns = (list(FIXED_COLUMNS) + [p.key for p in sweep.parameters]
                        + ["verdict"] + [f.text for f in sweep.figures])
        self.fh = None

    def read(self):
        """{id: PointRecord} of the rows already written (the last row of an
        id wins); a half-written last line is ignored.  Reads only."""
        if not self.path.exists():
            return {}
        try:
            raw = self.path.read_bytes()
        except OSError as exc:
            raise ConfigError(f"{self.path}: cannot be read ({exc.strerror})") from None
        raw = raw[:raw.rfind(b"\n") + 1]          # drop a half-written last line
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise _damaged(self.path, raw.count(b"\n", 0, exc.start) + 1,
                           f"is not UTF-8 text (byte offset {exc.start})") from None
        reader = csv.reader(io.StringIO(text, newline=""))
        try:
            header = next(reader, None)
            if header is None:
                return {}
            if header != self.columns:
                raise ConfigError(f"{self.path}: its columns differ from the sweep's "
                                  f"({len(header)} against {len(self.columns)}): choose another "
                                  f"output directory")
            rows = {}
            for row in reader:
                rec = self._row(row, reader.line_num)
                rows[rec.id] = rec
        except csv.Error as exc:
            raise _damaged(self.path, reader.line_num, f"does not parse ({exc})") from None
        return rows

    def _row(self, row, line):
        if len(row) != len(self.columns):
            raise _damaged(self.path, line, f"has {len(row)} cells, not {len(self.columns)}")
        cells = dict(zip(self.columns, row))
        if cells["status"] not in STATUSES:
            raise _damaged(self.path, line, f"status {cells['status']!r} is not one of "
                                            f"{', '.join(STATUSES)}")
        values = {}
        try:
            elapsed = float(cells["elapsed"] or 0.0)
            for p in self.sweep.parameters:
                values[p.key] = float(cells[p.key]) if p.numeric else cells[p.key]
        except ValueError as exc:
            raise _damaged(self.path, line, f"has a cell that is not a number ({exc})") from None
        if not math.isfinite(elapsed) or not all(
                math.isfinite(v) for v in values.values() if isinstance(v, float)):
            raise _damaged(self.path, line, "has a value that is not finite")
        return PointRecord(id=cells["id"], status=cells["status"], message=cells["message"],
                           elapsed=elapsed, worker=cells["worker"], values=values,
                           verdict=cells["verdict"] or None,
                           figures={f.text: _parse(cells[f.text]) for f in self.sweep.figures})

    def open(self):
        """Open to append (header first when new).  A half-written last line
        (a process killed while writing it; ignored by `read`) is cut off."""
        size = self.path.stat().st_size if self.path.exists() else 0
        if size:
            with self.path.open("rb") as fh:
                fh.seek(-1, os.SEEK_END)
                whole = fh.read(1) == b"\n"
            if not whole:
                raw = self.path.read_bytes()
                with self.path.open("r+b") as fh:
                    fh.truncate(raw.rfind(b"\n") + 1)
                size = self.path.stat().st_size
        self.fh = self.path.open("a", newline="", encoding="utf-8")
        self.writer = csv.writer(self.fh, lineterminator="\n")
        if size == 0:
            self.writer.writerow(self.columns)
            self.fh.flush()

    def append(self, rec):
        row = [rec.id, rec.status, rec.message, f"{rec.elapsed:.4f}", rec.worker]
        row += [_cell(rec.values[p.key]) for p in self.sweep.parameters]
        row += [_cell(rec.verdict)] + [_cell(rec.figures.get(f.text)) for f in self.sweep.figures]
        self.writer.writerow(row)
        self.fh.flush()

    def close(self):
        if self.fh is not None:
            self.fh.close()
            self.fh = None


def write_json(path, data):
    """Write `data` as JSON atomically (a temporary file, then renamed)."""
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(json.dumps(data, indent=2, ensure_ascii=False, default=str) + "\n",
                   encoding="utf-8")
    os.replace(tmp, path)


def read_manifest(path, digest):
    """(base record, units) of the manifest of a resumed sweep; ConfigError
    when it is not a sweep's manifest, is damaged, or belongs to a sweep whose
    `digest` differs.  Reads only."""
    out = path.parent
    try:
        data = json.loads(path.read_bytes().decode("utf-8"))
    except (UnicodeDecodeError, ValueError) as exc:
        raise ConfigError(f"{path}: is not valid JSON ({' '.join(str(exc).split())}): the "
                          f"directory does not hold a sweep's output; choose another output "
                          f"directory") from None
    except OSError as exc:
        raise ConfigError(f"{path}: cannot be read ({exc.strerror})") from None
    if not isinstance(data, dict) or "digest" not in data:
        raise ConfigError(f"{path}: is not the manifest of an opspace sweep: choose another "
                          f"output directory")
    if data["digest"] != digest:
        raise ConfigError(f"{out}: holds the output of a different sweep (base files, "
                          f"[fixed], parameter keys, figures or search changed): choose "
                          f"another output directory")
    base, units = data.get("base"), data.get("units")
    if (not isinstance(base, dict) or not all(k in base for k in BASE_KEYS)
            or not isinstance(base["figures"], dict) or not isinstance(units, dict)):
        raise ConfigError(f"{path}: its base design record is damaged: choose another output "
                          f"directory")
    base = {k: base[k] for k in BASE_KEYS}
    return PointRecord(**base, values={}), units
