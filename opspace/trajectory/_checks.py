"""Validators and shared constants of the trajectory package."""

from __future__ import annotations

import math
from dataclasses import fields

import numpy as np

from .._common import nonnegative as _nonnegative  # noqa: F401  (used by the package)
from .._common import positive as _positive  # noqa: F401
from .._common import real as _real  # noqa: F401

# Absolute tolerance for "the same speed / position" at piece boundaries (m/s, rad/s,
# m, rad): far above rounding of the closed forms, far below anything physical.
_JOIN_TOL = 1e-9

_UNIT_DIST = "(m or rad)"
_UNIT_VEL = "(m/s or rad/s)"
_UNIT_ACC = "(m/s² or rad/s²)"
_UNIT_JERK = "(m/s³ or rad/s³)"


# --------------------------------------------------------------------------- checks
def _as_times(t):
    t = np.atleast_1d(np.asarray(t, dtype=float))
    if t.ndim != 1:
        raise ValueError(f"`t` must be a scalar or a 1-D array of times in s, got shape {t.shape}")
    if not np.all(np.isfinite(t)):
        raise ValueError(f"`t` has non-finite entries: {t[~np.isfinite(t)]}")
    return t


def _as_vector(name, x, size=None):
    x = np.array(x, dtype=float)
    if x.ndim != 1 or (size is not None and x.shape != (size,)):
        expected = f"({size},)" if size is not None else "(n,)"
        raise ValueError(f"`{name}` must have shape {expected}, got {x.shape}")
    if not np.all(np.isfinite(x)):
        raise ValueError(f"`{name}` has non-finite entries: {x}")
    x.setflags(write=False)
    return x


def _to_dict(obj):
    out = {}
    for f in fields(obj):
        value = getattr(obj, f.name)
        out[f.name] = value.tolist() if isinstance(value, np.ndarray) else value
    return out
