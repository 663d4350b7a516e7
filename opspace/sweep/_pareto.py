"""The Pareto front of two figures over the feasible design points.

Pareto optimality (minimisation; a "max" goal is negated): design a
dominates design b when f_k(a) <= f_k(b) for both figures and f_k(a) < f_k(b)
for at least one; the front is the set of feasible designs no feasible design
dominates (Deb, Multi-Objective Optimization Using Evolutionary Algorithms,
2001, ch. 2, recalled from memory).  The front is among the sampled points
only: a sweep samples, it does not optimise.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["pareto_front", "pareto_ids"]


def pareto_front(x, y, *, x_goal="min", y_goal="max"):
    """Indices of the non-dominated points of (x, y), in order of x's goal.

    Sort by the first figure then the second (both as minimisation); a point
    is on the front when its second figure is strictly better than that of
    every point before it with a better first figure (points equal in both
    figures share their fate).  Non-finite points are left out.
    """
    x = np.asarray(x, dtype=float) * (1.0 if x_goal == "min" else -1.0)
    y = np.asarray(y, dtype=float) * (1.0 if y_goal == "min" else -1.0)
    ok = np.flatnonzero(np.isfinite(x) & np.isfinite(y))
    order = ok[np.lexsort((y[ok], x[ok]))]
    front, best, i = [], math.inf, 0
    while i < len(order):
        j = i
        while j < len(order) and x[order[j]] == x[order[i]]:
            j += 1
        y_min = y[order[i]]
        if y_min < best:
            front += [int(k) for k in order[i:j] if y[k] == y_min]
            best = y_min
        i = j
    return front


def _xy(sweep, records):
    x_text, _, y_text, _ = sweep.pareto
    return (np.array([_num(r.figures.get(x_text)) for r in records]),
            np.array([_num(r.figures.get(y_text)) for r in records]))


def _num(v):
    if v is None or isinstance(v, (bool, str)):
        return math.nan
    return float(v)


def pareto_ids(sweep, records):
    """Ids of the Pareto-optimal records among `records` (the feasible ones)."""
    x, y = _xy(sweep, records)
    idx = pareto_front(x, y, x_goal=sweep.pareto[1], y_goal=sweep.pareto[3])
    return tuple(records[i].id for i in idx)
