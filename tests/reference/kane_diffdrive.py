"""Independent reference: reduced dynamics of a differential-drive mobile manipulator.

The robot is derived from scratch with Kane's method for nonholonomic systems
(Kane & Levinson, *Dynamics: Theory and Applications*, McGraw-Hill 1985,
ch. 6: generalized speeds, nonholonomic partial velocities and Kane's dynamical
equations F̃r + F̃r* = 0 for the independent speeds), carried out by
``sympy.physics.mechanics.KanesMethod``. Nothing from Pinocchio or opspace is
used here, so agreement with opspace is a check between two derivations.

System (world z up, gravity g0 = 9.80665 m/s² along −z, ground z = 0):

- chassis B on the ground, pose (x, y, θ); base origin O below the axle
  midpoint; mass ``base_mass`` at ``base_com`` (base frame), full inertia
  ``base_inertia`` about that COM;
- right / left wheel centres at (0, ∓b, r) in B, wheel angles φ_r, φ_l about
  +B.y, inertia diag(Id, Is, Id) in wheel axes, mass ``wheel_mass``;
- optional rotor of spin inertia J_rotor turning at n·φ̇ relative to B about B.y
  (axis parallel to the axle, no mass, no diameter inertia);
- arm: ``arm_base`` fixed to B at ``mount``; j1 revolute about z at (0, 0, h0);
  j2 prismatic along z at (0, 0, h1); j3 revolute about y at (a2, 0, 0);
  massless tool at (a3, 0, 0) in link3.

Generalized speeds: independent ν = [φ̇_r, φ̇_l, q̇1, q̇2, q̇3]; dependent
(vx, vy, ωz) = base twist in base-frame components. The velocity constraints
are the rolling-without-slip conditions at each wheel's ground contact point C,
v_C = v_centre + ω_wheel × (−r B.z) = 0 (forward component of both wheels,
lateral component of the right wheel; the left lateral one is the same row).
They give vx = r(φ̇_r + φ̇_l)/2, vy = 0, ωz = r(φ̇_r − φ̇_l)/(2b), with
constant coefficients, so the dependent accelerations are A ν̇ exactly.

Result, with g on the left side:

    M(q) ν̇ + c(q, ν) + g(q) = Q,

Q = [wheel torques on each wheel (reaction on the chassis), arm joint efforts
(reaction on the parent link)]; c is the velocity-product vector (g0 = 0,
ν̇ = 0) and g the gravity vector (ν = 0). The map from these Q to Kane's
generalized active forces is computed too and must be the identity
(:func:`generalized_force_map`).
"""

from __future__ import annotations

import functools
import math
import pathlib

import numpy as np
import sympy as sp
from sympy.physics import mechanics as me

GRAVITY = 9.80665
"""Standard gravity, m/s² (the value fixed by the project conventions)."""

ARM_LINKS = ("arm_base", "link1", "link2", "link3")


# ---------------------------------------------------------------------------
# parameters
# ---------------------------------------------------------------------------
def _random_inertia(rng, mass, length_low, length_high):
    """Full inertia [Ixx, Iyy, Izz, Ixy, Ixz, Iyz] about the COM, kg·m².

    Built from a second-moment matrix Σ = R diag(s) Rᵀ (s > 0, R a random
    rotation) as I = tr(Σ) 1 − Σ, so I is positive definite and its principal
    moments satisfy the triangle inequality strictly (they are sums of pairs
    of positive s).
    """
    s = mass * rng.uniform(length_low, length_high, size=3) ** 2
    R, _ = np.linalg.qr(rng.normal(size=(3, 3)))
    sigma = R @ np.diag(s) @ R.T
    inertia = np.trace(sigma) * np.eye(3) - sigma
    return (
        float(inertia[0, 0]), float(inertia[1, 1]), float(inertia[2, 2]),
        float(inertia[0, 1]), float(inertia[0, 2]), float(inertia[1, 2]),
    )


def _signed(rng, low, high):
    """Uniform magnitude in [low, high] with a random sign (never zero)."""
    return float(rng.choice((-1.0, 1.0)) * rng.uniform(low, high))


