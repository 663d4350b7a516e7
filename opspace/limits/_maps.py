"""Limits over the arm's workspace: maps over tool positions, named poses, and
the top speed for a protective field.

Redundancy rule
---------------
A tool position p* (base frame) is reached from the posture q₀ by damped least
squares on the tool position with the self-motion pulled toward the posture
(Nakamura, Advanced Robotics: Redundancy and Optimization, 1991, ch. 4;
Wampler, IEEE Trans. SMC 16(1), 1986, for the damping):

    Δq = J_λ e + (I − J⁺ J) k (q₀ − q),   J_λ = Jᵀ (J Jᵀ + λ² I)⁻¹,   e = p* − p(q)

(the null-space projector from the exact pseudo-inverse J⁺ = pinv(J)), joints
at a limit that the step would push beyond it taken out of J (an active set),
until ‖e‖ < 0.1 mm.  The result is the solution
the posture leads to (a local minimum of ‖q − q₀‖ on the positions' solution
set); a position not reached in 200 steps, or where the error stalls (less
than 0.1 % progress over 15 steps), or below the floor (z < 0), is left blank
("unreachable").

Protective field
----------------
A stop from speed v with reaction time t_r (travel at v) and then constant
deceleration a_d covers s = v t_r + v² / (2 a_d) (kinematics of uniform
deceleration).  The largest speed whose stop fits in the length s:

    v = a_d (−t_r + sqrt(t_r² + 2 s / a_d))                               (1)

(the positive root of the quadratic), capped at the top speed.  Until the
drive-train stopping model exists, a_d is the braking limit
(`MotionLimits.deceleration`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pinocchio as pin

from ..errors import ConfigError
from ._limits import NAMES, motion_limits, motion_limits_batch

__all__ = ["LimitsMap", "PoseLimits", "evaluate_map_chunk", "limits_map", "pose_limits",
           "protective_speed", "reach_positions"]

_TOL = 1e-4        # m, tool position reached
_STEPS = 200
_DAMPING = 0.02    # m, λ of the damped least squares
_PULL = 0.3        # k of the pull toward the posture


def protective_speed(deceleration, stopping_length, reaction_time=0.0, *, top_speed=math.inf):
    """Largest speed whose stop fits in `stopping_length`: equation (1).

    Parameters
    ----------
    deceleration : float or array   a_d, m/s², >= 0 (0 gives speed 0)
    stopping_length : float         s, m, > 0
    reaction_time : float           t_r, s, >= 0 (travel at full speed before braking)
    top_speed : float               cap, m/s

    Returns
    -------
    float or ndarray   m/s
    """
    s = float(stopping_length)
    t = float(reaction_time)
    if not (math.isfinite(s) and s > 0):
        raise ConfigError(f"protective speed: the stopping length must be > 0 m, got {s!r}")
    if not (math.isfinite(t) and t >= 0):
        raise ConfigError(f"protective speed: the reaction time must be >= 0 s, got {t!r}")
    a = np.asarray(deceleration, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        v = np.where(a > 0, a * (np.sqrt(t * t + 2 * s / np.where(a > 0, a, 1.0)) - t), 0.0)
        v = np.where(np.isinf(a), s / t if t > 0 else math.inf, v)
    v = np.minimum(v, top_speed)
    return float(v) if v.ndim == 0 else v


# --------------------------------------------------------------------------- reaching

def _tool_position(robot, data, q):
    pin.framesForwardKinematics(robot.model, data, q)
    return data.oMf[robot.tool_frame_id].translation.copy()


def _reach_one(robot, data, target, q0_arm):
    """Arm configuration (n_arm,) reaching `target` by the rule of the module, or None
    (not reached in `_STEPS` steps, or the error stalls at a joint limit)."""
    qa = q0_arm.copy()
    lam2 = _DAMPING ** 2
    history = []
    eye_n = np.eye(len(qa))
    for _ in range(_STEPS):
        q = robot.configuration(arm=qa)
        e = target - _tool_position(robot, data, q)
        err = float(np.linalg.norm(e))
        if err < _TOL:
            return qa
        history.append(err)
        if len(history) > 15 and history[-16] - err < 1e-3 * history[-16]:
            return None                       # stalled: out of reach from this posture
        J = pin.computeFrameJacobian(robot.model, data, q, robot.tool_frame_id,
                                     pin.LOCAL_WORLD_ALIGNED)[:3].dot(robot.S)[:, 2:]
        free = np.ones(len(qa))
        for _ in range(len(qa)):    # joints held at a limit leave the step (active set)
            Jf = J * free
            J_dls = Jf.T.dot(np.linalg.inv(Jf.dot(Jf.T) + lam2 * np.eye(3)))
            N = eye_n - np.linalg.pinv(Jf, rcond=1e-6).dot(Jf)
            step = free * (J_dls.dot(e) + N.dot(free * _PULL * (q0_arm - qa)))
            out = ((qa <= robot.lower) & (step < 0)) | ((qa >= robot.upper) & (step > 0))
            if not np.any(out):
                break
            free[out] = 0.0
        qa = np.clip(qa + step, robot.lower, robot.upper)
    return None


def reach_positions(robot, targets, posture, *, progress=None):
    """Arm configurations reaching tool positions by the redundancy rule.

    Parameters
    ----------
    targets : (n, 3) tool positions in the base frame, m
    posture : (n_arm,) the posture q₀

    Returns
    -------
    arm : (n, n_arm), nan rows where unreachable
    """
    data = robot.model.createData()
    out = np.full((len(targets), robot.n_arm), np.nan)
    for i, p in enumerate(targets):
        qa = _reach_one(robot, data, np.asarray(p, dtype=float), posture)
        if qa is not None:
            out[i] = qa
        if progress is not None and (i + 1) % 25 == 0:
            progress(i + 1, len(targets))
    if progress is not None:
        progress(len(targets), len(targets))
    return out


def _workspace_box(robot, rng_seed=0, samples=400):
    """Bounding box (3, 2) of tool positions over random arm configurations, m."""
    rng = np.random.default_rng(rng_seed)
    lo = np.where(np.isfinite(robot.lower), robot.lower, -math.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, math.pi)
    data = robot.model.createData()
    P = np.array([_tool_position(robot, data, robot.configuration(arm=qa))
                  for qa in rng.uniform(lo, hi, (samples, robot.n_arm))])
    box = np.column_stack([P.min(axis=0), P.max(axis=0)])
    pad = 0.05 * np.maximum(box[:, 1] - box[:, 0], 0.05)
    return box + np.column_stack([-pad, pad])


# --------------------------------------------------------------------------- maps

@dataclass(frozen=True, eq=False)
class LimitsMap:
    """Limits over a grid of tool positions in one plane of the base frame.

    view "side" (x forward, z up, at y = `level`) or "top" (x, y at z = `level`);
    u (nu,), v (nv,) the grid's coordinates, m; values[name] (nv, nu) in the
    unit of `NAMES` (nan where the tool cannot reach or the pose cannot be held);
    limited_by[name] (nv, nu) str ("" where unreachable); status (nv, nu):
    "ok", "unreachable" or "cannot hold at rest: ..."; arm (nv, nu, n_arm);
    rule: the redundancy rule; options: the call's options.
    """

    view: str
    axes: tuple
    u: np.ndarray
    v: np.ndarray
    level: float
    values: dict
    limited_by: dict
    status: np.ndarray
    arm: np.ndarray
    rule: str
    options: dict


RULE = ("the configuration damped least squares reaches from the posture, its self-motion "
        "pulled toward the posture (a local minimum of the distance to the posture)")


def _grid_targets(view, u, v, level):
    U, V = np.meshgrid(u, v)
    L = np.full_like(U, level)
    if view == "side":
        return np.stack([U, L, V], axis=-1).reshape(-1, 3), ("x", "z")
    return np.stack([U, V, L], axis=-1).reshape(-1, 3), ("x", "y")


def limits_map(robot, view="side", *, points=21, level=None, extent=None, posture=None,
               progress=None, executor=None, **options):
    """Motion limits over a grid of tool positions (see the module docstring).

    Parameters
    ----------
    view : "side" (x–z plane) or "top" (x–y plane)
    points : int, grid points per axis (>= 2)
    level : float, the plane's y (side; default: the mount's) or z (top;
            default: the tool height at the posture), m
    extent : ((u_min, u_max), (v_min, v_max)) m, default the reachable box
    posture : arm posture q₀ (n_arm,) or a pose name; default: the arm at zero,
              clipped to its limits
    progress : callable(done, total) or None
    executor : None (this process), or an executor of `opspace.sweep.make_executor`
               made with ``function=evaluate_map_chunk``: the grid is cut into chunks
               of 64 tool positions computed on its workers (local processes, Dask)
    **options : passed to `motion_limits_batch` (payload, friction, grade, ...)

    Returns
    -------
    LimitsMap
    """
    if view not in ("side", "top"):
        raise ConfigError(f"limits map: view must be 'side' or 'top', got {view!r}")
    if int(points) != points or points < 2:
        raise ConfigError(f"limits map: points must be an integer >= 2, got {points!r}")
    q0 = _posture(robot, posture)
    if level is None:
        level = (robot.description.mount_xyz[1] if view == "side" else
                 _tool_position(robot, robot.model.createData(), robot.configuration(arm=q0))[2])
    if extent is None:
        box = _workspace_box(robot)
        extent = (box[0], box[2] if view == "side" else box[1])
    u = np.linspace(*extent[0], int(points))
    v = np.linspace(*extent[1], int(points))
    targets, axes = _grid_targets(view, u, v, float(level))
    if executor is None:
        arm, values, by, status = _map_chunk(robot, targets, q0, options, progress)
    else:
        arm, values, by, status = _run_chunks(robot, targets, q0, options, executor, progress)
    shape = (len(v), len(u))
    return LimitsMap(view=view, axes=axes, u=u, v=v, level=float(level),
                     values={k: x.reshape(shape) for k, x in values.items()},
                     limited_by={k: x.reshape(shape) for k, x in by.items()},
                     status=status.reshape(shape), arm=arm.reshape(shape + (robot.n_arm,)),
                     rule=RULE, options=dict(options))


def _map_chunk(robot, targets, q0, options, progress=None):
    """Arm, values, limited_by, status at tool positions (n, 3) (this process)."""
    arm = reach_positions(robot, targets, q0, progress=progress)
    arm[targets[:, 2] < 0.0] = np.nan           # in the floor
    values, by, status = _limits_at(robot, arm, options)
    return arm, values, by, status


# --------------------------------------------------------------------------- executors

_CHUNK = 64            # tool positions per task on an executor


@dataclass(frozen=True)
class _Chunk:
    id: int
    targets: np.ndarray


@dataclass(frozen=True)
class _MapContext:
    path: str
    posture: np.ndarray
    options: dict


_WORKER_ROBOTS = {}


def evaluate_map_chunk(context, task):
    """One chunk of a map, on a worker of the sweep's executors: its record."""
    try:
        robot = _WORKER_ROBOTS.get(context.path)
        if robot is None:
            from ..model import load_robot
            robot = _WORKER_ROBOTS[context.path] = load_robot(context.path)
        arm, values, by, status = _map_chunk(robot, task.targets, context.posture,
                                             context.options)
    except Exception as exc:   # reported to the caller, which stops with one line
        return {"id": task.id, "status": "error", "message": f"{type(exc).__name__}: {exc}"}
    return {"id": task.id, "status": "ok", "arm": arm, "values": values, "limited_by": by,
            "map_status": status}


