"""Base pieces by name (the duty cycle's and the scenario's [[segment]] kinds)."""

from __future__ import annotations

from ._motions import arc, line, spin
from ._profiles import s_curve, trapezoidal
from ._timeline import Piece


# ----------------------------------------------------------- segments by name
BASE_PIECE_KINDS = ("straight", "arc", "turn", "stop", "dwell")


def _limited_profile(distance, values, speed="speed"):
    """S-curve when `values` has a jerk limit, else trapezoidal (deceleration
    limit `deceleration` when given)."""
    if "jerk" in values:
        return s_curve(distance, values[speed], values["acceleration"], values["jerk"])
    return trapezoidal(distance, values[speed], values["acceleration"],
                       d_max=values.get("deceleration"))


def base_piece(kind, values):
    """A rest-to-rest base `Piece` from a segment's kind and its keys (SI), as
    described in the duty-cycle and scenario files:

    straight  distance, speed, acceleration[, deceleration, jerk]    a line
    arc       radius (> 0 left), angle travelled, then as straight  s = |R| angle
    turn      angle (> 0 left), rate, acceleration[, jerk]          on the spot
    stop      speed, acceleration, cruise, deceleration             reach the speed,
              hold it `cruise` s, brake: d = v²/(2a) + v t_c + v²/(2 d_b)
    dwell     duration                                              stand still
    """
    v = values
    if kind == "straight":
        return Piece(base=line(_limited_profile(v["distance"], v)))
    if kind == "arc":
        return Piece(base=arc(_limited_profile(abs(v["radius"]) * v["angle"], v), v["radius"]))
    if kind == "turn":
        return Piece(base=spin(_limited_profile(v["angle"], v, speed="rate")))
    if kind == "stop":
        speed, a, d = v["speed"], v["acceleration"], v["deceleration"]
        distance = speed**2 / (2 * a) + speed * v["cruise"] + speed**2 / (2 * d)
        return Piece(base=line(trapezoidal(distance, speed, a, d_max=d)))
    if kind == "dwell":
        return Piece(duration=v["duration"])
    raise ValueError(f"`kind` must be one of {', '.join(BASE_PIECE_KINDS)}, got {kind!r}")
