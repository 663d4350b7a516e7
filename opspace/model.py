"""The whole-body model of a differential-drive mobile manipulator.

Pinocchio tree (joint order = velocity order)::

    universe ─ base_planar (JointModelPlanar: x, y, θ; velocity (vx, vy, ωz) in
               │            the base frame)            body: chassis
               ├ wheel_right (RY at (0, −b, r))        body: right wheel
               ├ wheel_left  (RY at (0, +b, r))        body: left wheel
               └ arm, appended at the mount placement (URDF chain order)

Rolling without slip and no side slip make the base velocity a constant linear
map of the wheel rates (the base velocity is expressed in the base frame)::

    vx = r (φ̇_r + φ̇_l) / 2,   vy = 0,   ωz = r (φ̇_r − φ̇_l) / (2 b)

so the Pinocchio velocity is v = S ν with ν = (φ̇_r, φ̇_l, q̇_arm) and S
constant (a positive wheel rate drives forward; turning left speeds up the
right wheel).  Since Ṡ = 0, v̇ = S ν̇, and projecting the constrained
equations on the admissible motions (d'Alembert / Kane) gives the reduced
dynamics  Sᵀ M_pin S ν̇ + Sᵀ h_pin(q, S ν) = Sᵀ τ  (the rolling constraint
forces do no work along S).
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass

import numpy as np
import pinocchio as pin

from ._common import GRAVITY
from ._common import as_vector as _finite
from .description import (Payload, RobotDescription, arm_joint_names, arm_position_limits,
                          independent_joint_names, inertia_matrix, load_description)
from .errors import ConfigError

__all__ = ["GRAVITY", "MobileManipulator", "load_robot"]

BASE_JOINT = "base_planar"
WHEEL_JOINTS = ("wheel_right", "wheel_left")


def load_robot(path, *, doc=None, urdf_text=None):
    """Load, validate and build a robot from its description TOML.

    Parameters
    ----------
    path : str or Path   robot description (see DESIGN.md / README reference)
    doc, urdf_text :     its parsed content and the arm URDF's text, if already at
                         hand (see `opspace.description.load_description`)

    Returns
    -------
    MobileManipulator
    """
    return MobileManipulator(load_description(path, doc=doc, urdf_text=urdf_text))


def _inertia(mass, com, values):
    return pin.Inertia(float(mass), np.asarray(com, dtype=float), inertia_matrix(values))


def _link_frames_apart(arm):
    """(arm, {temporary name: name}): a copy of the arm model whose link frames
    that share their name with a joint (legal URDF) carry a temporary name,
    which `pinocchio.appendModel` (it looks frames up by name alone) needs."""
    names = [f.name for f in arm.frames]
    clash = {n for n in names if names.count(n) > 1}
    if not clash:
        return arm, {}
    arm = arm.copy()
    renamed = {}
    for i, f in enumerate(arm.frames):
        if f.name in clash and f.type == pin.FrameType.BODY:
            renamed[f"{f.name} (link {i})"] = f.name
            f.name = f"{f.name} (link {i})"
            arm.frames[i] = f
    return arm, renamed


@dataclass(frozen=True)
class Contact:
    """A ground contact: name, position (x, y) in the base frame, m, and
    whether it is a driven wheel."""

    name: str
    position: tuple[float, float]
    driven: bool


class MobileManipulator:
    """Pinocchio model of the base, its two drive wheels and the arm.

    Attributes
    ----------
    model : pinocchio.Model      the full model (nq = 4 + 2 + arm nq)
    S : ndarray (model.nv, nv)   constant reduction map, v = S ν
    nv : int                     number of reduced coordinates
    coordinate_names : list[str] wheel_right, wheel_left, then arm joints
    arm_joint_names : list[str]  the URDF's moving joints, in chain order
    coulomb, viscous : ndarray (nv,)  friction per reduced coordinate (coulomb: kinetic)
    stiction : ndarray (nv,)     static (breakaway) friction level, >= coulomb
    effort_limit, velocity_limit : ndarray (nv,)  ±limits (inf if unknown)
    lower, upper : ndarray (nv - 2,)   arm position limits
    contacts : tuple[Contact]    the drive-wheel contacts then the casters
    """

    def __init__(self, description: RobotDescription):
        self.description = description
        self.name = description.name
        base = description.base
        self.wheel_radius = base.wheel_radius
        self.half_track = base.half_track
        self.rolling_resistance = base.rolling_resistance
        self.top_speed = base.top_speed
        self.ground_friction = description.ground_friction
        self.model = self._build(description)
        self.data = self.model.createData()
        #: {follower joint: Mimic(independent leader, multiplier, offset)}
        self.mimic = dict(description.mimic)
        self.arm_joint_names = independent_joint_names(description.arm_model, self.mimic)
        self.coordinate_names = list(WHEEL_JOINTS) + self.arm_joint_names
        self.nv = len(self.coordinate_names)
        self.n_arm = self.nv - 2
        self._arm_map = self._joint_map(arm_joint_names(description.arm_model))
        self.S = self._reduction_map()
        self.St = np.ascontiguousarray(self.S.T)
        self._arm_q_index = [iq for iq, _, _, _, _, own in self._arm_map if own]
        self._arm_nq = [nq for _, nq, _, _, _, own in self._arm_map if own]
        self.lower, self.upper = arm_position_limits(description.arm_model, self.mimic)
        #: unit of each arm coordinate: "m" for prismatic joints, else "rad"
        # (JointModelPX/PY/PZ/PrismaticUnaligned; revolute ones start with "JointModelR")
        self.arm_units = ["m" if self.model.joints[self.model.getJointId(n)].shortname()
                          .startswith("JointModelP") else "rad" for n in self.arm_joint_names]
        self._set_drive_terms(description)
        self.tool_frame = description.tool_frame
        self.tool_frame_id = self.frame_id(description.tool_frame)
        self._tool_joint = self.model.frames[self.tool_frame_id].parentJoint
        self._bare_tool_inertia = self.model.inertias[self._tool_joint].copy()
        self.payload: Payload | None = None
        self.revision = 0  # bumped whenever the model's inertias or gravity change
        self._mass_cache = None
        self.slope = 0.0
        self.cross_slope = 0.0
        self.contacts = (
            Contact("wheel_right", (0.0, -self.half_track), True),
            Contact("wheel_left", (0.0, self.half_track), True),
        ) + tuple(Contact(f"caster_{i + 1}", xy, False)
                  for i, xy in enumerate(description.casters))

    # ------------------------------------------------------------------ build
    @staticmethod
    def _build(d: RobotDescription):
        base, wheel = d.base, d.wheel
        b, r = base.half_track, base.wheel_radius
        m = pin.Model()
        m.name = d.name
        jb = m.addJoint(0, pin.JointModelPlanar(), pin.SE3.Identity(), BASE_JOINT)
        m.appendBodyToJoint(jb, _inertia(base.mass, base.com, base.inertia), pin.SE3.Identity())
        base_frame = m.addFrame(pin.Frame("base", jb, 0, pin.SE3.Identity(), pin.FrameType.BODY))
        I_wheel = [wheel.diameter_inertia, wheel.spin_inertia, wheel.diameter_inertia, 0, 0, 0]
        for name, y in zip(WHEEL_JOINTS, (-b, b)):
            X = pin.SE3(np.eye(3), np.array([0.0, y, r]))
            jw = m.addJoint(jb, pin.JointModelRY(), X, name)
            m.appendBodyToJoint(jw, _inertia(wheel.mass, np.zeros(3), I_wheel), pin.SE3.Identity())
            m.addFrame(pin.Frame(name, jw, 0, pin.SE3.Identity(), pin.FrameType.BODY))
        X_mount = pin.SE3(pin.rpy.rpyToMatrix(np.array(d.mount_rpy)), np.array(d.mount_xyz))
        arm, renamed = _link_frames_apart(d.arm_model)
        model = pin.appendModel(m, arm, base_frame, X_mount)
        for i, f in enumerate(model.frames):      # the links' own names back
            if f.name in renamed:
                f.name = renamed[f.name]
                model.frames[i] = f
        for name, (parent, xyz, R) in (d.whole.frames if d.whole is not None else {}).items():
            if not model.existFrame(name):    # a whole URDF's chassis and wheel links
                fid = model.getFrameId(parent)
                model.addFrame(pin.Frame(name, model.frames[fid].parentJoint, fid,
                                         pin.SE3(np.array(R), np.array(xyz)), pin.FrameType.BODY))
        model.gravity = pin.Motion(np.array([0.0, 0.0, -GRAVITY]), np.zeros(3))
        return model

    def _joint_map(self, names):
        """Per arm joint of the URDF (followers included), in chain order:
        (idx_q, nq, idx_v in the model, reduced index k, (multiplier, offset),
        independent?) with q_joint = multiplier · ν-coordinate k + offset."""
        out = []
        for name in names:
            joint = self.model.joints[self.model.getJointId(name)]
            m = self.mimic.get(name)
            lead, rule = (name, (1.0, 0.0)) if m is None else (m.leader, (m.multiplier, m.offset))
            out.append((joint.idx_q, joint.nq, joint.idx_v,
                        2 + self.arm_joint_names.index(lead), rule, m is None))
        return out

    def _reduction_map(self):
        """S: the rolling map of the base, identity on the wheels and the
        independent arm joints, and the multiplier k on a mimic follower's row
        (q̇_f = k q̇_l, the time derivative of q_f = k q_l + o)."""
        r, b = self.wheel_radius, self.half_track
        S = np.zeros((self.model.nv, self.nv))
        S[0, 0:2] = r / 2.0                      # vx
        S[2, 0], S[2, 1] = r / (2 * b), -r / (2 * b)  # ωz
        S[3, 0] = S[4, 1] = 1.0                  # wheels
        for _, _, iv, k, (mult, _), _ in self._arm_map:
            S[iv, k] = mult
        return S

    def _set_drive_terms(self, d: RobotDescription):
        """Armature (reflected rotor inertia), friction and limits per coordinate.

        Per URDF arm joint first (followers included), then reduced with the
        arm block E of S (q̇_arm = E ν_arm): a follower's viscous friction adds
        k² D_f to its leader (Eᵀ D E), its Coulomb friction |k| F_f (Eᵀ F
        sign(E ν)), its armature sits in the model, so Sᵀ M S carries it.
        """
        arm = d.arm_model
        names = arm_joint_names(arm)
        coulomb, viscous = np.array(arm.friction, float), np.array(arm.damping, float)
        armature_full = np.zeros(arm.nv)
        for j, jname in enumerate(names):
            jd = d.arm_joints.get(jname)
            if jd is None:
                continue
            armature_full[j] = jd.reflected_inertia
            if jd.coulomb is not None:
                coulomb[j] = jd.coulomb
            if jd.viscous is not None:
                viscous[j] = jd.viscous
        # the static (breakaway) level: `stiction` where given, else the kinetic one
        stiction = coulomb.copy()
        for j, jname in enumerate(names):
            jd = d.arm_joints.get(jname)
            if jd is None or jd.stiction is None:
                continue
            if jd.stiction < coulomb[j]:
                raise ConfigError(f"{d.path.name}: [arm_joint.{jname}] stiction must be >= its "
                                  f"kinetic (coulomb) friction {coulomb[j]:g}, got "
                                  f"{jd.stiction:g}")
            stiction[j] = jd.stiction
        E = self.S[5:, 2:]
        self.coulomb = np.concatenate([[d.drive.coulomb] * 2, np.abs(E).T.dot(coulomb)])
        self.viscous = np.concatenate([[d.drive.viscous] * 2, (E * E).T.dot(viscous)])
        wheel_stiction = d.drive.coulomb if d.drive.stiction is None else d.drive.stiction
        self.stiction = np.concatenate([[wheel_stiction] * 2, np.abs(E).T.dot(stiction)])
        full = np.zeros(self.model.nv)
        full[3:5] = d.drive.reflected_inertia
        full[5:] = armature_full
        self.model.armature = full
        self.armature = np.diag(self.S.T.dot(full[:, None] * self.S)).copy()
        own = [j for j, entry in enumerate(self._arm_map) if entry[5]]
        effort = np.where(arm.effortLimit > 0, arm.effortLimit, np.inf)
        speed = np.where(arm.velocityLimit > 0, arm.velocityLimit, np.inf)
        for j, (_, _, _, k, (mult, _), independent) in enumerate(self._arm_map):
            if not independent and mult != 0.0:   # |q̇_l| <= v_f / |k| keeps the follower in
                speed[own[k - 2]] = min(speed[own[k - 2]], speed[j] / abs(mult))
        self.effort_limit = np.full(self.nv, np.inf)
        self.velocity_limit = np.full(self.nv, np.inf)
        self.effort_limit[:2] = d.drive.torque_limit
        self.effort_limit[2:] = effort[own]
        self.velocity_limit[2:] = speed[own]
        if math.isfinite(self.top_speed):
            self.velocity_limit[:2] = self.top_speed / self.wheel_radius

    # ------------------------------------------------------------ configuration
    def configuration(self, base_pose=(0.0, 0.0, 0.0), wheels=(0.0, 0.0), arm=None):
        """Full Pinocchio configuration q from readable parts.

        Parameters
        ----------
        base_pose : (x, y, θ)   m, m, rad, in the world frame
        wheels : (φ_r, φ_l)     wheel angles, rad
        arm : sequence (n_arm,) arm joint positions in chain order (rad or m);
              a name of a pose of the description; None = all zeros

        Returns
        -------
        ndarray (model.nq,)
        """
        x, y, theta = _finite("base_pose", base_pose, 3)
        phi = _finite("wheels", wheels, 2)
        if arm is None:
            qa = np.zeros(self.n_arm)
        elif isinstance(arm, str):
            qa = self.pose(arm)
        else:
            qa = self.arm_vector("arm", arm)
        q = np.empty(self.model.nq)
        q[:4] = (x, y, math.cos(theta), math.sin(theta))
        q[4:6] = phi
        for iq, nq, _, k, (mult, off), _ in self._arm_map:
            value = mult * qa[k - 2] + off         # a mimic follower: q_f = k q_l + o
            if nq == 1:
                q[iq] = value
            else:  # continuous joint: (cos, sin)
                q[iq:iq + 2] = (math.cos(value), math.sin(value))
        return q

    def arm_vector(self, name, values):
        """`values` as a finite vector (n_arm,); the message names the joints."""
        x = np.asarray(values, dtype=float)
        joints = ", ".join(self.arm_joint_names)
        if x.shape != (self.n_arm,):
            raise ValueError(f"`{name}` must have shape ({self.n_arm},), got {x.shape}: one "
                             f"value per independent arm joint ({joints})")
        if not np.all(np.isfinite(x)):
            raise ValueError(f"`{name}` has non-finite entries: {x} ({joints})")
        return x

    def configurations(self, arm):
        """Configurations (n, nq) with the base at the origin, heading 0, the
        wheels at 0, and the arm at each row of `arm` (n, n_arm)."""
        arm = np.asarray(arm, dtype=float)
        if arm.ndim != 2 or arm.shape[1] != self.n_arm:
            raise ValueError(f"`arm` must have shape (n, {self.n_arm}), one column per "
                             f"independent arm joint ({', '.join(self.arm_joint_names)}), "
                             f"got {arm.shape}")
        qs = np.tile(self.configuration(), (len(arm), 1))
        for iq, nq, _, k, (mult, off), _ in self._arm_map:
            value = mult * arm[:, k - 2] + off
            if nq == 1:
                qs[:, iq] = value
            else:
                qs[:, iq], qs[:, iq + 1] = np.cos(value), np.sin(value)
        return qs

    def pose(self, name):
        """Named arm pose of the description, ndarray (n_arm,)."""
        try:
            return self.description.poses[name].copy()
        except KeyError:
            known = ", ".join(sorted(self.description.poses)) or "none"
            raise ConfigError(f"{self.description.path.name}: [poses] has no pose "
                              f"'{name}' (poses: {known})") from None

    def base_pose(self, q):
        """(x, y, θ) of the base in the world, m, m, rad."""
        return float(q[0]), float(q[1]), math.atan2(q[3], q[2])

    def arm_positions(self, q):
        """Arm joint positions (n_arm,) from a full configuration."""
        out = np.empty(self.n_arm)
        for k, (iq, nq) in enumerate(zip(self._arm_q_index, self._arm_nq)):
            out[k] = q[iq] if nq == 1 else math.atan2(q[iq + 1], q[iq])
        return out

    def wheel_rates(self, v, omega):
        """Wheel rates (φ̇_r, φ̇_l), rad/s, for base speed v m/s and yaw rate ω rad/s.

        Inverse of vx = r(φ̇_r + φ̇_l)/2, ωz = r(φ̇_r − φ̇_l)/(2b); vectorised.
        """
        r, b = self.wheel_radius, self.half_track
        v, omega = np.asarray(v, dtype=float), np.asarray(omega, dtype=float)
        return (v + b * omega) / r, (v - b * omega) / r

    def base_twist(self, nu):
        """(vx, ωz) of the base, m/s and rad/s, from reduced velocities (..., nv)."""
        nu = np.asarray(nu, dtype=float)
        r, b = self.wheel_radius, self.half_track
        return r * (nu[..., 0] + nu[..., 1]) / 2, r * (nu[..., 0] - nu[..., 1]) / (2 * b)

    def velocity(self, nu):
        """Pinocchio velocity v = S ν (model.nv,)."""
        return self.S.dot(nu)

    def neutral(self):
        """Configuration at the origin, wheels at 0, arm at zero."""
        return self.configuration()

    # ----------------------------------------------------------------- frames
    def frame_id(self, name):
        """Index of a frame of the model; ConfigError listing the known ones."""
        if not self.model.existFrame(name):
            names = ", ".join(f.name for f in self.model.frames if f.type == pin.FrameType.BODY)
            raise ConfigError(f"unknown frame '{name}' (body frames: {names})")
        # a link and a joint may share a name (legal URDF): the link's frame wins
        ids = [i for i, f in enumerate(self.model.frames) if f.name == name]
        order = (pin.FrameType.BODY, pin.FrameType.OP_FRAME, pin.FrameType.FIXED_JOINT,
                 pin.FrameType.JOINT, pin.FrameType.SENSOR)
        return min(ids, key=lambda i: order.index(self.model.frames[i].type))

    def frame_placement(self, q, frame):
        """World placement of a frame, pinocchio.SE3 (X_W_frame)."""
        fid = self.frame_id(frame) if isinstance(frame, str) else int(frame)
        pin.framesForwardKinematics(self.model, self.data, q)
        return self.data.oMf[fid].copy()

    def frame_placements(self, q, frames):
        """World placements of several frames from one forward-kinematics pass.

        frames : sequence of frame names or ids.  Returns a list of
        pinocchio.SE3 (X_W_frame), in the order given.
        """
        ids = [self.frame_id(f) if isinstance(f, str) else int(f) for f in frames]
        pin.framesForwardKinematics(self.model, self.data, q)
        return [self.data.oMf[i].copy() for i in ids]

    def arm_points(self, q):
        """Points of the arm chain in the base frame for drawing, (k, 3) m:
        the mount, each arm joint origin in chain order, then the tool frame."""
        pin.framesForwardKinematics(self.model, self.data, q)
        X_B_W = self.data.oMi[1].inverse()  # base_planar joint: the base frame
        points = [np.array(self.description.mount_xyz)]
        for name in self.arm_joint_names:
            jid = self.model.getJointId(name)
            points.append(X_B_W.act(self.data.oMi[jid].translation))
        points.append(X_B_W.act(self.data.oMf[self.tool_frame_id].translation))
        return np.array(points)

    # ------------------------------------------------------------- mass props
    def total_mass(self):
        """Total mass, kg (chassis, wheels, arm and any attached payload)."""
        cached = self._mass_cache
        if cached is None or cached[0] != self.revision:
            cached = self._mass_cache = (self.revision,
                                         float(sum(i.mass for i in self.model.inertias)))
        return cached[1]

    def com(self, q):
        """Centre of mass in the world frame, m, shape (3,)."""
        return pin.centerOfMass(self.model, self.data, q, False).copy()

    # ----------------------------------------------------------------- ground
    def set_ground_slope(self, slope=0.0, cross=0.0):
        """Tilt gravity so that the ground plane rises at `slope` rad along the
        world +x axis and at `cross` rad along the world +y axis (mutates the
        model; 0, 0 restores flat ground).

        The world frame stays attached to the ground (z is its normal), so the
        true vertical has the components (sin α, sin β, √(1 − sin²α − sin²β))
        on the ground axes x, y, z (an axis that climbs at angle α has sin α of
        the vertical on it) and gravity is g⃗ = −g times that: a ramp alone is
        g (−sin α, 0, −cos α).  A robot with heading 0 drives uphill with its
        left side up when both are positive.
        """
        slope, cross = float(slope), float(cross)
        for name, a in (("slope", slope), ("cross", cross)):
            if not (math.isfinite(a) and abs(a) < math.pi / 2):
                raise ValueError(f"`{name}` must be a finite angle in (-pi/2, pi/2) rad, got {a}")
        sa, sb = math.sin(slope), math.sin(cross)
        if sa * sa + sb * sb >= 1.0:
            raise ValueError(f"`slope` {slope} and `cross` {cross} rad together tilt the ground "
                             f"past vertical")
        self.model.gravity = pin.Motion(
            -GRAVITY * np.array([sa, sb, math.sqrt(1.0 - sa * sa - sb * sb)]), np.zeros(3))
        self.slope = slope
        self.cross_slope = cross
        self.revision += 1

    # ---------------------------------------------------------------- payload
    def attach_payload(self, payload: Payload | None = None, *, mass=None, com=(0.0, 0.0, 0.0),
                       inertia=(0.0,) * 6):
        """Rigidly attach a payload at the tool frame (mutates the model).

        Give a `Payload`, or `mass` (kg), `com` (m, tool frame) and `inertia`
        (kg·m² about its COM, tool axes); with no argument, the description's
        rated payload.  Replaces any payload already attached.
        """
        if payload is None and mass is None:
            payload = self.description.payload
            if payload is None:
                raise ConfigError(f"{self.description.path.name}: no [payload] is described "
                                  f"and none was given")
        elif payload is None:
            payload = Payload(float(mass), tuple(_finite("com", com, 3)),
                              tuple(_finite("inertia", inertia, 6)))
        if not payload.mass > 0:
            raise ValueError(f"payload mass must be > 0 kg, got {payload.mass}")
        frame = self.model.frames[self.tool_frame_id]
        added = frame.placement.act(_inertia(payload.mass, payload.com, payload.inertia))
        self.model.inertias[self._tool_joint] = self._bare_tool_inertia + added
        self.payload = payload
        self.revision += 1

    @contextlib.contextmanager
    def kept(self):
        """Context in which the payload and the ground slope may be changed; both
        are restored on exit (the model is mutated meanwhile)."""
        payload, slope, cross = self.payload, self.slope, self.cross_slope
        try:
            yield self
        finally:
            self.detach_payload()
            if payload is not None:
                self.attach_payload(payload)
            if (self.slope, self.cross_slope) != (slope, cross):
                self.set_ground_slope(slope, cross)

    def detach_payload(self):
        """Remove the payload (mutates the model); no-op if none attached."""
        self.model.inertias[self._tool_joint] = self._bare_tool_inertia.copy()
        self.payload = None
        self.revision += 1

    def __repr__(self):
        return (f"MobileManipulator({self.name!r}, nv={self.nv}, "
                f"mass={self.total_mass():.2f} kg)")