def _run_chunks(robot, targets, q0, options, executor, progress):
    """`_map_chunk` over chunks of `targets` on an executor (see `limits_map`)."""
    from ..errors import ModelError

    tasks = [_Chunk(i, targets[k:k + _CHUNK])
             for i, k in enumerate(range(0, len(targets), _CHUNK))]
    context = _MapContext(str(robot.description.path), q0, dict(options))
    got = {}

    def on_record(rec):
        if rec.get("status") != "ok":
            raise ModelError(f"limits map: a worker failed on tool positions "
                             f"{rec.get('id', 0) * _CHUNK}..: {rec.get('message')}")
        got[rec["id"]] = rec
        if progress is not None:
            progress(min(len(got) * _CHUNK, len(targets)), len(targets))

    executor.run(context, tasks, on_record, max_retries=2)
    recs = [got[t.id] for t in tasks]
    arm = np.concatenate([r["arm"] for r in recs])
    values = {k: np.concatenate([r["values"][k] for r in recs]) for k in NAMES}
    by = {k: np.concatenate([r["limited_by"][k] for r in recs]) for k in NAMES}
    return arm, values, by, np.concatenate([r["map_status"] for r in recs])


def _posture(robot, posture):
    if posture is None:
        return np.clip(np.zeros(robot.n_arm), robot.lower, robot.upper)
    if isinstance(posture, str):
        return robot.pose(posture)
    q0 = np.asarray(posture, dtype=float)
    if q0.shape != (robot.n_arm,):
        raise ConfigError(f"limits map: the posture must have {robot.n_arm} arm joint values, "
                          f"got shape {q0.shape}")
    return q0


