"""Reading the base's load model: [support], [[rocker]], per-caster stiffness,
and the floor's friction range ([ground] friction_range).

Keys (SI units; README's reference section documents each)::

    [support]  model = "equal" | "stiffness" | "sprung"   (default "equal")
               stiffness = 2.0e5      N/m, every contact (and the default of the others)
               drive_stiffness        N/m, each drive wheel's tyre (default: stiffness)
               preload, spring_rate, travel   N, N/m, m: sprung drive wheels (model "sprung")
               unevenness = 0         m, a dip or step under any one contact
    [[caster]] stiffness              N/m (default: [support] stiffness)
    [[rocker]] casters = ["caster_1", "caster_2"], pivot = [x, y]
    [ground]   friction_range = [low, high]   (default [friction, friction])
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ._toml import Entry, Section

__all__ = ["DEFAULT_STIFFNESS", "MODELS", "SupportSpec", "read_support"]

#: vertical stiffness of a contact when the description gives none, N/m: the
#: order of a small solid polyurethane or rubber-tyred wheel under load
#: (common practice, no source; value from memory).
DEFAULT_STIFFNESS = 2.0e5

MODELS = ("equal", "stiffness", "sprung")


@dataclass(frozen=True)
class SupportSpec:
    """The load model as described (validated values; see the module docstring).

    stiffness: per contact in `robot.contacts` order (drive wheels, then the
    casters), N/m; rockers: ((caster index a, caster index b, (x, y)), ...) with
    contact indices (drive wheels are 0 and 1).
    """

    model: str = "equal"
    stiffness: tuple = ()
    preload: float = math.nan
    spring_rate: float = math.nan
    travel: float = math.nan
    unevenness: float = 0.0
    rockers: tuple = ()


def read_support(path, doc, casters, caster_stiffness, weight):
    """SupportSpec from the description's tables.

    Parameters
    ----------
    path : Path                    the robot TOML (for messages)
    doc : dict                     its parsed content
    casters : tuple of (x, y)      caster positions, m
    caster_stiffness : list        [[caster]] stiffness values (None where absent), N/m
    weight : float                 the robot's weight without payload, N (bounds the preload)
    """
    s = Section(path, "support", doc.get("support", {}))
    model = s.string("model", "equal")
    if model not in MODELS:
        s.fail("model", f"must be one of {', '.join(repr(m) for m in MODELS)}, got {model!r}")
    k = s.number("stiffness", DEFAULT_STIFFNESS, unit="N/m", lo=0.0, lo_open=True)
    if model == "equal":
        for key in ("drive_stiffness", "preload", "spring_rate", "travel"):
            if s.has(key):
                s.fail(key, f"needs model = \"stiffness\" or \"sprung\" (model is {model!r}: "
                            "every contact has the one `stiffness`)")
        if any(v is not None for v in caster_stiffness):
            i = next(i for i, v in enumerate(caster_stiffness) if v is not None)
            raise ConfigError(f"{path.name}: [caster {i + 1}] stiffness needs [support] model = "
                              "\"stiffness\" or \"sprung\" (the \"equal\" model gives every "
                              "contact the one [support] stiffness)")
    k_drive = s.number("drive_stiffness", k, unit="N/m", lo=0.0, lo_open=True)
    spring = (math.nan,) * 3
    if model == "sprung":
        spring = (s.number("preload", unit="N", lo=0.0),
                  s.number("spring_rate", unit="N/m", lo=0.0, lo_open=True),
                  s.number("travel", unit="m", lo=0.0, lo_open=True))
        if spring[0] >= weight:
            s.fail("preload", f"must be below the robot's weight ({weight:.1f} N): a drive "
                              f"wheel spring cannot be preloaded harder than the whole robot "
                              f"presses, got {spring[0]:g} N")
    else:
        for key in ("preload", "spring_rate", "travel"):
            if s.has(key):
                s.fail(key, f"needs model = \"sprung\", got model = {model!r}")
    unevenness = s.number("unevenness", 0.0, unit="m", lo=0.0)
    s.finish()
    stiff = (k_drive, k_drive) + tuple(k if v is None else v for v in caster_stiffness)
    rockers = _read_rockers(path, doc.get("rocker", []), casters)
    return SupportSpec(model=model, stiffness=stiff, preload=spring[0], spring_rate=spring[1],
                       travel=spring[2], unevenness=unevenness, rockers=rockers)


def _read_rockers(path, entries, casters):
    if not isinstance(entries, list):
        raise ConfigError(f"{path.name}: [[rocker]] must be an array of tables, got {entries!r}")
    names = [f"caster_{i + 1}" for i in range(len(casters))]
    used, rockers = set(), []
    for n, entry in enumerate(entries):
        s = Entry(path, "rocker", n + 1, entry)
        pair = s.raw("casters")
        if (not isinstance(pair, list) or len(pair) != 2
                or not all(isinstance(c, str) for c in pair) or pair[0] == pair[1]):
            s.fail("casters", f"must name two different casters, e.g. [\"caster_1\", "
                              f"\"caster_2\"], got {pair!r}")
        for c in pair:
            if c not in names:
                s.fail("casters", f"names {c!r}, which is not a caster of this robot "
                                  f"(casters: {', '.join(names) or 'none'})")
            if c in used:
                s.fail("casters", f"puts {c!r} on a second rocker")
        pivot = np.array(s.vector("pivot", 2, unit="m"))
        s.finish()
        a, b = (names.index(c) for c in pair)
        pa, pb = np.array(casters[a]), np.array(casters[b])
        t = float(np.dot(pivot - pb, pa - pb) / np.dot(pa - pb, pa - pb))
        off = float(np.linalg.norm(pb + t * (pa - pb) - pivot))
        if not (0.0 < t < 1.0) or off > 1e-3:
            s.fail("pivot", f"must lie on the segment between {pair[0]} {list(casters[a])} and "
                            f"{pair[1]} {list(casters[b])} (within 1 mm, strictly between "
                            f"them), got {pivot.tolist()}")
        used.update(pair)
        rockers.append((a + 2, b + 2, tuple(float(v) for v in pivot)))
    return tuple(rockers)


def read_friction_range(s, friction):
    """(low, high) of [ground] friction_range (Section s), containing `friction`."""
    lo_hi = s.vector("friction_range", 2, (friction, friction))
    lo, hi = lo_hi
    if not 0.0 < lo <= hi:
        s.fail("friction_range", f"must be [low, high] with 0 < low <= high, got {list(lo_hi)}")
    if not lo <= friction <= hi:
        s.fail("friction_range", f"must contain the nominal friction {friction:g}, got "
                                 f"{list(lo_hi)}")
    return lo, hi
