"""What went wrong in a run that reached its end: the findings that make its
status something other than "completed".

A run is fine only if, at every recorded sample,

- no arm joint reached a position stop (`stops_hit` of the plant: the joint
  was driven into its URDF limit and held there, `opspace.dynamics._stick_slip`);
- every coordinate's speed is within its limit, |ν_i| ≤ ν_max,i (URDF
  `<limit velocity>` for the arm, top_speed / r for the wheels);
- the tip-over margin is positive: the ZMP stays inside the support polygon
  (`opspace.stability.stability_track`; the plant keeps the chassis on the
  ground, so a negative margin means the real robot would tip, not that the
  simulated one did);
- the traction use of each drive wheel is at most 1, |F_t| ≤ μ N (friction
  circle; the rolling constraint is ideal, so slip is found, not simulated);
- the tool met the payload slowly enough: the speed of the tool frame relative
  to the payload at rest is at most the scenario's `pick_speed_limit`.

The status is the kind of the earliest finding; the message names each kind's
first time and cause.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Finding", "findings", "verdict"]

#: status of each kind of finding, in the order they are listed at equal times
KINDS = ("tip_over", "slip", "joint_limit", "velocity_limit", "fast_pick")


@dataclass(frozen=True)
class Finding:
    """One thing that was not fine: kind (one of KINDS), time s, cause (text)."""

    kind: str
    time: float
    cause: str

    def to_dict(self):
        return {"kind": self.kind, "time": self.time, "cause": self.cause}


def _first(mask):
    idx = np.flatnonzero(mask)
    return int(idx[0]) if idx.size else None


def findings(result, robot, *, pick=None):
    """Findings of a run (a `SimulationResult`), earliest first.

    pick : None or (t s, relative speed m/s, limit m/s) of the payload pick
    """
    out = []
    t = result.t
    names = result.coordinate_names
    for name, time, side in result.extra.get("plant", {}).get("stops_hit", ()):
        k = names.index(name) - 2
        limit = robot.upper[k] if side == "upper" else robot.lower[k]
        out.append(Finding("joint_limit", time, f"{name} reached its {side} position limit "
                                                f"{limit:g} {robot.arm_units[k]} (hard stop)"))
    vmax = robot.velocity_limit
    for i, name in enumerate(names):
        if not np.isfinite(vmax[i]):
            continue
        j = _first(np.abs(result.nu[:, i]) > vmax[i] * (1 + 1e-9))
        if j is not None:
            unit = "rad/s" if i < 2 or robot.arm_units[i - 2] == "rad" else "m/s"
            peak = float(np.max(np.abs(result.nu[:, i])))
            out.append(Finding("velocity_limit", float(t[j]),
                               f"{name} moved at {abs(result.nu[j, i]):.4g} {unit}, above its "
                               f"limit {vmax[i]:.4g} {unit} (peak {peak:.4g} {unit})"))
    st = result.stability
    if st is not None:
        j = _first(st.margin < 0)
        if j is not None:
            out.append(Finding("tip_over", float(t[j]),
                               f"the ZMP left the support polygon (margin "
                               f"{st.margin[j] * 1e3:.1f} mm, smallest "
                               f"{np.nanmin(st.margin) * 1e3:.1f} mm)"))
        over = st.traction > 1.0
        j = _first(over.any(axis=1))
        if j is not None:
            w = int(np.argmax(over[j]))
            use = st.traction[j, w]
            cause = (f"{names[w]} needs traction use {use:.3g} > 1 (largest "
                     f"{np.nanmax(st.traction):.3g}): it would slip" if np.isfinite(use) else
                     f"{names[w]} has lifted off the floor and cannot pass its force")
            out.append(Finding("slip", float(t[j]), cause))
    if pick is not None and pick[1] > pick[2]:
        out.append(Finding("fast_pick", pick[0],
                           f"the tool met the payload at {pick[1]:.3g} m/s relative speed, "
                           f"above pick_speed_limit {pick[2]:g} m/s"))
    out.sort(key=lambda f: (f.time, KINDS.index(f.kind)))
    return out


def verdict(found):
    """(status, message) from the findings: "completed" when there are none."""
    if not found:
        return "completed", "completed"
    first = {}
    for f in found:
        first.setdefault(f.kind, f)
    parts = [f"{f.kind.replace('_', '-')} at t = {f.time:.3f} s: {f.cause}" for f in first.values()]
    return found[0].kind, "; ".join(parts)