def _limits_at(robot, arm, options):
    """Batch limits at the reachable rows of `arm` (n, n_arm); nan / "" elsewhere."""
    n = len(arm)
    ok = np.all(np.isfinite(arm), axis=1)
    values = {k: np.full(n, np.nan) for k in NAMES}
    by = {k: np.full(n, "", dtype=object) for k in NAMES}
    status = np.full(n, "unreachable", dtype=object)
    if np.any(ok):
        b = motion_limits_batch(robot, robot.configurations(arm[ok]), **options)
        held = b.status == "ok"
        idx = np.flatnonzero(ok)
        for k in NAMES:
            values[k][idx] = np.where(held, b.values[k], np.nan)
            by[k][idx] = np.where(held, b.limited_by[k], "")
        status[idx] = b.status
    return values, by, status


# --------------------------------------------------------------------------- named poses

@dataclass(frozen=True, eq=False)
class PoseLimits:
    """Limits at the named poses: names (k,), arm (k, n_arm), tool (k, 3) the tool
    position in the base frame, m, values / limited_by per name of `NAMES` (k,),
    status (k,)."""

    names: list
    arm: np.ndarray
    tool: np.ndarray
    values: dict
    limited_by: dict
    status: np.ndarray


def pose_limits(robot, names=None, **options):
    """Limits at the description's named poses (all of them by default)."""
    names = list(robot.description.poses) if names is None else list(names)
    if not names:
        return PoseLimits([], np.zeros((0, robot.n_arm)), np.zeros((0, 3)),
                          {k: np.zeros(0) for k in NAMES},
                          {k: np.zeros(0, dtype=object) for k in NAMES},
                          np.zeros(0, dtype=object))
    arm = np.array([robot.pose(n) for n in names])
    values, by, status = _limits_at(robot, arm, options)
    data = robot.model.createData()
    tool = np.array([_tool_position(robot, data, q) for q in robot.configurations(arm)])
    return PoseLimits(names, arm, tool, values, by, status)