def random_params(seed):
    """Plausible random parameters of the reference robot.

    Parameters
    ----------
    seed : int
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    dict
        Floats (kg, m, kg·m²) and tuples of floats. Keys: ``base_mass``,
        ``base_com`` (3,), ``base_inertia`` (6,), ``half_track``,
        ``wheel_radius``, ``wheel_mass``, ``wheel_spin_inertia``,
        ``wheel_diameter_inertia``, ``rotor_inertia`` (0.0), ``gear_ratio``
        (1.0), ``mount`` (3,), ``h0``, ``h1``, ``a2``, ``a3`` and, for each
        link of :data:`ARM_LINKS`, ``<link>_mass``, ``<link>_com`` (3,),
        ``<link>_inertia`` (6,). The chassis COM is off the axle and off the
        centre line (cx, cy both nonzero) by construction.
    """
    rng = np.random.default_rng(seed)
    p = {}
    p["base_mass"] = float(rng.uniform(8.0, 30.0))
    p["base_com"] = (
        _signed(rng, 0.02, 0.15),
        _signed(rng, 0.01, 0.08),
        float(rng.uniform(0.1, 0.3)),
    )
    p["base_inertia"] = _random_inertia(rng, p["base_mass"], 0.08, 0.3)
    p["half_track"] = float(rng.uniform(0.15, 0.35))
    p["wheel_radius"] = float(rng.uniform(0.05, 0.15))
    p["wheel_mass"] = float(rng.uniform(0.5, 3.0))
    # Wheel second moments: radial s_r (= ∫x² dm = ∫z² dm) and axial s_a;
    # Is = 2 s_r, Id = s_r + s_a, hence Is < 2 Id (triangle inequality).
    s_r = p["wheel_mass"] * p["wheel_radius"] ** 2 * float(rng.uniform(0.15, 0.25))
    s_a = p["wheel_mass"] * float(rng.uniform(0.01, 0.03)) ** 2
    p["wheel_spin_inertia"] = 2.0 * s_r
    p["wheel_diameter_inertia"] = s_r + s_a
    p["rotor_inertia"] = 0.0
    p["gear_ratio"] = 1.0
    p["mount"] = (
        float(rng.uniform(0.05, 0.3)),
        _signed(rng, 0.01, 0.1),
        float(rng.uniform(0.2, 0.5)),
    )
    p["h0"] = float(rng.uniform(0.05, 0.2))
    p["h1"] = float(rng.uniform(0.05, 0.3))
    p["a2"] = float(rng.uniform(0.1, 0.5))
    p["a3"] = float(rng.uniform(0.05, 0.4))
    for link in ARM_LINKS:
        mass = float(rng.uniform(0.5, 5.0))
        p[f"{link}_mass"] = mass
        p[f"{link}_com"] = tuple(float(v) for v in rng.uniform(-0.1, 0.1, size=3))
        p[f"{link}_inertia"] = _random_inertia(rng, mass, 0.02, 0.15)
    return p


def _freeze(params):
    """Hashable, order-independent version of a parameter dict."""
    return tuple(
        sorted(
            (k, tuple(float(x) for x in v) if np.ndim(v) else float(v))
            for k, v in params.items()
        )
    )


# ---------------------------------------------------------------------------
# symbolic derivation
# ---------------------------------------------------------------------------
def _inertia_dyadic(frame, values):
    """Dyadic of I = [[Ixx,Ixy,Ixz],[Ixy,Iyy,Iyz],[Ixz,Iyz,Izz]] in `frame`."""
    ixx, iyy, izz, ixy, ixz, iyz = (sp.Float(v) for v in values)
    return me.inertia(frame, ixx, iyy, izz, ixy, iyz, ixz)


def _vec(frame, xyz):
    return sum((sp.Float(c) * e for c, e in zip(xyz, (frame.x, frame.y, frame.z))),
               me.Vector(0))


