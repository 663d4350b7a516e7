"""Drive figures per wheel and motor-and-gearbox candidate checks.

Input: per drive wheel, sampled over one duty cycle, the torque τ_out that the
gearbox output delivers to the wheel (N·m, from inverse dynamics without the
rotor), the wheel speed φ̇ (rad/s) and acceleration φ̈ (rad/s²): a
`WheelDuty`, arrays of shape (n,) for one wheel or (n, w) for w wheels (time
first, like `CycleEvaluation`).

Motor side (common practice, no source)
---------------------------------------
Gear ratio G (motor speed / wheel speed), gearbox efficiency η, and
J_m = J_rotor + J_gearbox input, kg·m² at the motor shaft::

    ω_m = G φ̇                                                            (1)
    T_m = J_m G φ̈ + τ_out / (G η)    if τ_out φ̇ >= 0  (the drive delivers power)
    T_m = J_m G φ̈ + τ_out η / G      if τ_out φ̇ <  0  (the wheel back-drives it)  (2)

(2) is the power balance of a gearbox that loses the share 1 − η of the power
flowing through it in either direction: driving, τ_out φ̇ = η T ω_m; back-driven,
−T ω_m = η (−τ_out φ̇), with T = T_m − J_m G φ̈ the torque the rotor passes on.
A holding torque at standstill (φ̇ = 0) counts as driving (the larger motor
torque).  The gearbox's losses are all in η; wheel friction and rolling
resistance are already in τ_out.

Power and energy::

    P_m = T_m ω_m                               mechanical, at the motor shaft  (3)
    I = T_m / k_t,   P_e = T_m ω_m + I² R       electrical, with k_t and R      (4)
    E = ∫ max(P, 0) dt,   ρ = −∫ min(P, 0) dt / E                              (5)

(4) is Ohm's and Joule's laws for a DC motor (V = R I + k_t ω_m, P_e = V I):
copper losses only, no iron, driver or battery losses.  P in (5) is P_e when
the motor gives both k_t and R, else P_m (`power_basis` says which).  E is the
energy drawn per cycle, ρ the share of it that could be regenerated (before the
driver's and battery's losses; ρ = 0 when E = 0).  Integrals are the trapezoid
rule on the sample grid (clipping at a sign change between samples is
approximate to first order in the step).

RMS torque (common practice, no source)::

    RMS = sqrt(∫ T² dt / T_c)                    over one cycle of duration T_c   (6)
    D = n T_c / 3600 <= 1,  RMS_thermal = RMS sqrt(D)                            (7)

with n cycles per hour; the motor is taken at zero torque while parked between
cycles (a brake, not the motor, holds the robot), and the motor's thermal time
constant long against the cycle.  Without n the cycles run back to back, D = 1.

The candidate checks and ratio sweeps built on these figures are in
`opspace.sizing._candidates`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .._common import nonnegative as _nonnegative
from .._common import positive as _positive
from .._common import quantity as _quantity
from .._common import real_array as _real
from .._common import trapezoid_weights

__all__ = [
    "DriveFigures",
    "WheelDuty",
    "cycle_energy",
    "cycle_rms",
    "drive_figures",
    "duty_factor",
    "electrical_power",
    "inertia_matching_ratio",
    "motor_torque",
    "thermal_rms",
]

SECONDS_PER_HOUR = 3600.0
DIMENSIONLESS = "1"


# --------------------------------------------------------------------------- validation

def _service_factor(s):
    s = _positive("service_factor", s)
    if s < 1.0:
        raise ValueError(f"`service_factor` must be >= 1, got {s:g}")
    return s


def _scalar_or_array(a):
    """Per-wheel figures: a float for one wheel (1-D input), else an array (w,)."""
    return float(a) if np.ndim(a) == 0 else a


# --------------------------------------------------------------------------- the duty

@dataclass(frozen=True, eq=False)
class WheelDuty:
    """What the gearbox output must deliver to each drive wheel over one cycle.

    Attributes
    ----------
    t : ndarray, shape (n,)              sample times, s, non-decreasing (a repeated
                                         instant marks a jump), t[-1] > t[0]
    torque : ndarray, shape (n,) or (n, w)   τ_out, N·m, gearbox output on the wheel
    speed : ndarray, same shape          φ̇, rad/s
    acceleration : ndarray, same shape   φ̈, rad/s²
    cycles_per_hour : float or None      n for the thermal RMS (7); None: back to back
    wheels : tuple of str                a label per wheel (default "wheel 1", ...)
    """

    t: np.ndarray
    torque: np.ndarray
    speed: np.ndarray
    acceleration: np.ndarray
    cycles_per_hour: float | None = None
    wheels: tuple[str, ...] | None = None

    def __post_init__(self):
        t = _real("t", self.t)
        if t.ndim != 1 or t.size < 2:
            raise ValueError(f"`t` must have shape (n,) with n >= 2, got {t.shape}")
        if np.any(np.diff(t) < 0.0) or t[-1] <= t[0]:
            raise ValueError("`t` must be non-decreasing with t[-1] > t[0]")
        arrays = {}
        for name in ("torque", "speed", "acceleration"):
            a = _real(name, getattr(self, name))
            if a.ndim not in (1, 2) or a.shape[0] != t.size:
                raise ValueError(f"`{name}` must have shape ({t.size},) or ({t.size}, w), "
                                 f"got {a.shape}")
            arrays[name] = a
        shapes = {a.shape for a in arrays.values()}
        if len(shapes) != 1:
            raise ValueError(f"`torque`, `speed` and `acceleration` must have the same shape, "
                             f"got {[a.shape for a in arrays.values()]}")
        w = 1 if arrays["torque"].ndim == 1 else arrays["torque"].shape[1]
        if self.cycles_per_hour is not None:
            n_c = _positive("cycles_per_hour", self.cycles_per_hour)
            duty_factor(float(t[-1] - t[0]), n_c)  # raises when the cycles do not fit
            object.__setattr__(self, "cycles_per_hour", n_c)
        wheels = self.wheels
        if wheels is None:
            wheels = ("wheel",) if arrays["torque"].ndim == 1 else tuple(
                f"wheel {i + 1}" for i in range(w))
        wheels = tuple(str(x) for x in wheels)
        if len(wheels) != w:
            raise ValueError(f"`wheels` must give {w} labels, got {wheels!r}")
        for name, a in (("t", t), *arrays.items()):
            a.setflags(write=False)
            object.__setattr__(self, name, a)
        object.__setattr__(self, "wheels", wheels)

    @property
    def n_wheels(self):
        return len(self.wheels)

    @property
    def cycle_time(self):
        """T_c = t[-1] − t[0], s."""
        return float(self.t[-1] - self.t[0])

    @property
    def duty_factor(self):
        """D = n T_c / 3600 (7), 1 when cycles_per_hour is None."""
        return duty_factor(self.cycle_time, self.cycles_per_hour)

    @cached_property
    def _weights(self):
        """Trapezoid weights c_i with ∫ f dt ≈ Σ c_i f_i, shape (n,)."""
        return trapezoid_weights(self.t)

    def _b(self, eta):
        """`_through_gearbox` as (n, w), cached per efficiency (sweeps reuse it)."""
        cache = self.__dict__.setdefault("_b_cache", {})
        if eta not in cache:
            tau, phi_dot, _ = self._2d
            cache[eta] = _through_gearbox(tau, phi_dot, eta)
        return cache[eta]

    @cached_property
    def _2d(self):
        """(τ_out, φ̇, φ̈) as (n, w) arrays."""
        return tuple(a.reshape(self.t.size, -1) for a in (self.torque, self.speed,
                                                          self.acceleration))


# --------------------------------------------------------------------------- formulas

def motor_torque(tau_out, phi_dot, phi_ddot, *, gear_ratio, efficiency, inertia):
    """Motor torque T_m, N·m, by (2): J_m G φ̈ + τ_out/(G η) or + τ_out η / G.

    Parameters
    ----------
    tau_out : array_like   torque the gearbox output delivers to the wheel, N·m
    phi_dot, phi_ddot : array_like   wheel speed rad/s, acceleration rad/s²
    gear_ratio : float or array_like (broadcasting)   G, motor / wheel speed, > 0
    efficiency : float   η in (0, 1]
    inertia : float      J_m, kg·m² at the motor (rotor + gearbox input)
    """
    G = _real("gear_ratio", gear_ratio)
    if np.any(G <= 0.0):
        raise ValueError(f"`gear_ratio` must be > 0, got {gear_ratio!r}")
    eta = _positive("efficiency", efficiency, hi=1.0)
    J_m = _nonnegative("inertia", inertia)
    return _motor_torque(_real("tau_out", tau_out), _real("phi_dot", phi_dot),
                         _real("phi_ddot", phi_ddot), G, eta, J_m)


def _motor_torque(tau_out, phi_dot, phi_ddot, G, eta, J_m):
    return J_m * G * phi_ddot + _through_gearbox(tau_out, phi_dot, eta) / G


def _through_gearbox(tau_out, phi_dot, eta):
    """b = τ_out / η (driving) or τ_out η (back-driven): (2) is T_m = J_m G φ̈ + b / G."""
    return np.where(tau_out * phi_dot >= 0.0, tau_out / eta, tau_out * eta)


def cycle_rms(t, x):
    """sqrt(∫ x² dt / T_c) over the time axis (axis 0), trapezoid rule (6).

    t : (n,) s;  x : (n,) or (n, w)  ->  float or (w,)
    """
    duty = WheelDuty(t=t, torque=x, speed=np.zeros_like(np.asarray(x, dtype=float)),
                     acceleration=np.zeros_like(np.asarray(x, dtype=float)))
    return _scalar_or_array(_rms(duty, duty.torque))


def _rms(duty, x):
    """Cycle RMS of x (n, ...) along time -> shape x.shape[1:]."""
    return np.sqrt(np.tensordot(duty._weights, x * x, axes=(0, 0)) / duty.cycle_time)


def duty_factor(cycle_time, cycles_per_hour=None):
    """D = n T_c / 3600 (7), dimensionless; 1 when `cycles_per_hour` is None.

    Raises ValueError when D > 1 (the cycles do not fit in an hour).
    """
    T_c = _positive("cycle_time", cycle_time)
    if cycles_per_hour is None:
        return 1.0
    n_c = _positive("cycles_per_hour", cycles_per_hour)
    D = n_c * T_c / SECONDS_PER_HOUR
    if D > 1.0 + 1e-12:
        raise ValueError(f"`cycles_per_hour` = {n_c:g} with a {T_c:g} s cycle gives a duty "
                         f"D = n T_c / 3600 = {D:.4g} > 1: the cycles do not fit in an hour "
                         f"(at most {SECONDS_PER_HOUR / T_c:.4g} cycles per hour)")
    return min(D, 1.0)


def thermal_rms(rms, cycle_time, cycles_per_hour=None):
    """RMS_thermal = RMS sqrt(D) (7): zero torque while parked between cycles."""
    return _scalar_or_array(_real("rms", rms) * math.sqrt(duty_factor(cycle_time, cycles_per_hour)))


def electrical_power(T_m, omega_m, *, torque_constant, resistance):
    """Current and electrical power of a DC motor (4).

    I = T_m / k_t (A), P_e = T_m ω_m + I² R (W); T_m N·m, ω_m rad/s, k_t N·m/A, R Ω.
    Returns (I, P_e), arrays of the broadcast shape.
    """
    k_t = _positive("torque_constant", torque_constant)
    R = _nonnegative("resistance", resistance)
    T_m, omega_m = _real("T_m", T_m), _real("omega_m", omega_m)
    I = T_m / k_t
    return I, T_m * omega_m + I * I * R


def cycle_energy(t, P):
    """Energy drawn per cycle and the share that could be regenerated (5).

    t : (n,) s;  P : (n,) or (n, w) W  ->  (E J, ρ dimensionless), floats or (w,)
    """
    duty = WheelDuty(t=t, torque=P, speed=np.zeros_like(np.asarray(P, dtype=float)),
                     acceleration=np.zeros_like(np.asarray(P, dtype=float)))
    E, rho = _energy(duty, duty.torque)
    return _scalar_or_array(E), _scalar_or_array(rho)


def _energy(duty, P):
    w = duty._weights
    drawn = np.tensordot(w, np.maximum(P, 0.0), axes=(0, 0))
    returned = np.tensordot(w, np.maximum(-P, 0.0), axes=(0, 0))
    rho = np.divide(returned, drawn, out=np.zeros_like(drawn), where=drawn > 0.0)
    return drawn, rho


def inertia_matching_ratio(load_inertia, motor_inertia):
    """G_J = sqrt(J_load / J_m): J_load kg·m² at the wheel, J_m kg·m² at the motor."""
    return math.sqrt(_positive("load_inertia", load_inertia)
                     / _positive("motor_inertia", motor_inertia))


# --------------------------------------------------------------------------- figures

@dataclass(frozen=True, eq=False)
class DriveFigures:
    """Motor-side figures of one drive over one cycle (unfactored: no service factor).

    Time series (shape of the duty's torque, (n,) or (n, w)): torque T_m N·m,
    speed ω_m rad/s, power P_m W, current I A and electrical_power P_e W (None
    without k_t, resp. without k_t and R).  Per wheel (float, or (w,)):
    peak_torque max |T_m| N·m, rms_torque (6) N·m, thermal_rms_torque (7) N·m,
    peak_speed max |ω_m| rad/s, peak_power max P W, peak_current max |I| A
    (or None), energy E J and regenerated_share ρ (5) on `power_basis`
    ("electrical" or "mechanical").  Drive data: gear_ratio G, efficiency η,
    inertia J_m kg·m²; cycle_time T_c s, duty_factor D.
    """

    t: np.ndarray
    torque: np.ndarray
    speed: np.ndarray
    power: np.ndarray
    current: np.ndarray | None
    electrical_power: np.ndarray | None
    power_basis: str
    gear_ratio: float
    efficiency: float
    inertia: float
    cycle_time: float
    duty_factor: float
    peak_torque: float | np.ndarray
    rms_torque: float | np.ndarray
    thermal_rms_torque: float | np.ndarray
    peak_speed: float | np.ndarray
    peak_power: float | np.ndarray
    peak_current: float | np.ndarray | None
    energy: float | np.ndarray
    regenerated_share: float | np.ndarray
    wheels: tuple[str, ...] = field(default=())

    _UNITS = {"gear_ratio": DIMENSIONLESS, "efficiency": DIMENSIONLESS, "inertia": "kg·m²",
              "cycle_time": "s", "duty_factor": DIMENSIONLESS, "peak_torque": "N·m",
              "rms_torque": "N·m", "thermal_rms_torque": "N·m", "peak_speed": "rad/s",
              "peak_power": "W", "peak_current": "A", "energy": "J",
              "regenerated_share": DIMENSIONLESS}

    def to_dict(self):
        """Scalar figures as {"value": ..., "unit": ...} (per-wheel values as lists)."""
        out = {"wheels": list(self.wheels), "power_basis": self.power_basis}
        for key, unit in self._UNITS.items():
            value = getattr(self, key)
            if value is not None:
                out[key] = _quantity(value, unit)
        return out


def drive_figures(duty, *, gear_ratio, efficiency, inertia, torque_constant=None,
                  resistance=None):
    """Motor torque, speed, power, RMS and energy figures of one drive, (1)-(7).

    Parameters
    ----------
    duty : WheelDuty
    gear_ratio : float        G, motor speed / wheel speed, > 0
    efficiency : float        η in (0, 1]
    inertia : float           J_m, kg·m² at the motor (rotor + gearbox input)
    torque_constant : float or None   k_t, N·m/A (current)
    resistance : float or None        R, Ω (with k_t: electrical power, copper losses)

    Returns
    -------
    DriveFigures
    """
    if not isinstance(duty, WheelDuty):
        raise ValueError(f"`duty` must be a WheelDuty, got {type(duty).__name__}")
    G = _positive("gear_ratio", gear_ratio)
    eta = _positive("efficiency", efficiency, hi=1.0)
    J_m = _nonnegative("inertia", inertia)
    if resistance is not None and torque_constant is None:
        raise ValueError("`resistance` needs `torque_constant` (I = T_m / k_t)")
    T_m = _motor_torque(duty.torque, duty.speed, duty.acceleration, G, eta, J_m)
    omega_m = G * duty.speed
    P_m = T_m * omega_m
    I = P_e = None
    if torque_constant is not None:
        I, P_e = electrical_power(T_m, omega_m, torque_constant=torque_constant,
                                  resistance=0.0 if resistance is None else resistance)
        if resistance is None:
            P_e = None
    basis = "electrical" if P_e is not None else "mechanical"
    P = P_e if P_e is not None else P_m
    rms = _rms(duty, T_m)
    E, rho = _energy(duty, P)
    D = duty.duty_factor
    peak = lambda x: _scalar_or_array(np.max(np.abs(x), axis=0))  # noqa: E731
    for a in (T_m, omega_m, P_m, I, P_e):
        if a is not None:
            a.setflags(write=False)
    return DriveFigures(
        t=duty.t, torque=T_m, speed=omega_m, power=P_m, current=I, electrical_power=P_e,
        power_basis=basis, gear_ratio=G, efficiency=eta, inertia=J_m,
        cycle_time=duty.cycle_time, duty_factor=D, peak_torque=peak(T_m),
        rms_torque=_scalar_or_array(rms), thermal_rms_torque=_scalar_or_array(rms * math.sqrt(D)),
        peak_speed=peak(omega_m), peak_power=_scalar_or_array(np.max(P, axis=0)),
        peak_current=None if I is None else peak(I), energy=_scalar_or_array(E),
        regenerated_share=_scalar_or_array(rho), wheels=duty.wheels)