# --------------------------------------------------------------------------- study

CAUTIONS = (
    "These limits are model estimates with the margins stated on this page (a rigid robot "
    "on a flat, rigid floor of uniform friction; the described load model; no controller "
    "overshoot, bumps, slopes across the path or wheel slip dynamics).",
    "The motion planner's velocity and acceleration limiter must be validated on the robot "
    "before use, with the payloads and floors it will meet; apply service factors.",
    "Defer to the applicable safety standards for mobile robots and industrial robots, local "
    "codes and licensed engineering practice; a protective-field speed here is not a "
    "validated safety function.",
)


@dataclass(frozen=True, eq=False)
class LimitsStudy:
    """Named poses, maps and protective-field speeds of one robot under one set
    of options (what `opspace limits` writes)."""

    robot: str
    options: dict
    poses: PoseLimits
    maps: list
    stopping_length: float | None
    reaction_time: float
    top_speed: float
    policy: dict
    drive: str

    def field_speed(self, deceleration):
        """Protective-field speed for decelerations (m/s²), or None without a length."""
        if self.stopping_length is None:
            return None
        return protective_speed(deceleration, self.stopping_length, self.reaction_time,
                                top_speed=self.top_speed)

    @property
    def status(self):
        """"ok", or "attention" when a named pose cannot be held at rest."""
        return "ok" if all(s == "ok" for s in self.poses.status) else "attention"


def limits_study(robot, *, views=("side", "top"), points=21, posture=None,
                 stopping_length=None, reaction_time=0.0, progress=None, executor=None,
                 **options):
    """Named poses and maps (see `limits_map`, `pose_limits`) in one result.

    executor : None, or an executor for the maps (see `limits_map`).
    """
    if stopping_length is not None:
        protective_speed(1.0, stopping_length, reaction_time)      # validates both
    # validates every option first; a grade the robot cannot stand on at the
    # posture is bad input (ConfigError), before any long computation
    probe = motion_limits(robot, robot.configuration(arm=_posture(robot, posture)), **options)
    poses = pose_limits(robot, **options)
    maps = []
    for view in views:
        report = None if progress is None else (
            lambda d, t, view=view: progress(f"{view} view", d, t))
        maps.append(limits_map(robot, view, points=points, posture=posture, progress=report,
                               executor=executor, **options))
    return LimitsStudy(robot=robot.name, options=dict(options), poses=poses, maps=maps,
                       stopping_length=stopping_length, reaction_time=float(reaction_time),
                       top_speed=float(robot.top_speed), policy=probe.policy.to_dict(),
                       drive=probe.drive)
