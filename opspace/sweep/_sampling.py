"""Sampling of a sweep's parameters: list and range values, the Latin
hypercube, the design points and their ids.

Design points: the full factorial of the list and range parameters (the first
parameter varies slowest), crossed with a Latin hypercube of `samples` points
over the random parameters (McKay, Beckman & Conover, Technometrics 21(2),
1979), drawn by `scipy.stats.qmc.LatinHypercube` with the sweep's seed.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from . import _docs as _docs

__all__ = ["Point", "design_points", "latin_hypercube", "point_id", "range_values", "random_bounds"]

#: most design points of one sweep (and values of one range)
MAX_POINTS = 100_000


@dataclass(frozen=True)
class Point:
    """A design point: `id` (stable: a digest of the varied values) and
    `values`, parameter key -> value, in parameter order."""

    id: str
    values: dict


def _is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _snap(x):
    """x rounded to 12 significant digits (0.1 + 0.2 -> 0.3)."""
    return float(f"{x:.12g}")


def range_values(where, raw):
    if not isinstance(raw, dict):
        raise ConfigError(f"{where} must be a table {{start, stop, step}} or {{start, stop, "
                          f"num}}, got {raw!r}")
    extra = sorted(set(raw) - {"start", "stop", "step", "num"})
    if extra:
        raise ConfigError(f"{where} has the unknown key '{extra[0]}' (keys: start, stop, "
                          f"step or num)")
    for k in ("start", "stop"):
        if k not in raw or not _is_number(raw[k]) or not math.isfinite(raw[k]):
            raise ConfigError(f"{where} {k} must be a finite number, got {raw.get(k)!r}")
    start, stop = float(raw["start"]), float(raw["stop"])
    if ("step" in raw) == ("num" in raw):
        raise ConfigError(f"{where} needs exactly one of step and num, got {raw!r}")
    if start == stop:
        raise ConfigError(f"{where} is empty: start = stop = {start:g} (list a single value "
                          f"in `values`, or put it in [fixed])")
    if "num" in raw:
        num = raw["num"]
        if isinstance(num, bool) or not isinstance(num, int) or num < 2:
            raise ConfigError(f"{where} num must be an integer >= 2, got {num!r}")
        if num > MAX_POINTS:          # before building anything
            raise ConfigError(f"{where} num = {num} is more than {MAX_POINTS} values")
        count = num
        values = [_snap(start + k * (stop - start) / (num - 1)) for k in range(num - 1)] + [stop]
        spec = f"range {start:g} to {stop:g}, {num} values"
    else:
        step = raw["step"]
        if not _is_number(step) or not math.isfinite(step) or step == 0:
            raise ConfigError(f"{where} step must be a finite non-zero number, got {step!r}")
        if (stop - start) * step < 0:
            raise ConfigError(f"{where} step = {step:g} goes away from stop ({start:g} to "
                              f"{stop:g}): its sign must be that of stop - start")
        span = (stop - start) / step
        if not span < MAX_POINTS:          # before building anything (also catches overflow)
            raise ConfigError(f"{where} {{start, stop, step}} makes {span:.3g} values (more "
                              f"than {MAX_POINTS}): check step = {step:g}")
        if span < 1.0 - 1e-9:
            raise ConfigError(f"{where} step = {step:g} is longer than the range from start "
                              f"{start:g} to stop {stop:g}: it makes one value")
        count = int(math.floor(span + 1e-9)) + 1
        if count > MAX_POINTS:
            raise ConfigError(f"{where} has {count} values (more than {MAX_POINTS}): "
                              f"check step = {step:g}")
        values = [_snap(start + k * step) for k in range(count)]
        spec = f"range {start:g} to {values[-1]:g} step {step:g}"
    if count > MAX_POINTS:
        raise ConfigError(f"{where} has {count} values (more than {MAX_POINTS})")
    return tuple(values), spec


def random_bounds(where, raw):
    if not isinstance(raw, dict) or sorted(raw) != ["high", "low"]:
        raise ConfigError(f"{where} must be a table {{low, high}}, got {raw!r}")
    lo, hi = raw["low"], raw["high"]
    if not all(_is_number(v) and math.isfinite(v) for v in (lo, hi)):
        raise ConfigError(f"{where} low and high must be finite numbers, got {raw!r}")
    if not lo < hi:
        raise ConfigError(f"{where} must have low < high, got low = {lo:g}, high = {hi:g}")
    return float(lo), float(hi)


def latin_hypercube(n, lows, highs, seed):
    """n points of a Latin hypercube over the box [lows, highs], shape (n, d).

    McKay, Beckman & Conover (Technometrics 21(2), 1979): each axis is cut
    into n equal strata and each stratum holds exactly one point, the strata
    of the axes paired by independent random permutations, the point placed
    uniformly inside its cell (scipy.stats.qmc.LatinHypercube, scramble=True).
    """
    from scipy.stats import qmc

    d = len(lows)
    rng = np.random.default_rng(seed)
    try:
        sampler = qmc.LatinHypercube(d=d, rng=rng)
    except TypeError:  # SciPy < 1.15 names it `seed`
        sampler = qmc.LatinHypercube(d=d, seed=rng)
    return qmc.scale(sampler.random(n), lows, highs)


def point_id(values):
    """A stable id of a design point: the digest of its varied values."""
    return _docs.digest(sorted(values.items()))[:16]


def design_points(sweep):
    """Full factorial of list/range parameters × Latin hypercube of random ones."""
    grid = [p for p in sweep.parameters if p.sampling != "random"]
    rand = [p for p in sweep.parameters if p.sampling == "random"]
    n_grid = math.prod(len(p.values) for p in grid)
    total = n_grid * (sweep.samples or 1)
    if total > MAX_POINTS:
        raise ConfigError(f"{sweep.path.name}: the sweep has {total} design points (more than "
                          f"{MAX_POINTS}): use fewer values or random parameters")
    lhs = [()]
    if rand:
        X = latin_hypercube(sweep.samples, [p.low for p in rand], [p.high for p in rand],
                            sweep.seed)
        lhs = [tuple(float(v) for v in row) for row in X]
    order = [p.key for p in sweep.parameters]
    for combo in itertools.product(*(p.values for p in grid)):
        for row in lhs:
            values = dict(zip([p.key for p in grid], combo))
            values.update(zip([p.key for p in rand], row))
            values = {k: values[k] for k in order}
            yield Point(id=point_id(values), values=values)
