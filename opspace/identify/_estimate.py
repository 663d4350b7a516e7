"""Base parameters, weighted least squares and the corrected parameter set.

Base parameters (Gautier, "Numerical calculation of the base inertial
parameters of robots", J. Robotic Systems 8(4), 1991; Khalil & Dombre,
Modeling, Identification and Control of Robots, 2002, ch. 12): the stacked
regressor W₀ of random states is factored with column pivoting,
W₀ P = Q [R₁ R₂]; its numerical rank b gives the identifiable combinations

    β = θ_b + K θ_d,   K = R₁⁻¹ R₂          (θ_b: the b pivot columns)

so W θ = W_b β for every state.  The data then give β by least squares,
weighted per coordinate with σ_i² = ‖ρ_i‖² / (r_i − b) from an ordinary
fit (Gautier & Poignet, "Extended Kalman filtering and weighted least squares
dynamic identification of robot", Control Engineering Practice 9, 2001):

    β̂ = argmin ‖G (W_b β − τ)‖²,   cov β̂ = σ̂² (W̃ᵀ W̃)⁻¹,  σ̂² = ‖ρ̃‖²/(r − b)

with W̃ = G W_b.  The full parameter set written back into a description is
the one closest to the description's that reproduces the significant part of
β̂ (a combination that differs from the description's by less than two
standard deviations keeps the description's value):

    θ̂ = θ₀ + D Bᵀ (B D Bᵀ)⁻¹ (β* − B θ₀),    B = [I K] Pᵀ,
    β*_i = β̂_i if |β̂_i − (B θ₀)_i| > 2 σ_i, else (B θ₀)_i

with D = diag(s²) weighting how far each parameter may plausibly move (the
minimum of Σ (θ_i − θ₀_i)² / s_i²): a rotor's inertia from its data sheet
moves little, a link's mass from CAD more, friction most.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import linalg

__all__ = ["BaseParameters", "Estimate", "base_parameters", "estimate"]

#: relative size of a diagonal element of R below which a column is dependent
RANK_TOL = 1e-8
#: entries of K smaller than this (relative) are shown as zero in combinations
SHOW_TOL = 1e-6


@dataclass(frozen=True, eq=False)
class BaseParameters:
    """The identifiable combinations of a parameter set.

    index (b,): columns of θ kept (θ_b); dependent (p − b,): the others;
    K (b, p − b): β = θ_b + K θ_d; B (b, p): β = B θ; names (b,) of β.
    """

    index: np.ndarray
    dependent: np.ndarray
    K: np.ndarray
    B: np.ndarray
    names: tuple

    def combinations(self, names):
        """β_i as text: 'θ_b + k θ_d + ...' with the parameter names."""
        out = []
        for i, col in enumerate(self.index):
            terms = [names[col]]
            scale = max(1.0, float(np.abs(self.K[i]).max(initial=0.0)))
            for j, d in enumerate(self.dependent):
                k = self.K[i, j]
                if abs(k) > SHOW_TOL * scale:
                    terms.append(f"{k:+.4g} {names[d]}")
            out.append(" ".join([terms[0], *terms[1:]]))
        return out


def base_parameters(W0, names):
    """`BaseParameters` from a regressor of random (exciting) states W0 (r, p)."""
    scale = np.linalg.norm(W0, axis=0)
    scale[scale == 0] = 1.0
    _, R, perm = linalg.qr(W0 / scale, mode="economic", pivoting=True)
    d = np.abs(np.diag(R))
    b = int(np.sum(d > RANK_TOL * d[0]))
    R1, R2 = R[:b, :b], R[:b, b:]
    idx, dep = perm[:b], perm[b:]
    # in scaled columns: β_s = θ_bs + K_s θ_ds; back to physical columns
    K = linalg.solve_triangular(R1, R2) * scale[dep][None, :] / scale[idx][:, None]
    B = np.zeros((b, W0.shape[1]))
    B[np.arange(b), idx] = 1.0
    B[:, dep] = K
    return BaseParameters(idx, dep, K, B, tuple(names[i] for i in idx))


@dataclass(frozen=True, eq=False)
class Estimate:
    """Identified base parameters and the corrected full set.

    beta, beta_prior, std (b,): estimate, the description's value, standard
    deviation (inf where the motion does not excite the combination: it keeps
    the description's value); sigma (k,) residual standard deviation per measured coordinate
    (N·m or N); theta (p,): the full set closest to the prior reproducing beta;
    rows_used: samples × coordinates fitted; condition: cond(W̃).
    """

    base: BaseParameters
    beta: np.ndarray
    beta_prior: np.ndarray
    std: np.ndarray
    sigma: np.ndarray
    theta: np.ndarray
    condition: float
    rows_used: int

    def beta_payload_mass(self, params):
        """The payload mass of the unconstrained minimum change θ̂, kg."""
        return float(self.theta[params.payload.start])

    @property
    def relative_std(self):
        """std / |β|, (b,) (inf where β = 0)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.beta != 0, self.std / np.abs(self.beta), np.inf)


