"""Do two runs of one scenario give the same headline figures?  Used for the
step-halving check (`opspace simulate --step-check`: RK4 at the scenario's
step against RK4 at half of it) and for holding the compiled and the NumPy
loops together.

Two figures a, b agree when |a − b| ≤ rtol · max(|a|, |b|) + atol, with rtol
1 % and atol a floor by unit (below which a figure is noise, not a headline):
1e-5 m, 1e-4 rad, 1e-3 N·m, 1e-2 N, 1e-3 for a ratio.  The figures: the tool's
position and orientation error (RMS and peak), each coordinate's peak and RMS
effort, the least tip-over margin and the largest traction use.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Agreement", "compare_runs"]

#: absolute floor of a figure by unit
ATOL = {"m": 1e-5, "rad": 1e-4, "N·m": 1e-3, "N": 1e-2, "1": 1e-3}


@dataclass(frozen=True)
class Agreement:
    """rows: (figure, unit, a, b, |a − b| / max(|a|, |b|), agrees) per figure;
    rtol; passed: every row agrees; worst: the row with the largest relative
    difference among those above their floor (or None)."""

    rows: tuple
    rtol: float
    passed: bool
    worst: tuple | None

    def to_dict(self):
        return {"rtol": self.rtol, "passed": self.passed,
                "rows": [{"figure": f, "unit": u, "a": a, "b": b, "relative_difference": r,
                          "agrees": ok} for f, u, a, b, r, ok in self.rows]}


def _figures(summary):
    out = []
    for key in ("tool_position_error", "tool_orientation_error"):
        if key in summary:
            for stat in ("rms", "peak"):
                v = summary[key][stat]
                out.append((f"{key} {stat}", v["unit"], v["value"]))
    for name, e in summary["efforts"].items():
        for stat in ("peak", "rms"):
            out.append((f"{name} effort {stat}", e[stat]["unit"], e[stat]["value"]))
    for key in ("min_tip_over_margin", "max_traction_use"):
        if key in summary:
            out.append((key, summary[key]["unit"], summary[key]["value"]))
    return out


def compare_runs(a, b, *, rtol=0.01):
    """Agreement of the headline figures of two `SimulationResult`s."""
    fa, fb = _figures(a.summary()), dict(((f, u), v) for f, u, v in _figures(b.summary()))
    rows, worst = [], None
    for f, u, va in fa:
        vb = fb.get((f, u))
        if vb is None:
            rows.append((f, u, va, None, None, False))
            continue
        scale = max(abs(va), abs(vb))
        rel = abs(va - vb) / scale if scale > 0 else 0.0
        ok = abs(va - vb) <= rtol * scale + ATOL.get(u, 0.0)
        rows.append((f, u, va, vb, rel, ok))
        if scale > ATOL.get(u, 0.0) and (worst is None or rel > worst[4]):
            worst = rows[-1]
    return Agreement(tuple(rows), rtol, all(r[5] for r in rows), worst)