@functools.lru_cache(maxsize=8)
def _derive(frozen):
    """Kane's equations of the reduced system, lambdified.

    Returns (M_fun, cg_fun, B_fun); each takes
    (θ, φ_r, φ_l, q1, q2, q3, ν0..ν4, g0) and returns M (5, 5), c + g (5,)
    and the generalized-force map B (5, 5) with F̃r = B Q + (gravity part).
    """
    p = dict(frozen)
    F = sp.Float
    b, r = F(p["half_track"]), F(p["wheel_radius"])
    g0 = sp.Symbol("g0")

    x, y, th, phr, phl, q1, q2, q3 = me.dynamicsymbols("x y theta phi_r phi_l q1 q2 q3")
    ur, ul, u1, u2, u3 = me.dynamicsymbols("u_r u_l u1 u2 u3")
    vx, vy, wz = me.dynamicsymbols("v_x v_y omega_z")
    Tr, Tl, tau1, f2, tau3 = sp.symbols("T_r T_l tau1 f2 tau3")

    N = me.ReferenceFrame("N")
    B = N.orientnew("B", "Axis", (th, N.z))
    B.set_ang_vel(N, wz * B.z)
    Wr = B.orientnew("Wr", "Axis", (phr, B.y))
    Wr.set_ang_vel(B, ur * B.y)
    Wl = B.orientnew("Wl", "Axis", (phl, B.y))
    Wl.set_ang_vel(B, ul * B.y)
    L1 = B.orientnew("L1", "Axis", (q1, B.z))
    L1.set_ang_vel(B, u1 * B.z)
    L2 = L1.orientnew("L2", "Axis", (sp.S.Zero, L1.z))
    L2.set_ang_vel(L1, 0 * L1.z)
    L3 = L2.orientnew("L3", "Axis", (q3, L2.y))
    L3.set_ang_vel(L2, u3 * L2.y)

    O = me.Point("O")
    O.set_pos(me.Point("world_origin"), x * N.x + y * N.y)
    O.set_vel(N, vx * B.x + vy * B.y)

    def fixed_point(name, parent, frame, offset):
        P = parent.locatenew(name, offset)
        P.v2pt_theory(parent, N, frame)
        return P

    Cr = fixed_point("Cr", O, B, -b * B.y + r * B.z)
    Cl = fixed_point("Cl", O, B, b * B.y + r * B.z)
    Gb = fixed_point("Gb", O, B, _vec(B, p["base_com"]))
    Pm = fixed_point("Pm", O, B, _vec(B, p["mount"]))
    G0 = fixed_point("G0", Pm, B, _vec(B, p["arm_base_com"]))
    O1 = fixed_point("O1", Pm, B, F(p["h0"]) * B.z)
    G1 = fixed_point("G1", O1, L1, _vec(L1, p["link1_com"]))
    O2 = O1.locatenew("O2", (F(p["h1"]) + q2) * L1.z)
    O2.set_vel(L1, u2 * L1.z)
    O2.v1pt_theory(O1, N, L1)
    G2 = fixed_point("G2", O2, L2, _vec(L2, p["link2_com"]))
    O3 = fixed_point("O3", O2, L2, F(p["a2"]) * L2.x)
    G3 = fixed_point("G3", O3, L3, _vec(L3, p["link3_com"]))

    mw, Is, Id = F(p["wheel_mass"]), F(p["wheel_spin_inertia"]), F(p["wheel_diameter_inertia"])
    bodies = [
        me.RigidBody("chassis", Gb, B, F(p["base_mass"]), (_inertia_dyadic(B, p["base_inertia"]), Gb)),
        me.RigidBody("wheel_r", Cr, Wr, mw, (me.inertia(Wr, Id, Is, Id), Cr)),
        me.RigidBody("wheel_l", Cl, Wl, mw, (me.inertia(Wl, Id, Is, Id), Cl)),
    ]
    for name, G, frame in (("arm_base", G0, B), ("link1", G1, L1),
                           ("link2", G2, L2), ("link3", G3, L3)):
        bodies.append(me.RigidBody(name, G, frame, F(p[f"{name}_mass"]),
                                   (_inertia_dyadic(frame, p[f"{name}_inertia"]), G)))
    if p["rotor_inertia"] != 0.0:
        # Rotor: spin inertia only, turning at n φ̇ relative to the chassis.
        n, J = F(p["gear_ratio"]), F(p["rotor_inertia"])
        for name, C, u in (("rotor_r", Cr, ur), ("rotor_l", Cl, ul)):
            R = B.orientnew(name, "Axis", (sp.S.Zero, B.y))
            R.set_ang_vel(B, n * u * B.y)
            bodies.append(me.RigidBody(name, C, R, sp.S.Zero, (J * (R.y | R.y), C)))

    loads = [(body.masscenter, -body.mass * g0 * N.z) for body in bodies if body.mass != 0]
    loads += [
        # motor torque on each wheel, reaction on the chassis
        (Wr, Tr * B.y), (B, -Tr * B.y),
        (Wl, Tl * B.y), (B, -Tl * B.y),
        # arm joint efforts, reactions on the parent link (same line of action for j2)
        (L1, tau1 * B.z), (B, -tau1 * B.z),
        (O2, f2 * L1.z), (O1, -f2 * L1.z),
        (L3, tau3 * L2.y), (L2, -tau3 * L2.y),
    ]

    # Rolling without slip at each contact point C = centre − r B.z.
    v_cr = Cr.vel(N) + Wr.ang_vel_in(N).cross(-r * B.z)
    v_cl = Cl.vel(N) + Wl.ang_vel_in(N).cross(-r * B.z)
    constraints = [v_cr.dot(B.x), v_cr.dot(B.y), v_cl.dot(B.x)]

    u_ind = [ur, ul, u1, u2, u3]
    u_dep = [vx, vy, wz]
    kd = [
        x.diff() - (vx * sp.cos(th) - vy * sp.sin(th)),
        y.diff() - (vx * sp.sin(th) + vy * sp.cos(th)),
        th.diff() - wz,
        phr.diff() - ur, phl.diff() - ul,
        q1.diff() - u1, q2.diff() - u2, q3.diff() - u3,
    ]
    kane = me.KanesMethod(N, q_ind=[x, y, th, phr, phl, q1, q2, q3], u_ind=u_ind,
                          kd_eqs=kd, u_dependent=u_dep, velocity_constraints=constraints)
    kane.kanes_equations(bodies, loads)

    # u_dep = A u_ind; A is constant, so u̇_dep = A ν̇ exactly.
    A_mat, rest = sp.linear_eq_to_matrix(constraints, u_dep)
    sol = A_mat.LUsolve(rest)
    udep_sub = {ud: sp.expand(s) for ud, s in zip(u_dep, sol)}
    A = sp.Matrix([[sp.diff(udep_sub[ud], ui) for ui in u_ind] for ud in u_dep])
    assert all(not e.free_symbols and not e.atoms(sp.Function) for e in A), A
    T = sp.eye(5).col_join(A)

    MM = kane.mass_matrix          # (8, 8): 5 Kane rows, 3 constraint rows
    FF = me.msubs(kane.forcing, udep_sub)
    M_red = MM[:5, :] * T
    rhs = FF[:5, :]                # M_red ν̇ = rhs = F̃r − (velocity terms)
    constraint_rows = MM[5:, :] * T
    assert all(abs(float(e)) < 1e-12 for e in constraint_rows), constraint_rows
    assert all(abs(float(sp.sympify(e))) < 1e-12 for e in me.msubs(FF[5:, :], udep_sub))

    Qs = [Tr, Tl, tau1, f2, tau3]
    B_map = rhs.jacobian(Qs)
    cg = -rhs.subs({s: 0 for s in Qs})

    th_s, phr_s, phl_s, q1_s, q2_s, q3_s = sp.symbols("th phr phl q1s q2s q3s")
    nu_s = sp.symbols("nu0:5")
    plain = dict(zip([th, phr, phl, q1, q2, q3], [th_s, phr_s, phl_s, q1_s, q2_s, q3_s]))
    plain.update(zip(u_ind, nu_s))
    args = [th_s, phr_s, phl_s, q1_s, q2_s, q3_s, *nu_s, g0]

    def make(expr):
        return sp.lambdify(args, me.msubs(expr, plain), modules="numpy", cse=True)

    return make(M_red), make(cg), make(B_map)


