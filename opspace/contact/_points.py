"""Effective mass of the robot at a contact point.

For a point P rigidly attached to frame F at r = p_P − o_F (world axes), its
velocity is v_P = v_F + ω_F × r = T J ν with T = [I | −[r]×] and J the frame's
[linear; angular] world-aligned Jacobian in reduced coordinates, so the
point's inverse task-space inertia is

    Λ_P⁻¹ = T (J M⁻¹ Jᵀ) Tᵀ,      m_u = 1 / (uᵀ Λ_P⁻¹ u)

the effective mass along a unit direction u (Khatib, "Inertial properties in
robotic manipulation: an object-level framework", IJRR 14(1), 1995).  It is
taken from `task_space(..., axes="full")` (J M⁻¹ Jᵀ of the frame) for the
whole body (wheels free, rolling constraints in ν) and with the wheels locked
(arm only).  The reflected rotor inertia (armature) is in M; its share is
1 − m_u(M − diag(armature)) / m_u(M).

The simple estimate of the power-and-force-limiting model is half the mass of
the moving parts plus the payload, m_R = M_moving / 2 + m_L (ISO/TS 15066:2016,
Annex A, eq. A.4); M_moving is the whole robot, or the arm's moving links when
the base is locked.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pinocchio as pin

from ..description import OUTLINE_POINTS
from ..dynamics import joint_space, task_space
from ..errors import ConfigError
from ._two_body import permissible_speed

__all__ = ["PointMass", "along_motion", "along_motion_all", "effective_masses", "mass_along", "point_position"]

_TINY = 1e-12
_LWA = pin.ReferenceFrame.LOCAL_WORLD_ALIGNED


@dataclass(frozen=True)
class PointMass:
    """Effective masses and permissible speeds of one contact point at one state.

    position (3,) m and direction (3,) unit, world; height m above the floor;
    speed m/s along the direction (the point's own speed when the direction is
    that of its motion); whole_body, base_locked and simple kg (inf where the
    point cannot move along the direction); rotor_share (fraction of
    whole_body due to reflected rotor inertia); region (name, or None where no
    body region is at this height); v_whole_body, v_base_locked, v_simple m/s
    (None without a region).
    """

    name: str
    position: np.ndarray
    direction: np.ndarray
    height: float
    speed: float
    whole_body: float
    base_locked: float
    simple: float
    simple_arm: float
    rotor_share: float
    region: str | None
    v_whole_body: float | None
    v_base_locked: float | None
    v_simple: float | None

    @property
    def use(self):
        """speed / permissible speed (whole body), None without a region; inf if v_max = 0."""
        if self.v_whole_body is None:
            return None
        if self.v_whole_body <= 0.0:
            return math.inf if self.speed > 0 else 0.0
        return self.speed / self.v_whole_body

    def to_dict(self):
        def num(x):
            return None if x is None or not math.isfinite(x) else float(x)
        use = self.use
        return {"name": self.name, "position": self.position.tolist(),
                "direction": self.direction.tolist(), "height": self.height,
                "speed": self.speed, "whole_body": num(self.whole_body),
                "base_locked": num(self.base_locked), "simple": num(self.simple),
                "simple_arm": num(self.simple_arm),
                "rotor_share": self.rotor_share, "region": self.region,
                "v_whole_body": num(self.v_whole_body), "v_base_locked": num(self.v_base_locked),
                "v_simple": num(self.v_simple), "use": num(use) if use is not None else None,
                "units": {"position": "m", "height": "m", "speed": "m/s", "whole_body": "kg",
                          "base_locked": "kg", "simple": "kg", "simple_arm": "kg", "v_whole_body": "m/s",
                          "v_base_locked": "m/s", "v_simple": "m/s"}}


def _skew(r):
    return np.array([[0.0, -r[2], r[1]], [r[2], 0.0, -r[0]], [-r[1], r[0], 0.0]])


def _offset(robot, spec):
    """(frame, offset in that frame) of a point; outline points from the footprint."""
    if spec.outline is None:
        return spec.frame, np.asarray(spec.offset, float)
    fp = robot.description.base.footprint
    if fp is None:
        raise ConfigError(f"contact point {spec.name!r}: outline = {spec.outline!r} needs "
                          f"[base] footprint in {robot.description.path.name}")
    ix, iy = OUTLINE_POINTS[spec.outline]
    x = fp[ix] if ix is not None else 0.5 * (fp[0] + fp[1])
    y = fp[iy] if iy is not None else 0.5 * (fp[2] + fp[3])
    return "base", np.array([x, y, 0.5 * fp[4]])


def point_position(robot, q, spec):
    """World position of a contact point, m, (3,), and the frame's placement."""
    frame, offset = _offset(robot, spec)
    X = robot.frame_placement(q, frame)
    return X.translation + X.rotation.dot(offset), X, frame, offset


