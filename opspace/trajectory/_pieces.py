"""Base pieces by name (the duty cycle's and the scenario's [[segment]] kinds)."""

from __future__ import annotations

from ._motions import arc, line, spin
from ._profiles import s_curve, trapezoidal
from ._timeline import Piece


# ----------------------------------------------------------- segments by name
BASE_PIECE_KINDS = ("straight", "arc", "turn", "stop", "dwell")


def _limited_profile(distance, values, speed="speed", v_start=0.0, v_end=0.0):
    """S-curve when `values` has a jerk limit, else trapezoidal (deceleration
    limit `deceleration` when given) from speed v_start to v_end (signed
    along `distance`; non-zero only without a jerk limit)."""
    if "jerk" in values:
        if v_start or v_end:
            raise ValueError("a segment with a jerk limit starts and ends at rest: "
                             "it cannot blend into its neighbour")
        return s_curve(distance, values[speed], values["acceleration"], values["jerk"])
    return trapezoidal(distance, values[speed], values["acceleration"],
                       d_max=values.get("deceleration"), v_start=v_start, v_end=v_end)


def base_piece(kind, values, *, v_start=0.0, v_end=0.0):
    """A base `Piece` from a segment's kind and its keys (SI), as described in
    the duty-cycle and scenario files, rest to rest unless a straight or an arc
    starts at `v_start` or ends at `v_end` (m/s, signed along its motion: a
    blend with its neighbour):

    straight  distance, speed, acceleration[, deceleration, jerk]    a line
    arc       radius (> 0 left), angle travelled, then as straight  s = |R| angle
    turn      angle (> 0 left), rate, acceleration[, jerk]          on the spot
    stop      speed, acceleration, cruise, deceleration             reach the speed,
              hold it `cruise` s, brake: d = v²/(2a) + v t_c + v²/(2 d_b)
    dwell     duration                                              stand still
    """
    v = values
    if kind == "straight":
        return Piece(base=line(_limited_profile(v["distance"], v, v_start=v_start, v_end=v_end)))
    if kind == "arc":
        profile = _limited_profile(abs(v["radius"]) * v["angle"], v, v_start=v_start, v_end=v_end)
        return Piece(base=arc(profile, v["radius"]))
    if v_start or v_end:
        raise ValueError(f"only a straight or an arc can blend into its neighbour, not a {kind}")
    if kind == "turn":
        return Piece(base=spin(_limited_profile(v["angle"], v, speed="rate")))
    if kind == "stop":
        speed, a, d = v["speed"], v["acceleration"], v["deceleration"]
        distance = speed**2 / (2 * a) + speed * v["cruise"] + speed**2 / (2 * d)
        return Piece(base=line(trapezoidal(distance, speed, a, d_max=d)))
    if kind == "dwell":
        return Piece(duration=v["duration"])
    raise ValueError(f"`kind` must be one of {', '.join(BASE_PIECE_KINDS)}, got {kind!r}")