def _args(params, theta, q_arm, nu, wheels=(0.0, 0.0)):
    q_arm = np.asarray(q_arm, dtype=float)
    nu = np.asarray(nu, dtype=float)
    if q_arm.shape != (3,):
        raise ValueError(f"`q_arm` must have shape (3,), got {q_arm.shape}")
    if nu.shape != (5,):
        raise ValueError(f"`nu` must have shape (5,), got {nu.shape}")
    return [float(theta), float(wheels[0]), float(wheels[1]), *q_arm, *nu]


def reference_terms(params, theta, q_arm, nu):
    """M, c, g of the reference robot from Kane's method.

    M(q) ν̇ + c(q, ν) + g(q) = Q (g on the left side).

    Parameters
    ----------
    params : dict      from :func:`random_params` (or the same keys)
    theta : float      base heading, rad (the terms do not depend on it, nor
                       on x, y or the wheel angles; it is passed to show that)
    q_arm : array_like, shape (3,)   [q1 rad, q2 m, q3 rad]
    nu : array_like, shape (5,)      [φ̇_r, φ̇_l, q̇1, q̇2, q̇3], rad/s and m/s

    Returns
    -------
    M : ndarray, shape (5, 5)   kg·m², kg·m, kg
    c : ndarray, shape (5,)     velocity-product terms, N·m / N
    g : ndarray, shape (5,)     gravity terms, N·m / N
    """
    M_fun, cg_fun, _ = _derive(_freeze(params))
    a = _args(params, theta, q_arm, nu)
    a0 = _args(params, theta, q_arm, np.zeros(5))
    M = np.array(M_fun(*a0, GRAVITY), dtype=float).reshape(5, 5)
    c = np.array(cg_fun(*a, 0.0), dtype=float).reshape(5)
    g = np.array(cg_fun(*a0, GRAVITY), dtype=float).reshape(5)
    return M, c, g


