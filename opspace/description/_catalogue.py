"""Reading and validating a motor-and-gearbox catalogue (TOML, our own schema).

A catalogue lists candidate motors and gearbox families for the drive wheels;
`opspace.sizing` checks every motor with every ratio of every family against a
duty cycle.  The file is checked completely here: every problem is a
`ConfigError` naming the file, the entry, the key, the value and what was
expected, e.g. ``drives.toml: [[motor]] 2 'M-90' rated_torque must be <=
peak_torque (2.7 N·m), got 3.1``.  Unknown keys are rejected.

Keys (SI units; torques and speeds at the motor shaft unless said otherwise)
--------------------------------------------------------------------------

============  ==================  ===========  ============================================
table         key                 unit         meaning
============  ==================  ===========  ============================================
[catalogue]   name                --           free text (say where the data come from)
[[motor]]     name                --           unique among the motors
              rated_torque        N·m          continuous torque T_rated, > 0
              peak_torque         N·m          intermittent torque T_peak >= rated_torque
              no_load_speed       rad/s        ω_0 at nominal voltage, > 0
              rated_speed         rad/s        ω_rated at rated torque, 0 < ω_rated < ω_0
              rotor_inertia       kg·m²        J_rotor, > 0
              max_speed           rad/s        mechanical limit, > 0 (default no_load_speed)
              torque_speed        rad/s, N·m   optional intermittent envelope, a polyline
                                               [[ω_1, T_1], [ω_2, T_2], ...] replacing the
                                               default (below)
              torque_constant     N·m/A        k_t, > 0, optional (current, electrical power)
              resistance          Ω            winding resistance R, > 0, optional (copper
                                               losses; needs torque_constant)
              mass                kg           > 0, optional (a mass proxy for sweeps)
[[gearbox]]   name                --           unique among the gearboxes (one family)
              ratios              --           G = motor speed / output speed, a non-empty
                                               list of distinct numbers > 0 (stored sorted)
              efficiency          --           η in (0, 1]
              rated_torque        N·m          continuous torque at the output, optional
              peak_torque         N·m          intermittent torque at the output, optional,
                                               >= rated_torque
              max_input_speed     rad/s        optional
              inertia             kg·m²        at the input (adds to the rotor), >= 0,
                                               default 0
              mass                kg           > 0, optional
============  ==================  ===========  ============================================

Torque–speed envelope
---------------------
Default (common practice, no source): the DC motor's speed–torque line at
nominal voltage runs from the no-load speed through the rated point,

    T_line(ω) = T_rated (ω_0 − ω) / (ω_0 − ω_rated),

and the intermittent envelope is  T_env(ω) = min(T_peak, T_line(ω))  for
0 <= ω <= ω_0, and 0 beyond.  An explicit ``torque_speed`` polyline replaces
it: speeds strictly increasing from ω_1 >= 0, torques >= 0, non-increasing
and <= peak_torque; T_env is interpolated linearly, holds T_1 below ω_1 and is
0 beyond the last point.  Either envelope is applied to |ω| and |T| (the same
limits in all four quadrants).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import ConfigError
from ._toml import MAX_GEAR_RATIO, Entry, Section, read_document

__all__ = ["Catalogue", "Gearbox", "Motor", "load_catalogue"]

TOP_LEVEL = ("catalogue", "motor", "gearbox")


# ---------------------------------------------------------------------------
# value objects
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Motor:
    """One motor of a catalogue (see the module docstring for the keys).

    rated_torque, peak_torque N·m; no_load_speed, rated_speed, max_speed rad/s;
    rotor_inertia kg·m²; torque_speed ((ω, T), ...) rad/s, N·m or None;
    torque_constant N·m/A, resistance Ω, mass kg, each None when not given.
    """

    name: str
    rated_torque: float
    peak_torque: float
    no_load_speed: float
    rated_speed: float
    rotor_inertia: float
    max_speed: float
    torque_speed: tuple[tuple[float, float], ...] | None = None
    torque_constant: float | None = None
    resistance: float | None = None
    mass: float | None = None

    def line_torque(self, omega):
        """The speed–torque line T_line(ω) = T_rated (ω_0 − ω)/(ω_0 − ω_rated), N·m."""
        omega = np.asarray(omega, dtype=float)
        return self.rated_torque * (self.no_load_speed - omega) / (
            self.no_load_speed - self.rated_speed)

    def envelope_points(self):
        """Vertices (ω, T) of the intermittent envelope, shape (k, 2), rad/s and N·m.

        T_env is the linear interpolation of these points, holding the first
        torque below the first speed and 0 beyond the last speed.
        """
        if self.torque_speed is not None:
            return np.array(self.torque_speed, dtype=float)
        w0, T_pk = self.no_load_speed, self.peak_torque
        T_stall = float(self.line_torque(0.0))
        if T_stall <= T_pk:
            return np.array([[0.0, T_stall], [w0, 0.0]])
        # corner speed where the line meets the peak torque: T_line(ω_c) = T_peak
        w_c = w0 - T_pk * (w0 - self.rated_speed) / self.rated_torque
        return np.array([[0.0, T_pk], [w_c, T_pk], [w0, 0.0]])

    def envelope(self, omega):
        """Intermittent torque limit T_env(|ω|), N·m, same shape as `omega` (rad/s)."""
        P = self.envelope_points()
        w = np.abs(np.asarray(omega, dtype=float))
        return np.interp(w, P[:, 0], P[:, 1], right=0.0)

    @property
    def has_electrical_data(self):
        """True when both k_t and R are given (electrical power with copper losses)."""
        return self.torque_constant is not None and self.resistance is not None


@dataclass(frozen=True)
class Gearbox:
    """One gearbox family: the same housing and efficiency at several ratios.

    ratios (sorted, dimensionless, motor speed / output speed); efficiency η;
    rated_torque, peak_torque N·m at the output, max_input_speed rad/s, mass
    kg (each None when not given); inertia kg·m² at the input (0 if not given).
    """

    name: str
    ratios: tuple[float, ...]
    efficiency: float
    rated_torque: float | None = None
    peak_torque: float | None = None
    max_input_speed: float | None = None
    inertia: float = 0.0
    mass: float | None = None


@dataclass(frozen=True)
class Catalogue:
    """A validated catalogue: its file, name, motors and gearbox families."""

    path: Path
    name: str
    motors: tuple[Motor, ...]
    gearboxes: tuple[Gearbox, ...]

    def motor(self, name):
        """The motor called `name` (KeyError listing the names otherwise)."""
        return _by_name(self.motors, name, "motor", self.path)

    def gearbox(self, name):
        """The gearbox family called `name` (KeyError listing the names otherwise)."""
        return _by_name(self.gearboxes, name, "gearbox", self.path)


def _by_name(items, name, kind, path):
    for item in items:
        if item.name == name:
            return item
    names = ", ".join(repr(i.name) for i in items)
    raise KeyError(f"{Path(path).name}: no {kind} named {name!r} (available: {names})")


# ---------------------------------------------------------------------------
# reading
# ---------------------------------------------------------------------------


def load_catalogue(path, *, doc=None):
    """Read and validate a motor-and-gearbox catalogue TOML.

    Parameters
    ----------
    path : str or Path   the catalogue file
    doc : dict or None   its parsed content, if already at hand (not read then)

    Returns
    -------
    Catalogue

    Raises
    ------
    ConfigError   naming file, entry, key, value and expectation
    """
    path, doc = read_document(path, doc, TOP_LEVEL, ("catalogue",),
                              listed="[catalogue], [[motor]], [[gearbox]]")
    fname = path.name
    s = Section(path, "catalogue", doc["catalogue"])
    name = s.string("name")
    s.finish()
    motors = tuple(_read_motor(Entry(path, "motor", i + 1, entry))
                   for i, entry in enumerate(_entries(doc, "motor", fname)))
    gearboxes = tuple(_read_gearbox(Entry(path, "gearbox", i + 1, entry))
                      for i, entry in enumerate(_entries(doc, "gearbox", fname)))
    _check_unique(motors, "motor", fname)
    _check_unique(gearboxes, "gearbox", fname)
    return Catalogue(path=path, name=name, motors=motors, gearboxes=gearboxes)


def _entries(doc, kind, fname):
    entries = doc.get(kind)
    if entries is None or (isinstance(entries, list) and not entries):
        raise ConfigError(f"{fname}: no [[{kind}]] entry (a catalogue needs at least one)")
    if not isinstance(entries, list):
        raise ConfigError(f"{fname}: [{kind}] must be an array of tables, written "
                          f"[[{kind}]], got a single table")
    return entries


def _check_unique(items, kind, fname):
    first = {}
    for i, item in enumerate(items, start=1):
        if item.name in first:
            raise ConfigError(f"{fname}: [[{kind}]] {i} {item.name!r} name duplicates "
                              f"[[{kind}]] {first[item.name]} (names must be unique)")
        first[item.name] = i


def _read_motor(s):
    name = s.string("name")
    T_r = s.number("rated_torque", unit="N·m", lo=0.0, lo_open=True)
    T_pk = s.number("peak_torque", unit="N·m", lo=0.0, lo_open=True)
    w0 = s.number("no_load_speed", unit="rad/s", lo=0.0, lo_open=True)
    w_r = s.number("rated_speed", unit="rad/s", lo=0.0, lo_open=True)
    J = s.number("rotor_inertia", unit="kg·m²", lo=0.0, lo_open=True)
    w_max = s.number("max_speed", unit="rad/s", lo=0.0, lo_open=True, required=False)
    k_t = s.number("torque_constant", unit="N·m/A", lo=0.0, lo_open=True, required=False)
    R = s.number("resistance", unit="Ω", lo=0.0, lo_open=True, required=False)
    mass = s.number("mass", unit="kg", lo=0.0, lo_open=True, required=False)
    if T_r > T_pk:
        s.fail("rated_torque", f"must be <= peak_torque ({T_pk:g} N·m), got {T_r:g}")
    if w_r >= w0:
        s.fail("rated_speed", f"must be < no_load_speed ({w0:g} rad/s), got {w_r:g}")
    if R is not None and k_t is None:
        s.fail("resistance", "needs torque_constant (the current I = T / k_t) to give "
                             "copper losses; add torque_constant or remove resistance")
    envelope = _read_torque_speed(s, T_pk) if s.has("torque_speed") else None
    s.finish()
    return Motor(name=name, rated_torque=T_r, peak_torque=T_pk, no_load_speed=w0,
                 rated_speed=w_r, rotor_inertia=J, max_speed=w0 if w_max is None else w_max,
                 torque_speed=envelope, torque_constant=k_t, resistance=R, mass=mass)


def _read_torque_speed(s, T_pk):
    """The explicit envelope polyline; see the module docstring for the rules."""
    key = "torque_speed"
    value = s.raw(key)
    shape = "a list of at least 2 [speed rad/s, torque N·m] pairs"
    ok = (isinstance(value, list) and len(value) >= 2
          and all(isinstance(p, list) and len(p) == 2
                  and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in p)
                  for p in value))
    if not ok:
        s.fail(key, f"must be {shape}, got {value!r}")
    if not all(math.isfinite(v) for p in value for v in p):
        s.fail(key, f"must have finite entries, got {value!r}")
    pts = tuple((float(w), float(T)) for w, T in value)
    for i, (w, T) in enumerate(pts, start=1):
        if w < 0.0 or T < 0.0:
            s.fail(key, f"point {i} [{w:g}, {T:g}] must have speed >= 0 rad/s and "
                        f"torque >= 0 N·m")
        if T > T_pk:
            s.fail(key, f"point {i} torque {T:g} N·m must be <= peak_torque ({T_pk:g} N·m)")
    for i in range(1, len(pts)):
        (w_a, T_a), (w_b, T_b) = pts[i - 1], pts[i]
        if w_b <= w_a:
            s.fail(key, f"speeds must increase strictly, got {w_b:g} rad/s at point {i + 1} "
                        f"after {w_a:g} rad/s at point {i}")
        if T_b > T_a:
            s.fail(key, f"torques must not increase with speed, got {T_b:g} N·m at point "
                        f"{i + 1} after {T_a:g} N·m at point {i}")
    if pts[0][1] <= 0.0:
        s.fail(key, f"first torque must be > 0 N·m, got {pts[0][1]:g}")
    return pts


def _read_ratios(s):
    key = "ratios"
    value = s.raw(key)
    if not isinstance(value, list) or not value:
        s.fail(key, f"must be a non-empty list of gear ratios (motor speed / output speed), "
                    f"got {value!r}")
    if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
        s.fail(key, f"must be a list of numbers, got {value!r}")
    for i, v in enumerate(value, start=1):
        if not math.isfinite(v) or v <= 0.0:
            s.fail(key, f"entry {i} must be a finite number > 0, got {v!r}")
        if v > MAX_GEAR_RATIO:
            s.fail(key, f"entry {i} must be <= {MAX_GEAR_RATIO:g} (a plausible gear ratio), "
                        f"got {v!r}")
    if len(set(value)) != len(value):
        dup = next(v for v in value if value.count(v) > 1)
        s.fail(key, f"lists {dup:g} more than once, got {value!r}")
    return tuple(sorted(float(v) for v in value))


def _read_gearbox(s):
    name = s.string("name")
    ratios = _read_ratios(s)
    eta = s.number("efficiency", lo=0.0, lo_open=True, hi=1.0)
    T_r = s.number("rated_torque", unit="N·m", lo=0.0, lo_open=True, required=False)
    T_pk = s.number("peak_torque", unit="N·m", lo=0.0, lo_open=True, required=False)
    w_in = s.number("max_input_speed", unit="rad/s", lo=0.0, lo_open=True, required=False)
    J = s.number("inertia", 0.0, unit="kg·m²", lo=0.0)
    mass = s.number("mass", unit="kg", lo=0.0, lo_open=True, required=False)
    if T_r is not None and T_pk is not None and T_r > T_pk:
        s.fail("rated_torque", f"must be <= peak_torque ({T_pk:g} N·m), got {T_r:g}")
    s.finish()
    return Gearbox(name=name, ratios=ratios, efficiency=eta, rated_torque=T_r,
                   peak_torque=T_pk, max_input_speed=w_in, inertia=J, mass=mass)
