"""Identification from motion logs: filtering, the fit, the figures a user wants.

Derivatives come from zero-phase filtering: a 4th-order Butterworth low-pass
run forward and backward (`scipy.signal.filtfilt`) on the positions, then
central differences (`numpy.gradient`) for velocity and acceleration.  The
efforts pass through the same filter, and so does every column of the
regressor, computed at every sample of the log before the samples are thinned
(parallel filtering: Gautier & Poignet 2001), so the filter's effect on both
sides of Q = W θ is matched — Coulomb friction and the casters' rolling
resistance step where a rate changes sign, and the efforts carry those steps
smeared by the filter.  Samples within
one filter settling time of either end are dropped, and long logs are thinned
evenly.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ._consistent import consistent_parameters
from ._estimate import base_parameters, estimate
from ._writeback import writable_parts
from ._regressor import parameter_set, regressor

__all__ = ["DEFAULT_CUTOFF", "Identification", "identify", "predict", "prepare"]

#: default low-pass cut-off of the zero-phase filter, Hz (common practice, no
#: source: a few times the bandwidth of the excitation)
DEFAULT_CUTOFF = 10.0
#: at most this many samples per log enter the fit
MAX_SAMPLES = 1500


@dataclass(frozen=True, eq=False)
class Prepared:
    """Filtered states of one log at the kept samples: t, qs (n, nq), nu,
    nu_dot, tau (n, nv), held (n,); full: the states at every sample, the kept
    indices and the filter, for the regressor filtered like the efforts."""

    t: np.ndarray
    qs: np.ndarray
    nu: np.ndarray
    nu_dot: np.ndarray
    tau: np.ndarray
    held: np.ndarray
    full: tuple

    def regressor(self, robot, params):
        """W at the kept samples, low-pass filtered like the efforts: computed at
        every sample of the log and filtered column by column (the same
        zero-phase filter on both sides of Q = W θ)."""
        qs, vel, acc, held, keep, low = self.full
        W = regressor(robot, params, qs, vel, acc, held).reshape(len(qs), robot.nv, -1)
        return low(W)[keep].reshape(len(keep) * robot.nv, -1)


def prepare(robot, log, *, cutoff=DEFAULT_CUTOFF, max_samples=MAX_SAMPLES):
    """Filter and differentiate a MotionLog (see the module docstring)."""
    from scipy.signal import butter, filtfilt

    dt = float(np.median(np.diff(log.t)))
    nyquist = 0.5 / dt
    if not 0.0 < cutoff < nyquist:
        raise ConfigError(f"{log.path.name}: cut-off {cutoff:g} Hz must lie in (0, "
                          f"{nyquist:g}) Hz, half the log's sampling rate")
    b, a = butter(4, cutoff / nyquist)
    edge = int(math.ceil(3.0 / (cutoff * dt)))          # ~3 time constants of the filter
    n = len(log.t)
    if n - 2 * edge < 10 or n <= 3 * max(len(a), len(b)):
        raise ConfigError(f"{log.path.name}: {n} samples are too few for a {cutoff:g} Hz "
                          f"filter at {1 / dt:g} Hz (raise the cut-off or log longer)")

    def low(x):
        return filtfilt(b, a, x, axis=0)

    pos = low(log.positions)
    vel = low(log.velocity) if log.velocity is not None else np.gradient(pos, log.t, axis=0)
    acc = (low(log.acceleration) if log.acceleration is not None
           else np.gradient(vel, log.t, axis=0))
    tau = np.where(np.isnan(log.efforts), np.nan, low(np.nan_to_num(log.efforts)))
    keep = np.arange(edge, n - edge)
    # a payload picked or released is a step in the efforts: the filter smears
    # it, so the samples within its settling time are left out
    steps = np.nonzero(np.diff(log.payload.astype(int)))[0]
    for i in steps:
        keep = keep[np.abs(keep - i) > edge]
    keep = keep[np.unique(np.linspace(0, len(keep) - 1, min(len(keep), max_samples))
                          .round().astype(int))]
    qs = np.array([robot.configuration(wheels=p[:2], arm=p[2:]) for p in pos])
    return Prepared(log.t[keep], qs[keep], vel[keep], acc[keep], tau[keep], log.payload[keep],
                    (qs, vel, acc, log.payload, keep, low))


@dataclass(frozen=True, eq=False)
class Identification:
    """The result of `identify`.

    params: ParameterSet; fit: Estimate (base parameters, std, the minimum
    change θ̂ without constraints); theta (p,): the physically consistent set
    (`_consistent`), the one reported and written back; measured
    (nv,) bool; data: the Prepared logs; tau_pred, tau_prior: predictions of
    each log's efforts with β̂ and with the description (lists of (n, nv));
    consistency: list of (body, problem) where `theta` is still not physical
    (empty when the constrained fit converged).
    """

    robot: object
    params: object
    fit: object
    measured: np.ndarray
    data: tuple
    tau_pred: tuple
    tau_prior: tuple
    consistency: tuple
    theta: np.ndarray = None

    def value(self, name):
        """The identified value of a named parameter (the consistent set)."""
        return float(self.theta[self.params.names.index(name)])

    def prior(self, name):
        return float(self.params.prior[self.params.names.index(name)])


def _rows(W, tau, measured, nv):
    """The rows of measured coordinates and finite efforts: (W, tau, coordinate)."""
    mask = np.tile(measured, len(tau) // nv) & np.isfinite(tau)
    coord = np.tile(np.arange(nv), len(tau) // nv)
    return W[mask], tau[mask], coord[mask]


def _structural_regressor(robot, params, payload, seed=7, n=80):
    """W of random states inside the limits (for the base parameters)."""
    rng = np.random.default_rng(seed)
    lo = np.where(np.isfinite(robot.lower), robot.lower, -np.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, np.pi)
    qs = np.array([robot.configuration(arm=rng.uniform(lo, hi)) for _ in range(n)])
    held = (np.arange(n) % 2 == 1) if payload else None
    return regressor(robot, params, qs, rng.normal(size=(n, robot.nv)),
                     rng.normal(size=(n, robot.nv)), held)


def identify(robot, logs, *, cutoff=DEFAULT_CUTOFF):
    """Identify the base parameters of `robot` from MotionLogs.

    Returns
    -------
    Identification
    """
    data = tuple(prepare(robot, log, cutoff=cutoff) for log in logs)
    held = np.concatenate([d.held for d in data])
    payload = bool(held.any())
    if payload and held.all():
        raise ConfigError("every sample holds the payload: the payload cannot be told apart "
                          "from the tool (log some motion without it)")
    params = parameter_set(robot, payload=payload)
    measured = np.any([log.measured for log in logs], axis=0)
    nv = robot.nv
    blocks = [d.regressor(robot, params) for d in data]
    W = np.vstack(blocks)
    tau = np.concatenate([d.tau.reshape(-1) for d in data])
    Wm, tm, coord = _rows(W, tau, measured, nv)
    W0 = _structural_regressor(robot, params, payload)
    W0 = W0[np.tile(measured, len(W0) // nv)]
    base = base_parameters(W0, params.names)
    if len(tm) <= 2 * len(base.index):
        raise ConfigError(f"{len(tm)} equations for {len(base.index)} base parameters: log "
                          f"more samples (or motion of more coordinates)")
    _check_signs(robot, logs, data, blocks, params.prior, measured)
    fit = estimate(Wm, tm, coord, base, params.prior, params.spread)
    if params.payload is not None and fit.beta_payload_mass(params) <= 0.0:
        raise ConfigError(f"the identified payload mass is {fit.beta_payload_mass(params):.3g} "
                          f"kg: are the efforts of the wrong sign, or the payload column wrong?")
    beta_rows = [Wb[:, base.index].dot(fit.beta).reshape(-1, nv) for Wb in blocks]
    prior_rows = [Wb.dot(params.prior).reshape(-1, nv) for Wb in blocks]
    theta = fit.theta
    if _consistency(params, theta):
        # the minimum change left a body unphysical: the constrained fit, started
        # from the description (always physical)
        significant = np.abs(fit.beta - fit.beta_prior) > 2.0 * fit.std
        theta, _ = consistent_parameters(params, base,
                                         np.where(significant, fit.beta, fit.beta_prior),
                                         fit.std, params.prior, params.spread,
                                         writable_parts(robot, params))
    return Identification(robot, params, fit, measured, data, tuple(beta_rows),
                          tuple(prior_rows), tuple(_consistency(params, theta)), theta)


def predict(ident, log, *, cutoff=DEFAULT_CUTOFF):
    """Efforts of a (fresh) log predicted by the identified base parameters:
    (Prepared data, predicted efforts (n, nv))."""
    d = prepare(ident.robot, log, cutoff=cutoff)
    W = d.regressor(ident.robot, ident.params)
    return d, W[:, ident.fit.base.index].dot(ident.fit.beta).reshape(-1, ident.robot.nv)


def _check_signs(robot, logs, data, blocks, prior, measured):
    """Efforts logged with the opposite sign convention: the description's own
    prediction correlates strongly negatively with the measured efforts (the
    fit would then need negative masses)."""
    nv = robot.nv
    pred = np.concatenate([W.dot(prior).reshape(-1, nv) for W in blocks])
    tau = np.concatenate([d.tau for d in data])
    for k in np.nonzero(measured)[0]:
        a, b = tau[:, k], pred[:, k]
        ok = np.isfinite(a)
        if ok.sum() < 3 or np.std(a[ok]) == 0 or np.std(b[ok]) == 0:
            continue
        r = float(np.corrcoef(a[ok], b[ok])[0, 1])
        if r < -0.5:
            name = robot.coordinate_names[k]
            raise ConfigError(f"{logs[0].path.name}: effort:{name} correlates at {r:.2f} with "
                              f"the description's prediction: logged with the opposite sign "
                              f"convention? (positive effort must accelerate {name} "
                              f"positively; fitting it would need negative masses)")


def _consistency(params, theta):
    """Bodies whose corrected parameters are not physical (mass ≤ 0, or the
    rotational inertia about the COM not positive or breaking the triangle
    inequality)."""
    import pinocchio as pin

    out = []
    groups = [(b, theta[10 * i:10 * i + 10]) for i, b in enumerate(params.bodies)]
    if params.payload is not None:
        groups.append(("payload", theta[params.payload]))
    for body, pi in groups:
        if pi[0] <= 0.0:
            if abs(pi[0]) > 1e-9 or np.any(np.abs(pi[1:]) > 1e-9):
                out.append((body, f"mass {pi[0]:.4g} kg"))
            continue
        I = pin.Inertia.FromDynamicParameters(np.asarray(pi, float)).inertia
        lam = np.linalg.eigvalsh(0.5 * (I + I.T))
        if lam[0] <= 0.0 or lam[2] > lam[0] + lam[1] + 1e-9 * lam[2]:
            out.append((body, f"principal moments {np.round(lam, 6).tolist()} kg·m²"))
    for name, i in zip(params.names, range(len(params.names))):
        if name.endswith((".coulomb", ".viscous", ".armature", "rolling_resistance")) \
                and theta[i] < 0.0:
            out.append((name.rsplit(".", 1)[0], f"{name} = {theta[i]:.4g} < 0"))
    return out
