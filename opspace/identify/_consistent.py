"""A physically consistent parameter set that reproduces the identified combinations.

Each body's ten parameters are written through its pseudo-inertia

    J = [[Σ, h], [hᵀ, m]],   Σ = ½ tr(I) 1 − I,   h = m c     (I about the joint origin)

which is positive definite exactly when the body is physical (positive mass,
inertia about the COM positive and within the triangle inequality), and J is
parametrised by its log-Cholesky factor, J = U Uᵀ with

    U = e^α [[e^d₁, s₁₂, s₁₃, t₁], [0, e^d₂, s₂₃, t₂], [0, 0, e^d₃, t₃], [0, 0, 0, 1]]

(Rucker & Wensing, "Smooth parameterization of rigid-body inertia", IEEE
Robotics and Automation Letters 7(2), 2022), so every value of the ten free
numbers is physical.  Armature, friction and rolling resistance are bounded
below by zero.  The set is the solution of

    min ‖(θ − θ₀) / s‖² + w ‖(B θ − β*) / σ_β‖²

(SciPy `least_squares`, trust-region reflective), started from the
description: the minimum change of `_estimate` with the physical constraints
added, the combinations held to within their standard deviations by a large w.
"""

from __future__ import annotations

import numpy as np

__all__ = ["consistent_parameters", "from_log_cholesky", "to_log_cholesky"]

#: weight of the identified combinations against the prior's pull
WEIGHT = 1e4


def _pi_from_J(J):
    m = J[3, 3]
    h = J[:3, 3]
    S = J[:3, :3]
    I = np.trace(S) * np.eye(3) - S
    return np.array([m, h[0], h[1], h[2], I[0, 0], I[0, 1], I[1, 1], I[0, 2], I[1, 2], I[2, 2]])


def from_log_cholesky(x):
    """Ten dynamic parameters (Pinocchio's order) of the log-Cholesky numbers x (10,)."""
    a, d1, d2, d3, s12, s23, s13, t1, t2, t3 = x
    U = np.exp(a) * np.array([[np.exp(d1), s12, s13, t1],
                              [0.0, np.exp(d2), s23, t2],
                              [0.0, 0.0, np.exp(d3), t3],
                              [0.0, 0.0, 0.0, 1.0]])
    return _pi_from_J(U.dot(U.T))


def to_log_cholesky(pi, floor=1e-9):
    """The log-Cholesky numbers of a body (its pseudo-inertia lifted to positive
    definite by `floor` times its scale where it is not)."""
    m, hx, hy, hz, ixx, ixy, iyy, ixz, iyz, izz = pi
    I = np.array([[ixx, ixy, ixz], [ixy, iyy, iyz], [ixz, iyz, izz]])
    J = np.zeros((4, 4))
    J[:3, :3] = 0.5 * np.trace(I) * np.eye(3) - I
    J[:3, 3] = J[3, :3] = (hx, hy, hz)
    J[3, 3] = m
    lam, V = np.linalg.eigh(J)
    scale = max(abs(lam).max(), 1e-6)
    J = (V * np.maximum(lam, floor * scale + 1e-12)).dot(V.T)
    # upper Cholesky U Uᵀ = J: reverse the rows and columns of the lower factor
    P = np.eye(4)[::-1]
    L = np.linalg.cholesky(P.dot(J).dot(P))
    U = P.dot(L).dot(P)
    a = np.log(U[3, 3])
    U = U / U[3, 3]
    return np.array([a, np.log(U[0, 0]), np.log(U[1, 1]), np.log(U[2, 2]), U[0, 1], U[1, 2],
                     U[0, 2], U[0, 3], U[1, 3], U[2, 3]])


def consistent_parameters(params, base, beta, std, prior, spread, parts, start=None):
    """(θ (p,), converged) physical everywhere, reproducing β within σ (module docstring).

    parts: {body index: π (10,)} the part of each body the change goes into
    (`_writeback.writable_parts`); θ_body = (θ₀_body − part) + π(x), so that the
    part itself stays physical.  Other bodies keep the description's values.
    start: {body index: π} a first guess of each part (lifted to physical), or None.
    """
    from scipy.optimize import least_squares

    groups = [(10 * i, 10 * i + 10) for i in sorted(parts)]
    offsets = [prior[10 * i:10 * i + 10] - parts[i] for i in sorted(parts)]
    starts = [(start or parts)[i] for i in sorted(parts)]
    if params.payload is not None:
        groups.append((params.payload.start, params.payload.stop))
        offsets.append(np.zeros(10))
        starts.append(prior[params.payload] if prior[params.payload.start] > 0 else
                      np.array([1.0, 0, 0, 0, 1e-3, 0, 1e-3, 0, 0, 1e-3]))
    in_group = np.zeros(len(prior), bool)
    in_group[:params.inertial.stop] = True           # bodies without a part stay fixed
    for a, b in groups:
        in_group[a:b] = True
    linear = np.nonzero(~in_group)[0]
    x0 = np.concatenate([to_log_cholesky(pi) for pi in starts]
                        + [np.maximum(prior[linear], 0.0)])
    k = 10 * len(groups)
    # a combination is held to its standard deviation, but never tighter than
    # 1e-4 of its value: a noise-free fit would otherwise weigh it beyond what
    # the solver can resolve
    sig = np.maximum(std, 1e-4 * np.abs(beta) + 1e-12)
    w = np.sqrt(WEIGHT)

    def theta(x):
        th = prior.copy()
        for g, (a, b) in enumerate(groups):
            th[a:b] = offsets[g] + from_log_cholesky(x[10 * g:10 * g + 10])
        th[linear] = x[k:]
        return th

    def residual(x):
        th = theta(x)
        return np.concatenate([(th - prior) / spread, w * (base.B.dot(th) - beta) / sig])

    Bs = w * base.B / sig[:, None]

    def jacobian(x):
        # dθ/dx: a 10 × 10 block per body (central differences of the small map)
        # and the identity on the linear parameters
        D = np.zeros((len(prior), len(x)))
        for g, (a, b) in enumerate(groups):
            xg = x[10 * g:10 * g + 10]
            for j in range(10):
                e = np.zeros(10)
                e[j] = 1e-6
                D[a:b, 10 * g + j] = (from_log_cholesky(xg + e) - from_log_cholesky(xg - e)) / 2e-6
        D[linear, k + np.arange(len(linear))] = 1.0
        return np.vstack([D / spread[:, None], Bs.dot(D)])

    from threadpoolctl import threadpool_limits

    lo = np.concatenate([np.full(k, -np.inf), np.zeros(len(linear))])
    # small dense problems: threads only contend; trial steps may overflow exp()
    # (rejected by the trust region), which is not worth a warning
    with threadpool_limits(1), np.errstate(over="ignore", invalid="ignore"):
        res = least_squares(residual, x0, jac=jacobian, bounds=(lo, np.full(len(x0), np.inf)),
                            method="trf", x_scale="jac", max_nfev=2000, ftol=1e-12,
                            xtol=1e-12, gtol=1e-12)
    return theta(res.x), bool(res.success)