def estimate(W, tau, coord, base, prior, spread=None):
    """Weighted least squares of the base parameters (module docstring).

    W (r, p); tau (r,); coord (r,) the coordinate index of each row;
    base: BaseParameters; prior θ₀ (p,); spread (p,) or None: how far each
    parameter may plausibly be from θ₀ (the weights D = diag(spread²) of the
    minimum change; None: all alike).
    """
    Wb = W[:, base.index]                    # W θ = W_b β (structurally, W_d = W_b K)
    Bp = base.B.dot(prior)
    # combinations this motion does not excite (a zero column of its regressor)
    # are not determined by it: they keep the description's value, std = inf
    norms = np.linalg.norm(Wb, axis=0)
    excited = norms > 1e-9 * norms.max()
    tau = tau - Wb[:, ~excited].dot(Bp[~excited])
    Wb = Wb[:, excited]
    b = Wb.shape[1]
    r = len(tau)
    if r <= b:
        raise ValueError(f"{r} equations for {b} base parameters")
    beta0 = np.linalg.lstsq(Wb, tau, rcond=None)[0]
    rho = tau - Wb.dot(beta0)
    coords = np.unique(coord)
    sigma = np.empty(len(coords))
    w = np.empty(r)
    floor = 1e-9 * max(float(np.abs(tau).max()), 1e-12)
    for i, k in enumerate(coords):
        rows = coord == k
        dof = max(rows.sum() - b * rows.sum() / r, 1.0)
        sigma[i] = math.sqrt(float(rho[rows].dot(rho[rows])) / dof)
        w[rows] = 1.0 / max(sigma[i], floor)
    Wt = Wb * w[:, None]
    beta_e, *_ = np.linalg.lstsq(Wt, tau * w, rcond=None)
    res = tau * w - Wt.dot(beta_e)
    s2 = float(res.dot(res)) / (r - b)
    cov = s2 * np.linalg.pinv(Wt.T.dot(Wt))
    beta, std = Bp.copy(), np.full(len(Bp), np.inf)
    beta[excited] = beta_e
    std[excited] = np.sqrt(np.maximum(np.diag(cov), 0.0))
    D = np.ones(len(prior)) if spread is None else np.asarray(spread, float) ** 2
    BD = base.B * D[None, :]
    significant = np.abs(beta - Bp) > 2.0 * std
    theta = prior + BD.T.dot(np.linalg.solve(BD.dot(base.B.T),
                                             np.where(significant, beta - Bp, 0.0)))
    return Estimate(base, beta, Bp, std, sigma, theta, float(np.linalg.cond(Wt)), r)


def relative_change(new, old):
    """(new − old) / |old| (nan where old = 0)."""
    return (new - old) / abs(old) if old != 0 else math.nan