def generalized_force_map(params, theta, q_arm):
    """B (5, 5) with Kane's generalized active forces F̃r = B Q (+ gravity).

    Q = [T_r, T_l, τ1, f2, τ3]: wheel motor torques acting between chassis
    and wheel, arm efforts acting between parent and child. Expected: B = 1.
    """
    _, _, B_fun = _derive(_freeze(params))
    B = B_fun(*_args(params, theta, q_arm, np.zeros(5)), GRAVITY)
    return np.array(B, dtype=float).reshape(5, 5)


# ---------------------------------------------------------------------------
# description files for opspace
# ---------------------------------------------------------------------------
def _f(v):
    """Shortest round-trip text of a float (exact on reading back)."""
    return repr(float(v))


def _xyz(v):
    return " ".join(_f(c) for c in v)


def _toml_list(v):
    return "[" + ", ".join(_f(c) for c in v) + "]"


def _urdf_link(name, params):
    mass = params[f"{name}_mass"]
    ixx, iyy, izz, ixy, ixz, iyz = (_f(v) for v in params[f"{name}_inertia"])
    return (
        f'  <link name="{name}">\n'
        f"    <inertial>\n"
        f'      <origin xyz="{_xyz(params[f"{name}_com"])}" rpy="0 0 0"/>\n'
        f'      <mass value="{_f(mass)}"/>\n'
        f'      <inertia ixx="{ixx}" ixy="{ixy}" ixz="{ixz}" iyy="{iyy}" iyz="{iyz}" izz="{izz}"/>\n'
        f"    </inertial>\n"
        f"  </link>\n"
    )


def _urdf_joint(name, kind, parent, child, xyz, axis=None, limit=None):
    text = (f'  <joint name="{name}" type="{kind}">\n'
            f'    <parent link="{parent}"/>\n    <child link="{child}"/>\n'
            f'    <origin xyz="{_xyz(xyz)}" rpy="0 0 0"/>\n')
    if axis is not None:
        text += f'    <axis xyz="{axis}"/>\n'
    if limit is not None:
        text += (f'    <limit lower="{_f(limit[0])}" upper="{_f(limit[1])}" '
                 f'effort="1000.0" velocity="100.0"/>\n')
    return text + "  </joint>\n"


def arm_urdf(params):
    """URDF text of the arm chain arm_base → j1 (z) → j2 (prismatic z) → j3 (y) → tool."""
    revolute = (-2.0 * math.pi, 2.0 * math.pi)
    return (
        '<?xml version="1.0"?>\n<robot name="kane_reference_arm">\n'
        + "".join(_urdf_link(name, params) for name in ARM_LINKS)
        + '  <link name="tool"/>\n'
        + _urdf_joint("j1", "revolute", "arm_base", "link1", (0.0, 0.0, params["h0"]), "0 0 1", revolute)
        + _urdf_joint("j2", "prismatic", "link1", "link2", (0.0, 0.0, params["h1"]), "0 0 1", (-1.0, 1.0))
        + _urdf_joint("j3", "revolute", "link2", "link3", (params["a2"], 0.0, 0.0), "0 1 0", revolute)
        + _urdf_joint("tool_joint", "fixed", "link3", "tool", (params["a3"], 0.0, 0.0))
        + "</robot>\n"
    )


def robot_toml(params):
    """robot.toml text in the project's description format (arm in arm.urdf)."""
    return f"""[robot]
name = "kane reference"
arm_urdf = "arm.urdf"
tool_frame = "tool"

[base]
mass = {_f(params["base_mass"])}
com = {_toml_list(params["base_com"])}
inertia = {_toml_list(params["base_inertia"])}
half_track = {_f(params["half_track"])}
wheel_radius = {_f(params["wheel_radius"])}

[wheel]
mass = {_f(params["wheel_mass"])}
spin_inertia = {_f(params["wheel_spin_inertia"])}
diameter_inertia = {_f(params["wheel_diameter_inertia"])}

[drive]
rotor_inertia = {_f(params.get("rotor_inertia", 0.0))}
gear_ratio = {_f(params.get("gear_ratio", 1.0))}
efficiency = 1.0

[mount]
xyz = {_toml_list(params["mount"])}
rpy = [0.0, 0.0, 0.0]

[[caster]]
position = [0.3, 0.0]
"""


def write_description(params, directory):
    """Write ``arm.urdf`` and ``robot.toml`` of the reference robot.

    Parameters
    ----------
    params : dict                 from :func:`random_params`
    directory : str or Path       created if missing

    Returns
    -------
    pathlib.Path   path of robot.toml
    """
    directory = pathlib.Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    (directory / "arm.urdf").write_text(arm_urdf(params))
    path = directory / "robot.toml"
    path.write_text(robot_toml(params))
    return path
