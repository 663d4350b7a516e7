"""Small validators for the public API boundary (inner loops skip them)."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["as_vector"]


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
