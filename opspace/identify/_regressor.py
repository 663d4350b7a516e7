"""The dynamics of the reduced model, linear in its parameters.

Rigid-body dynamics are linear in each body's ten inertial parameters
π_j = [m, m c_x, m c_y, m c_z, I_xx, I_xy, I_yy, I_xz, I_yz, I_zz] (inertia
about the joint frame's origin, in its axes), τ_pin = Y(q, v, a) π
(Atkeson, An & Hollerbach, "Estimation of inertial parameters of manipulator
loads and links", IJRR 5(3), 1986; Pinocchio's `computeJointTorqueRegressor`).
With the rolling constraints v = S ν, a = S ν̇ (S constant) the reduced efforts
are

    Q = Sᵀ Y(q, Sν, Sν̇) π  +  Sᵀ diag(S ν̇) a_full        (armature, per full joint)
        + diag(sign ν) f_C + diag(ν) f_v                   (Coulomb, viscous)
        + C_rr φ_rr(q, ν)                                   (rolling resistance)
        + Sᵀ Y_tool(q, Sν, Sν̇) π_L · held                   (payload, when held)

so Q = W(q, ν, ν̇) θ with θ the stacked parameters.  φ_rr is the rolling
resistance of the description at C_rr = 1, with its static loads (the prior's
masses): a column only when the description has C_rr > 0.  Gravity is the
model's (9.80665 m/s², flat ground).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pinocchio as pin

from ..dynamics import friction

__all__ = ["ParameterSet", "parameter_set", "regressor", "regressor_rows"]

INERTIAL = ("m", "mx", "my", "mz", "Ixx", "Ixy", "Iyy", "Ixz", "Iyz", "Izz")
UNITS = ("kg", "kg·m", "kg·m", "kg·m", "kg·m²", "kg·m²", "kg·m²", "kg·m²", "kg·m²", "kg·m²")


@dataclass(frozen=True, eq=False)
class ParameterSet:
    """The columns of W: names (p,), units (p,), prior values θ₀ (p,) from the
    description, and the index ranges of each kind.

    bodies: body names (joint of the full model: "base", the wheels, arm joints)
    inertial: slice of the 10 × bodies inertial parameters
    armature: (full velocity index, column) per armature column
    coulomb, viscous: slices (one per reduced coordinate)
    rolling: column of C_rr or None; payload: slice of the 10 payload columns or None
    tool_joint: the full model's joint carrying the tool (and payload)
    spread (p,): how far each parameter may plausibly be from its prior (same
    unit), for the minimum change of `_estimate` (common practice, no source:
    masses ±30 % + 0.1 kg, first moments ±0.05 kg·m + 30 %, inertias ±30 % +
    0.01 kg·m², armature ±5 % (data sheet), friction ±100 % + 0.1, rolling
    resistance ±50 % + 0.002)
    """

    names: tuple
    units: tuple
    prior: np.ndarray
    bodies: tuple
    inertial: slice
    armature: tuple
    coulomb: slice
    viscous: slice
    rolling: int | None
    payload: slice | None
    tool_joint: int
    spread: np.ndarray = None

    @property
    def size(self):
        return len(self.names)


def parameter_set(robot, *, payload=False):
    """The parameters of `robot`'s reduced model (see the module docstring).

    payload: add 10 columns for a payload held at the tool (prior: the
    description's [payload], else zeros).
    """
    model = robot.model
    bodies = [model.names[j] for j in range(1, model.njoints)]
    bodies[0] = "base"
    names, units, prior = [], [], []
    for j, body in enumerate(bodies, start=1):
        names += [f"{body}.{p}" for p in INERTIAL]
        units += UNITS
        prior += robot_inertia(robot, j).toDynamicParameters().tolist()
    inertial = slice(0, len(names))
    armature = []
    for iv in range(3, model.nv):
        joint = next(j for j in range(1, model.njoints) if model.idx_vs[j] == iv)
        armature.append((iv, len(names)))
        names.append(f"{model.names[joint]}.armature")
        units.append("kg·m² or kg")
        prior.append(float(model.armature[iv]))
    c0 = len(names)
    names += [f"{n}.coulomb" for n in robot.coordinate_names]
    units += ["N·m or N"] * robot.nv
    prior += list(map(float, robot.coulomb))
    v0 = len(names)
    names += [f"{n}.viscous" for n in robot.coordinate_names]
    units += ["N·m·s/rad or N·s/m"] * robot.nv
    prior += list(map(float, robot.viscous))
    rolling = None
    if robot.rolling_resistance > 0.0:
        rolling = len(names)
        names.append("rolling_resistance")
        units.append("1")
        prior.append(float(robot.rolling_resistance))
    tool_joint = model.frames[robot.tool_frame_id].parentJoint
    pay = None
    if payload:
        pay = slice(len(names), len(names) + 10)
        names += [f"payload.{p}" for p in INERTIAL]
        units += UNITS
        p = robot.description.payload
        prior += (_payload_inertia(robot, p).toDynamicParameters().tolist() if p is not None
                  else [0.0] * 10)
    prior = np.array(prior)
    return ParameterSet(tuple(names), tuple(units), prior, tuple(bodies), inertial,
                        tuple(armature), slice(c0, c0 + robot.nv), slice(v0, v0 + robot.nv),
                        rolling, pay, tool_joint, _spread(names, prior))


def _spread(names, prior):
    """Plausible distance of each parameter from its prior (see ParameterSet)."""
    out = np.empty(len(names))
    for i, (name, v) in enumerate(zip(names, prior)):
        kind = name.rsplit(".", 1)[-1]
        if kind == "m":
            out[i] = 0.3 * abs(v) + 0.1
        elif kind in ("mx", "my", "mz"):
            out[i] = 0.3 * abs(v) + 0.05
        elif kind.startswith("I"):
            out[i] = 0.3 * abs(v) + 0.01
        elif kind == "armature":
            out[i] = 0.05 * abs(v) + 1e-6
        elif kind == "rolling_resistance":
            out[i] = 0.5 * abs(v) + 0.002
        else:                                   # coulomb, viscous
            out[i] = abs(v) + 0.1
    return out


def robot_inertia(robot, joint):  # noqa: D401
    """The body inertia of a joint of the model without any payload attached."""
    if joint == robot.model.frames[robot.tool_frame_id].parentJoint and robot.payload is not None:
        return robot.model.inertias[joint] - _payload_inertia(robot, robot.payload)
    return robot.model.inertias[joint].copy()


def _payload_inertia(robot, payload):
    """A payload's spatial inertia in its joint's frame (as attach_payload places it)."""
    from ..description import inertia_matrix

    frame = robot.model.frames[robot.tool_frame_id]
    I = pin.Inertia(float(payload.mass), np.asarray(payload.com, float),
                    inertia_matrix(payload.inertia))
    return frame.placement.act(I)


def regressor_rows(robot, params, q, nu, nu_dot, held=False, sign=None):
    """W (nv, p) at one state: Q = W θ (see the module docstring); `sign`
    replaces sign(ν) in the Coulomb columns (a filtered sign, `identify`)."""
    model, data, S = robot.model, robot.data, robot.S
    v, a = S.dot(nu), S.dot(nu_dot)
    Y = pin.computeJointTorqueRegressor(model, data, q, v, a)
    St = robot.St
    W = np.zeros((robot.nv, params.size))
    W[:, params.inertial] = St.dot(Y)
    for iv, col in params.armature:
        W[:, col] = S[iv] * a[iv]
    idx = np.arange(robot.nv)
    W[idx, params.coulomb.start + idx] = np.sign(nu) if sign is None else sign
    W[idx, params.viscous.start + idx] = nu
    if params.rolling is not None:
        f_C = robot.coulomb * np.sign(nu) + robot.viscous * nu
        W[:, params.rolling] = (friction(robot, q, nu) - f_C) / robot.rolling_resistance
    if params.payload is not None and held:
        j = params.tool_joint
        W[:, params.payload] = W[:, params.inertial][:, 10 * (j - 1):10 * j]
    return W


def regressor(robot, params, qs, nus, nu_dots, held=None, signs=None):
    """Stacked W (n nv, p), sample-major (rows i nv .. i nv + nv − 1 are sample i);
    signs (n, nv) or None: see `regressor_rows`."""
    n = len(qs)
    held = np.zeros(n, bool) if held is None else np.asarray(held, bool)
    W = np.empty((n * robot.nv, params.size))
    # Y is kinematic: the payload enters through its own columns; only the
    # rolling column's static loads see it (the prior payload, where held)
    with robot.kept():
        for flag in (False, True):
            if flag and robot.description.payload is not None:
                robot.attach_payload()
            else:
                robot.detach_payload()
            for i in np.nonzero(held == flag)[0]:
                W[i * robot.nv:(i + 1) * robot.nv] = regressor_rows(
                    robot, params, qs[i], nus[i], nu_dots[i], flag,
                    None if signs is None else signs[i])
    return W
