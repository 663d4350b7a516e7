"""Small things every part of opspace shares: standard gravity, the
validators of the public API boundary (inner loops skip them), a figure with
its unit, and the trapezoid rule for time integrals and RMS values."""

from __future__ import annotations

import math
import numbers

import numpy as np

__all__ = ["GRAVITY", "as_vector", "nonnegative", "positive", "quantity", "real", "real_array",
           "trapezoid_rms", "trapezoid_weights"]

#: standard gravity, m/s² (3rd CGPM, 1901; Pinocchio's default is 9.81)
GRAVITY = 9.80665


# ------------------------------------------------------------------ validators
def as_vector(name, x, size):
    """`x` as a float vector of shape (size,) with finite entries, else ValueError.

    Finiteness is checked through x·x (finite iff every entry is, short of
    overflow beyond 1e154): one BLAS call instead of a temporary boolean array.
    """
    x = np.asarray(x, dtype=float)
    if x.shape != (size,):
        raise ValueError(f"`{name}` must have shape ({size},), got {x.shape}")
    if not math.isfinite(x.dot(x)):
        raise ValueError(f"`{name}` has non-finite entries: {x}")
    return x


def real_array(name, x):
    """`x` as a float ndarray (any shape) with finite entries, or a ValueError naming `name`."""
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be real numbers, got {x!r}") from exc
    if not np.all(np.isfinite(a)):
        bad = np.argwhere(~np.isfinite(a))[:5].tolist() if a.ndim else []
        where = f" at index {bad}" if bad else ""
        raise ValueError(f"`{name}` has non-finite entries (nan or inf){where}")
    return a


def _in(unit):
    return f" {unit}" if unit else ""


def real(name, x, unit=""):
    """`x` as a finite float (a real number, not a bool or a string), else ValueError."""
    if isinstance(x, (bool, np.bool_)) or not (
            isinstance(x, numbers.Real) or (isinstance(x, np.ndarray) and x.ndim == 0
                                            and x.dtype.kind in "iuf")):
        raise ValueError(f"`{name}` must be a real number{_in(unit)}, got {x!r}")
    value = float(x)
    if not math.isfinite(value):
        raise ValueError(f"`{name}` must be a finite number{_in(unit)}, got {value}")
    return value


def positive(name, x, unit="", *, hi=None):
    """`x` as a finite float > 0 (and <= hi when given), else ValueError."""
    value = real(name, x, unit)
    if not value > 0.0 or (hi is not None and value > hi):
        bound = f"in (0, {hi:g}]" if hi is not None else "a finite number > 0"
        raise ValueError(f"`{name}` must be {bound}{_in(unit)}, got {value!r}")
    return value


def nonnegative(name, x, unit=""):
    """`x` as a finite float >= 0, else ValueError."""
    value = real(name, x, unit)
    if value < 0.0:
        raise ValueError(f"`{name}` must be a finite number >= 0{_in(unit)}, got {value!r}")
    return value


# ------------------------------------------------------------------- figures
def quantity(value, unit):
    """A figure with its unit, {"value", "unit"}, as every number of a JSON
    summary is written (NumPy values become plain Python ones)."""
    if isinstance(value, np.ndarray):
        value = value.tolist()
    elif isinstance(value, np.generic):
        value = value.item()
    return {"value": value, "unit": unit}


def trapezoid_weights(t):
    """Weights w (n,) with ∫ f dt ≈ Σ w_i f_i over the samples t (n,) s
    (trapezoidal rule); zeros for fewer than two samples."""
    t = np.asarray(t, dtype=float)
    w = np.zeros_like(t)
    if len(t) > 1:
        dt = np.diff(t)
        w[:-1] += 0.5 * dt
        w[1:] += 0.5 * dt
    return w


def trapezoid_rms(t, x):
    """√(∫ x² dt / T) along axis 0 of x (n,) or (n, w), trapezoidal rule, T = t_n − t_1."""
    x = np.asarray(x, dtype=float)
    return np.sqrt(np.tensordot(trapezoid_weights(t), x * x, axes=(0, 0)) / (t[-1] - t[0]))
