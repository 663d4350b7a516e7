"""The result of a run (`SimulationResult`), its events (`PayloadEvent`) and
the error that stops one (`SimulationError`)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .._common import quantity as _q
from .._common import trapezoid_weights as _trapezoid_weights
from ..errors import ModelError

__all__ = ["PayloadEvent", "SimulationError", "SimulationResult"]


class SimulationError(ModelError):
    """A run stopped early; `.time` s, `.cause` text, `.result` the partial result."""

    def __init__(self, message, *, time, cause, result=None):
        super().__init__(message)
        self.time, self.cause, self.result = time, cause, result


@dataclass(frozen=True)
class PayloadEvent:
    """At time t (s): "pick" attaches `payload` (a `Payload`) to the plant at
    its tool frame, "release" detaches it.  `estimate` is the payload the
    controller's own model is given at the same instant (None: the same; only
    used when the controller has a robot model of its own).

    Pick only: `transfer` s, the load-transfer time: the payload's weight is
    taken up linearly over it (the support it rested on pushes up with
    (1 − (t − t_pick)/transfer) m g at its centre of mass until then; 0: at
    once); `speed_limit` m/s, the largest speed of the tool's payload point
    relative to the payload at rest that counts as a gentle pick (faster: the
    run's status says "fast_pick").
    """

    t: float
    kind: str
    payload: object = None
    estimate: object = None
    transfer: float = 0.0
    speed_limit: float = math.inf

    def __post_init__(self):
        if self.kind not in ("pick", "release"):
            raise ValueError(f"`kind` must be 'pick' or 'release', got {self.kind!r}")
        if not math.isfinite(self.t) or self.t < 0:
            raise ValueError(f"event time must be finite and >= 0 s, got {self.t}")
        if self.kind == "pick" and self.payload is None:
            raise ValueError("a pick event needs a `payload`")
        if not (math.isfinite(self.transfer) and self.transfer >= 0):
            raise ValueError(f"`transfer` must be finite and >= 0 s, got {self.transfer}")
        if not self.speed_limit > 0:
            raise ValueError(f"`speed_limit` must be > 0 m/s, got {self.speed_limit}")


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """A simulated run, sampled every `record_every` steps (n samples).

    t (n,) s; q (n, nq); nu, nu_dot (n, nv); Q (n, nv) efforts applied, N·m or N;
    Q_demand (n, nv) before the limits; saturated (n, nv) bool; payload (n,)
    bool (held); tool_position (n, 3) m and tool_rotation (n, 3, 3) in the
    world; target_position (n, 3) m (nan without a target); error (n, k) task
    error m / rad (nan without a controller); status "completed", "stopped" (a
    blow-up), or the kind of the earliest finding of a run that reached its end
    but was not fine: "tip_over", "slip", "joint_limit", "velocity_limit",
    "fast_pick" (`opspace.simulation._verdict`); message (each finding's time
    and cause); dt s; control_period s; integrator; coordinate_names;
    effort_limit (nv,); stability: a `StabilityTrack` over the samples, or None.
    """

    t: np.ndarray
    q: np.ndarray
    nu: np.ndarray
    nu_dot: np.ndarray
    Q: np.ndarray
    Q_demand: np.ndarray
    saturated: np.ndarray
    payload: np.ndarray
    tool_position: np.ndarray
    tool_rotation: np.ndarray
    target_position: np.ndarray
    error: np.ndarray
    status: str
    message: str
    dt: float
    control_period: float
    integrator: str
    coordinate_names: tuple
    effort_limit: np.ndarray
    stability: object = None
    extra: dict = field(default_factory=dict)

    @property
    def position_error(self):
        """|p_d − p| of the tool, m, (n,)."""
        return np.linalg.norm(self.target_position - self.tool_position, axis=1)

    @property
    def orientation_error(self):
        """|log(R_d Rᵀ)| of the tool, rad, (n,); None unless the task had all
        six rows (then error[:, 3:6] is the orientation error)."""
        if self.error.shape[1] != 6:
            return None
        return np.linalg.norm(self.error[:, 3:6], axis=1)

    def summary(self):
        """Figures of the run, each {"value", "unit"}: peak and RMS effort per
        coordinate, tool position error RMS and peak, wheel energy drawn, the
        speed and effort limits passed (`limit_flags`)."""
        t = self.t
        w = _trapezoid_weights(t)
        T = max(t[-1] - t[0], 1e-300)
        out = {"status": self.status, "message": self.message,
               "duration": _q(float(t[-1] - t[0]), "s"), "samples": _q(len(t), "1"),
               "step": _q(self.dt, "s"), "control_period": _q(self.control_period, "s"),
               "integrator": self.integrator, "loop": self.extra.get("loop", "numpy"),
               "efforts": {}}
        for i, name in enumerate(self.coordinate_names):
            unit = "N·m" if i < 2 or not self.extra.get("prismatic", {}).get(name) else "N"
            out["efforts"][name] = {
                "peak": _q(float(np.max(np.abs(self.Q[:, i]))), unit),
                "rms": _q(float(math.sqrt(w.dot(self.Q[:, i] ** 2) / T)), unit),
                "limit": _q(float(self.effort_limit[i]) if np.isfinite(self.effort_limit[i])
                            else None, unit),
                "saturated_share": _q(float(self.saturated[:, i].mean()), "1")}
        # the tracking errors at the controller's samples only: in between, the
        # recorded target is the last sample's (zero-order hold), the tool has moved on
        fresh = self.extra.get("control_sample")
        fresh = np.ones(len(t), bool) if fresh is None or not fresh.any() else fresh
        for key, e, unit in (("tool_position_error", self.position_error, "m"),
                             ("tool_orientation_error", self.orientation_error, "rad")):
            ok = None if e is None else np.isfinite(e) & fresh
            if ok is not None and ok.any():
                tk = t[ok]
                Tk = max(tk[-1] - tk[0], 1e-300)
                out[key] = {"rms": _q(float(math.sqrt(_trapezoid_weights(tk).dot(e[ok] ** 2)
                                                      / Tk)), unit),
                            "peak": _q(float(np.max(e[ok])), unit)}
        P = self.Q[:, :2] * self.nu[:, :2]
        out["wheel_energy_drawn"] = {name: _q(float(w.dot(np.maximum(P[:, i], 0.0))), "J")
                                     for i, name in enumerate(self.coordinate_names[:2])}
        out["limit_flags"] = self.limit_flags()
        if self.stability is not None:
            out["min_tip_over_margin"] = _q(float(np.nanmin(self.stability.margin)), "m")
            out["max_traction_use"] = _q(float(np.nanmax(self.stability.traction)), "1")
            out["load_model"] = self.stability.loads.model
            from ..stability import lift_off_spans
            out["drive_wheel_lift_off"] = [
                {"wheel": sp["contact"], "start": _q(sp["start"], "s"), "end": _q(sp["end"], "s")}
                for sp in lift_off_spans(self.t[:len(self.stability.margin)],
                                         self.stability.loads.lifted[:, :2],
                                         self.coordinate_names[:2])]
        plant = self.extra.get("plant", {})
        out["plant_friction"] = plant.get("friction")
        out["friction_feedforward"] = self.extra.get("feedforward")
        out["joint_stops"] = plant.get("stops")
        out["impulse_loss"] = _q(plant.get("impulse_loss", 0.0), "J")
        out["findings"] = self.extra.get("findings", [])
        if "pick" in plant:
            t_pick, speed, limit = plant["pick"]
            out["pick_relative_speed"] = {"time": _q(t_pick, "s"), "speed": _q(speed, "m/s"),
                                          "limit": _q(limit if math.isfinite(limit) else None,
                                                      "m/s")}
        return out

    def limit_flags(self):
        """Every coordinate whose speed |ν| passed its velocity limit (URDF
        `velocity`; wheels: top_speed / r) or whose demanded effort |Q_demand|
        passed its effort limit: a list of {"coordinate", "kind" ("speed" or
        "effort"), "peak", "limit", "first_t" (s, when it first passed)}."""
        flags = []
        v_lim = self.extra.get("velocity_limit")
        for kind, series, limits in (("speed", self.nu, v_lim),
                                     ("effort", self.Q_demand, self.effort_limit)):
            if limits is None:
                continue
            for i, name in enumerate(self.coordinate_names):
                over = np.flatnonzero(np.abs(series[:, i]) > limits[i] * (1 + 1e-9))
                if np.isfinite(limits[i]) and over.size:
                    prismatic = self.extra.get("prismatic", {}).get(name)
                    unit = ("m/s" if prismatic else "rad/s") if kind == "speed" else (
                        "N" if prismatic else "N·m")
                    flags.append({"coordinate": name, "kind": kind,
                                  "peak": _q(float(np.max(np.abs(series[:, i]))), unit),
                                  "limit": _q(float(limits[i]), unit),
                                  "first_t": _q(float(self.t[over[0]]), "s")})
        return flags

    def to_npz(self, path):
        """All arrays in one NumPy archive."""
        arrays = {k: getattr(self, k) for k in ("t", "q", "nu", "nu_dot", "Q", "Q_demand",
                                                "saturated", "payload", "tool_position",
                                                "tool_rotation", "target_position", "error",
                                                "effort_limit")}
        if self.stability is not None:
            arrays.update(zmp=self.stability.zmp, tip_margin=self.stability.margin,
                          normal_loads=self.stability.loads.N, traction=self.stability.traction)
        np.savez_compressed(path, coordinate_names=np.array(self.coordinate_names), **arrays)

    def to_csv(self, path):
        """One row per sample: time, ν, Q, tool and target position, error, ZMP."""
        cols = {"t [s]": self.t}
        for i, n in enumerate(self.coordinate_names):
            cols[f"{n} rate"] = self.nu[:, i]
        for i, n in enumerate(self.coordinate_names):
            cols[f"{n} effort"] = self.Q[:, i]
        for j, a in enumerate("xyz"):
            cols[f"tool {a} [m]"] = self.tool_position[:, j]
            cols[f"target {a} [m]"] = self.target_position[:, j]
        cols["tool position error [m]"] = self.position_error
        cols["payload"] = self.payload.astype(float)
        cols["any saturated"] = self.saturated.any(axis=1).astype(float)
        if self.stability is not None:
            cols["zmp x [m]"], cols["zmp y [m]"] = self.stability.zmp[:, 0], self.stability.zmp[:, 1]
            cols["tip-over margin [m]"] = self.stability.margin
        data = np.column_stack(list(cols.values()))
        np.savetxt(path, data, delimiter=",", header=",".join(cols), comments="", fmt="%.7g")