def _mass_along(Linv, u):
    inv_m = float(u.dot(Linv).dot(u))
    return 1.0 / inv_m if inv_m > _TINY * max(np.trace(Linv), _TINY) else math.inf


def _moving_mass(robot, locked):
    """Mass of the moving parts without the payload, kg: the whole robot, or the
    arm's moving links (their joints' bodies) when the base is locked."""
    m_L = robot.payload.mass if robot.payload is not None else 0.0
    if not locked:
        return robot.total_mass() - m_L, m_L
    model = robot.model
    arm = sum(model.inertias[model.getJointId(n)].mass for n in robot.arm_joint_names)
    return arm - m_L, m_L


def _region_speed(regions, spec, height, m_R):
    """(region, v_max) for the point: its own region, or the most restrictive
    (lowest v_max) of those at its height; (None, None) where none is."""
    if regions is None:
        return None, None
    if spec.region is not None:
        region = regions.get(spec.region, f"contact point {spec.name!r} region")
        return region, permissible_speed(region, m_R, spec.area)
    found = [(permissible_speed(r, m_R, spec.area), r) for r in regions.at_height(height)]
    if not found:
        return None, None
    v, region = min(found, key=lambda x: x[0])
    return region, v


def _point_terms(robot, q, nu, spec, base="whole_body"):
    """(p (3,), T (3, 6), J (6, nv or n_arm), Λ_P⁻¹ (3, 3)) of a contact point."""
    p, X, frame, offset = point_position(robot, q, spec)
    T = np.hstack([np.eye(3), -_skew(X.rotation.dot(offset))])
    ts = task_space(robot, q, nu, frame, axes="full", base=base)
    return p, T, ts.J, T.dot(ts.Lambda_inv).dot(T.T)


def _base_direction(robot, q, direction):
    """A base-frame direction in world axes, normalised."""
    u = robot.frame_placement(q, "base").rotation.dot(np.asarray(direction, float))
    return u / np.linalg.norm(u)


def mass_along(robot, q, spec, direction):
    """Whole-body effective mass (kg) of a point along a base-frame direction
    (the lean path of `effective_masses`, for searches)."""
    _, _, _, Linv = _point_terms(robot, q, np.zeros(robot.nv), spec)
    return _mass_along(Linv, _base_direction(robot, q, direction))


def along_motion_all(robot, q, nu, specs, regions):
    """`along_motion` of every point at one state from one mass matrix: one crba
    (which also gives every frame Jacobian) and one Cholesky solve for all the
    points' Jacobians.  Returns a list of (speed, mass, region, v_max)."""
    from ..dynamics import mass_and_jacobian, solve_spd

    model, data = robot.model, robot.data
    rows = slice(0, 6)
    frames = [_offset(robot, s) for s in specs]
    fids = [robot.frame_id(f) for f, _ in frames]
    M, J0 = mass_and_jacobian(robot, data, q, fids[0], rows)
    Js, ps = [], []
    for fid, (_, offset) in zip(fids, frames):
        J = J0 if fid == fids[0] else pin.getFrameJacobian(model, data, fid, _LWA).dot(robot.S)
        pin.updateFramePlacement(model, data, fid)
        X = data.oMf[fid]
        r = X.rotation.dot(offset)
        Js.append(J[:3] - _skew(r).dot(J[3:]))          # T J, T = [I | −[r]×]
        ps.append(X.translation + r)
    Jp = np.vstack(Js)                                   # (3k, nv)
    Linv = Jp.dot(solve_spd(M, np.ascontiguousarray(Jp.T)))
    v_all = Jp.dot(nu)
    out = []
    for j, spec in enumerate(specs):
        v_p, Lj = v_all[3 * j:3 * j + 3], Linv[3 * j:3 * j + 3, 3 * j:3 * j + 3]
        speed = float(np.linalg.norm(v_p))
        height = float(ps[j][2])
        if speed <= 1e-9:
            out.append((0.0, math.nan, _region_speed(regions, spec, height, math.inf)[0], None))
            continue
        m = _mass_along(Lj, v_p / speed)
        region, v_max = _region_speed(regions, spec, height, m)
        out.append((speed, m, region, v_max))
    return out


