"""The compiled simulation kernel, `opspace._kernel`, when it can be used.

`opspace/_kernel.cpp` is the simulation's inner loop (the reduced forward
dynamics, the RK4 and semi-implicit Euler steps, friction and rolling
resistance) written against Pinocchio's C++ API; `opspace.simulate` keeps the
same loop in NumPy as its reference, and the tests hold the two to round-off.
The kernel is built when the package is installed (hatch_build.py) if a C++
compiler is found; it is used only when it was built against the Pinocchio
version that is imported now (otherwise its binary interface may differ).
"""

from __future__ import annotations

import functools
import warnings

import numpy as np
import pinocchio as pin

__all__ = ["available", "frame_placements", "inverse_dynamics_kernel", "kernel_controller",
           "kernel_plant", "kernel_terms", "output_layout", "target_layout"]


@functools.cache
def _module():
    try:
        from . import _kernel
    except ImportError:
        return None
    if _kernel.PINOCCHIO_VERSION != pin.__version__:
        warnings.warn(f"opspace's compiled simulation kernel was built for Pinocchio "
                      f"{_kernel.PINOCCHIO_VERSION}, but {pin.__version__} is imported: "
                      "the NumPy loop is used instead (reinstall opspace to rebuild it)",
                      RuntimeWarning, stacklevel=3)
        return None
    return _kernel


def available():
    """True when the compiled kernel is built and matches the imported Pinocchio."""
    return _module() is not None


def kernel_plant(S, locked, Fk, Fs, fv, frictional, lo, hi, qi, A_pinv, casters, c_rr, r):
    """A compiled `Plant` (see _kernel.cpp) from its arrays, or None if unavailable.

    S (nv_pin, nv) reduction map; locked (nv,) 1.0 for a coordinate held still;
    Fk, Fs, fv (nv,) kinetic, static and viscous friction (zeros: friction off);
    frictional (nv,) 1.0 for a coordinate that can stick; lo, hi (nv,) position
    stops and qi (nv,) their index in q (-1: none); A_pinv (k, 3) static
    contact-load rows; casters (k − 2, 4) ground-velocity rows; c_rr rolling
    resistance coefficient (0: none); r wheel radius, m.  `opspace.dynamics`
    assembles them from a robot (`compiled_plant`).
    """
    k = _module()
    if k is None:
        return None
    f = np.asarray
    return k.Plant(f(S, float), f(locked, float), f(Fk, float), f(Fs, float), f(fv, float),
                   f(frictional, float), f(lo, float), f(hi, float), f(qi, float),
                   f(A_pinv, float), f(casters, float).reshape(-1, 4), float(c_rr), float(r))


def _friction_model(k, friction):
    """The kernel's `FrictionModel`, its fields set by name from a dict (the keys
    of `opspace.dynamics.friction_model`)."""
    m = k.FrictionModel()
    m.coulomb = np.asarray(friction["coulomb"], float)
    m.viscous = np.asarray(friction["viscous"], float)
    m.contact_rows = np.asarray(friction["contact_rows"], float)
    m.caster_rows = np.asarray(friction["caster_rows"], float).reshape(-1, 4)
    m.rolling_resistance = float(friction["rolling_resistance"])
    m.wheel_radius = float(friction["wheel_radius"])
    return m


def kernel_controller(S, GG, q0, limit, rows, options, friction):
    """A compiled `Controller` (see _kernel.cpp), or None if unavailable.

    options: a dict of the kernel's `ControllerOptions` fields, set by name
    (frame_id, whole_body, angular, posture, friction_feedforward,
    wheel_radius, half_track, wheel_gain, friction_velocity, damping2);
    friction: the friction model's named arrays (`opspace.dynamics.friction_model`).
    """
    k = _module()
    if k is None:
        return None
    o = k.ControllerOptions()
    for name, value in options.items():
        if not hasattr(o, name):
            raise AttributeError(f"the kernel's ControllerOptions has no field {name!r}")
        setattr(o, name, value)
    return k.Controller(np.asarray(S, float), np.asarray(GG, float), np.asarray(q0, float),
                        np.asarray(limit, float), np.asarray(rows, float), o,
                        _friction_model(k, friction))


def target_layout():
    """{field: (offset, size)} of the compiled command's target vector, from the
    kernel (its only description), or None if unavailable."""
    k = _module()
    return None if k is None else {n: (o, s) for n, o, s in k.Controller.target_layout()}


def output_layout(nv, k_rows):
    """[(field, offset, rows, cols)] of the compiled command's output buffer, from
    the kernel (its only description), or None if unavailable."""
    k = _module()
    return None if k is None else list(k.Controller.output_layout(nv, k_rows))


def kernel_terms(S, friction):
    """The compiled `Terms` (M_r, h_r, g_r, J_r, J̇ν, friction, rolling, contact
    loads one at a time; see _kernel.cpp), or None if unavailable."""
    k = _module()
    if k is None:
        return None
    return k.Terms(np.asarray(S, float), _friction_model(k, friction))


def frame_placements(robot, qs, frame_id):
    """World position (n, 3) and rotation (n, 3, 3) of a frame at each of the
    configurations qs (n, nq), in one compiled call; None if unavailable."""
    k = _module()
    if k is None:
        return None
    qs = np.ascontiguousarray(qs, dtype=float)
    out = np.empty((len(qs), 12))
    k.frame_placements(robot.model, robot.model.createData(), qs.ravel(), int(frame_id),
                       out.ravel())
    return out[:, :3].copy(), out[:, 3:].reshape(-1, 3, 3).copy()


def inverse_dynamics_kernel(S):
    """The compiled Q = Sᵀ RNEA(q, S ν, S ν̇) for the reduction map S, or None
    (`opspace.dynamics` keeps one per robot in its workspace)."""
    k = _module()
    if k is None:
        return None
    return k.InverseDynamics(np.asarray(S, float))