def along_motion(robot, q, nu, spec, regions):
    """(speed m/s, whole-body mass kg along the motion, region or None, v_max m/s
    or None) of a point: the lean path of `effective_masses` for tracks.  A point
    at rest gives (0, nan, region at its height or None, None)."""
    p, T, J, Linv = _point_terms(robot, q, nu, spec)
    v_p = T.dot(J.dot(nu))
    speed = float(np.linalg.norm(v_p))
    if speed <= 1e-9:
        region = _region_speed(regions, spec, float(p[2]), math.inf)[0]
        return 0.0, math.nan, region, None
    m = _mass_along(Linv, v_p / speed)
    region, v_max = _region_speed(regions, spec, float(p[2]), m)
    return speed, m, region, v_max


def effective_masses(robot, q, spec, *, nu=None, direction=None, regions=None):
    """Effective masses of a contact point and its permissible speeds.

    Parameters
    ----------
    q : ndarray (robot.model.nq,)
    spec : ContactPointSpec
    nu : ndarray (robot.nv,) or None   reduced velocity; with it and no
         `direction`, the direction is that of the point's motion (a point at
         rest then uses the spec's direction)
    direction : (3,) or None   base-frame direction; None: see nu, else spec.direction
    regions : RegionTable or None   for the permissible speeds

    Returns
    -------
    PointMass
    """
    nu = np.zeros(robot.nv) if nu is None else np.asarray(nu, float)
    p, T, J, Linv = _point_terms(robot, q, nu, spec)
    v_p = T.dot(J.dot(nu))
    speed = float(np.linalg.norm(v_p))
    if direction is not None:
        u = _base_direction(robot, q, direction)
    elif speed > 1e-9:
        u = v_p / speed
    else:
        u = _base_direction(robot, q, spec.direction)
    speed_along = float(max(u.dot(v_p), 0.0))
    m_wb = _mass_along(Linv, u)
    m_lk = _mass_along(_point_terms(robot, q, nu, spec, base="locked")[3], u)
    M0 = joint_space(robot, q, nu).M - np.diag(robot.armature)
    m_0 = _mass_along(T.dot(J.dot(np.linalg.solve(M0, J.T))).dot(T.T), u)
    share = 0.0 if not math.isfinite(m_wb) else max(0.0, 1.0 - m_0 / m_wb)
    moving, m_L = _moving_mass(robot, locked=False)
    m_simple = 0.5 * moving + m_L
    m_simple_arm = 0.5 * _moving_mass(robot, locked=True)[0] + m_L
    height = float(p[2])
    region, v_wb = _region_speed(regions, spec, height, m_wb)
    v_lk = v_sm = None
    if region is not None:
        # a point that cannot move along u (infinite mass) has no speed to limit
        v_wb = v_wb if math.isfinite(m_wb) else None
        v_lk = permissible_speed(region, m_lk, spec.area) if math.isfinite(m_lk) else None
        v_sm = permissible_speed(region, m_simple, spec.area)
    return PointMass(spec.name, p, u, height, speed_along, m_wb, m_lk, m_simple, m_simple_arm,
                     share, region.name if region is not None else None, v_wb, v_lk, v_sm)
