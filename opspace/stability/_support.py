"""Normal loads under the load model the robot description chooses.

The chassis is a rigid body standing on support elements; each element is a
drive wheel, a free caster, or a rocker (a pivot carrying two casters).  An
element j at (x_j, y_j) deflects by

    δ_j = w + β x_j + γ y_j − e_j                                         (1)

with (w, β, γ) the chassis' sink and its small pitch and roll (rad; points
ahead sink more when β > 0) and e_j the floor's dip under it (m, < 0: a step).
Its force follows a continuous, non-decreasing, piecewise-linear law
F_j(δ) (F = 0 for δ <= 0: the element has lifted off), and equilibrium of the
normal force and of the two tilting moments reads

    Σ_j F_j(δ_j) [1, x_j, y_j]ᵀ = f_z [1, c_x, c_y]ᵀ                        (2)

(c the centre of pressure).  (2) is the gradient of the convex potential
Φ(u) = Σ_j ∫₀^δ_j F_j − bᵀu, u = (w, β, γ), so its solution is the minimum
of the elastic energy (Castigliano; Timoshenko & Goodier, Theory of
Elasticity, 1970, §§ 90-91, recalled from memory); it is found by Newton's
method with a backtracking line search on Φ, and is exact once every element
stays on one linear piece of its law.  Laws:

* contact of vertical stiffness k:                 F = k max(δ, 0)
* sprung drive wheel (tyre k_t in series with a spring of preload P, rate
  k_s and travel T between a top stop and a bump stop): the tyre alone
  (slope k_t) until F = P, then both (1/k = 1/k_t + 1/k_s) until the spring
  has travelled T, F_b = P + k_s T, then the tyre alone again (bottomed out).
  Below P the spring rests on its top stop ("topped out"); at F = 0 the
  wheel lifts off.
* rocker: a pivot at p between contacts a and b shares its load by the
  lever rule, N_a = F (|p − b| / |a − b|) (moment balance about the pivot),
  N_b = F − N_a; its stiffness is 1 / (w_a²/k_a + w_b²/k_b) and its floor
  offset w_a e_a + w_b e_b (w the lever shares: virtual work).  The
  chassis' support polygon then has the pivot, not the two contacts, as a
  corner (an ideal rocker without stops).

Three non-collinear elements are statically determinate: (2) is square, its
solution does not depend on the laws, and it is used alone ("statics").
Equal stiffness on every contact gives the plane of deflection
N_i = α + β' x_i + γ' y_i of `normal_loads` (the rigid-cap pile-group formula).
"""

from __future__ import annotations

import math
import weakref
from dataclasses import dataclass, field

import numpy as np

from ._contacts import _edge_distances, support_polygon

__all__ = ["SupportLoads", "SupportModel", "support_loads"]

_TOL = 1e-10          # relative residual of (2)
_INSIDE_TOL = 1e-12   # CoP on an edge counts as supported (lengths / layout size)

#: what each load model is called in reports
MODEL_NAMES = {
    "equal": "rigid chassis on contacts of equal vertical stiffness",
    "stiffness": "rigid chassis on contacts of their own vertical stiffness",
    "sprung": "rigid chassis; sprung drive wheels (preload, rate, travel) in series with "
              "their tyres; casters of their own vertical stiffness",
}


@dataclass(frozen=True, eq=False)
class SupportModel:
    """The load model of a robot's base, as the description chose it.

    Attributes
    ----------
    kind : {"equal", "stiffness", "sprung"}
    names : tuple[str]           contact names (drive wheels first)
    positions : ndarray (k, 2)   contact points in the base frame, m
    driven : ndarray of bool (k,)
    stiffness : ndarray (k,)     vertical stiffness of each contact (tyre, caster), N/m
    preload, spring_rate, travel : float
        Sprung drive wheels: spring force at the top stop N, rate N/m, travel m
        (nan unless kind is "sprung").
    rockers : tuple of (a, b, pivot)
        Contact indices a, b sharing a pivot at pivot (x, y), m.
    unevenness : float
        Largest dip or step of the floor under any one contact, m, >= 0.
    """

    kind: str
    names: tuple
    positions: np.ndarray
    driven: np.ndarray
    stiffness: np.ndarray
    preload: float = math.nan
    spring_rate: float = math.nan
    travel: float = math.nan
    rockers: tuple = ()
    unevenness: float = 0.0
    _elements: tuple = field(default=None, repr=False)

    def __post_init__(self):
        object.__setattr__(self, "positions", np.asarray(self.positions, dtype=float))
        object.__setattr__(self, "driven", np.asarray(self.driven, dtype=bool))
        object.__setattr__(self, "stiffness", np.asarray(self.stiffness, dtype=float))
        object.__setattr__(self, "_elements", _elements(self))

    @property
    def element_positions(self):
        """(m, 2) m: the chassis' support points (drive wheels, free casters, pivots)."""
        return self._elements[0]

    @property
    def statically_determinate(self):
        P = self.element_positions
        if len(P) != 3:
            return False
        return abs(np.linalg.det(np.column_stack([np.ones(3), P]))) > 1e-9 * np.ptp(P) ** 2

    def describe(self) -> str:
        """One sentence naming the model (for every report and summary)."""
        text = MODEL_NAMES[self.kind]
        if self.kind == "sprung":
            text += (f" (preload {self.preload:g} N, rate {self.spring_rate:g} N/m, travel "
                     f"{self.travel * 1000:g} mm)")
        for a, b, p in self.rockers:
            text += f"; {self.names[a]} and {self.names[b]} on a rocker pivoting at " \
                    f"({p[0]:g}, {p[1]:g}) m"
        if self.statically_determinate:
            text += ("; three support points: statically determinate, the loads follow "
                     "from statics alone (the stiffnesses do not change them)")
        text += "; contacts lift off when unloaded"
        return text

    def to_dict(self) -> dict:
        out = {"model": self.kind, "description": self.describe(),
               "stiffness": {n: {"value": float(k), "unit": "N/m"}
                             for n, k in zip(self.names, self.stiffness)},
               "unevenness": {"value": self.unevenness, "unit": "m"},
               "statically_determinate": self.statically_determinate}
        if self.kind == "sprung":
            out["drive_spring"] = {"preload": {"value": self.preload, "unit": "N"},
                                   "rate": {"value": self.spring_rate, "unit": "N/m"},
                                   "travel": {"value": self.travel, "unit": "m"}}
        if self.rockers:
            out["rockers"] = [{"contacts": [self.names[a], self.names[b]],
                               "pivot": {"value": [float(v) for v in p], "unit": "m"}}
                              for a, b, p in self.rockers]
        return out


def _law(model, i):
    """(breakpoints, forces at them, slopes) of contact i's force law, N and m."""
    k = float(model.stiffness[i])
    if model.kind == "sprung" and model.driven[i]:
        P, ks, T = model.preload, model.spring_rate, model.travel
        Fb = P + ks * T
        k_eq = 1.0 / (1.0 / k + 1.0 / ks)
        return [0.0, P / k, Fb / k + T], [0.0, P, Fb], [k, k_eq, k]
    return [0.0], [0.0], [k]


def _elements(model):
    """Element positions (m, 2), laws padded to (m, s), and D (k, m): N = D F."""
    k = len(model.names)
    on_rocker = {i for a, b, _ in model.rockers for i in (a, b)}
    pos, laws, cols = [], [], []
    for i in range(k):
        if i not in on_rocker:
            pos.append(model.positions[i])
            laws.append(_law(model, i))
            col = np.zeros(k)
            col[i] = 1.0
            cols.append(col)
    for a, b, p in model.rockers:
        pa, pb = model.positions[a], model.positions[b]
        w_a = float(np.linalg.norm(np.asarray(p) - pb) / np.linalg.norm(pa - pb))
        w_b = 1.0 - w_a
        k_p = 1.0 / (w_a**2 / model.stiffness[a] + w_b**2 / model.stiffness[b])
        pos.append(np.asarray(p, dtype=float))
        laws.append(([0.0], [0.0], [k_p]))
        col = np.zeros(k)
        col[a], col[b] = w_a, w_b
        cols.append(col)
    s = max(len(law[0]) for law in laws)
    bp = np.full((len(laws), s), np.inf)
    Fb = np.zeros((len(laws), s))
    sl = np.zeros((len(laws), s))
    for j, (b_, f_, s_) in enumerate(laws):
        n = len(b_)
        bp[j, :n], Fb[j, :n], sl[j, :n] = b_, f_, s_
        Fb[j, n:] = f_[-1]
    return np.array(pos), bp, Fb, sl, np.column_stack(cols)


@dataclass(frozen=True, eq=False)
class SupportLoads:
    """Normal loads under a `SupportModel` at one or many instants.

    N (n, k) N per contact (>= 0; nan where the robot tips); lifted (n, k) bool:
    contacts carrying no load; supported (n,) bool: False where the centre of
    pressure leaves the support polygon; topped_out, bottomed (n, k) bool: sprung
    drive wheels on their top stop (load below the preload) or bump stop; tilt
    (n, 2) rad: the chassis' pitch and roll (β, γ of eq. 1); model: its description.
    """

    N: np.ndarray
    lifted: np.ndarray
    supported: np.ndarray
    topped_out: np.ndarray
    bottomed: np.ndarray
    tilt: np.ndarray
    model: str

    def to_dict(self) -> dict:
        return {"N": np.asarray(self.N).tolist(), "lifted": np.asarray(self.lifted).tolist(),
                "supported": np.asarray(self.supported).tolist(), "model": self.model}


def _force(bp, Fb, sl, d):
    """F(δ) and its slope for laws (m, s) at deflections d (n, m)."""
    i = np.maximum((d[..., None] >= bp).sum(axis=-1) - 1, 0)      # segment index
    b = np.take_along_axis(np.broadcast_to(bp, d.shape + bp.shape[-1:]), i[..., None], -1)[..., 0]
    f = np.take_along_axis(np.broadcast_to(Fb, d.shape + bp.shape[-1:]), i[..., None], -1)[..., 0]
    s = np.take_along_axis(np.broadcast_to(sl, d.shape + bp.shape[-1:]), i[..., None], -1)[..., 0]
    on = d > 0.0
    return np.where(on, f + s * (d - b), 0.0), np.where(on, s, 0.0), i


def _energy(bp, Fb, sl, d):
    """Σ_j ∫₀^δ_j F_j dδ for one instant (d (m,)), J (exact for piecewise-linear laws)."""
    with np.errstate(invalid="ignore"):
        width = np.where(np.isfinite(bp[:, 1:]), np.diff(bp, axis=1), 0.0)
    Psi = np.concatenate([np.zeros((len(bp), 1)),
                          np.cumsum(0.5 * (Fb[:, :-1] + Fb[:, 1:]) * width, axis=1)], axis=1)
    _, _, i = _force(bp, Fb, sl, d[None])
    i = i[0]
    rows = np.arange(len(d))
    x = d - bp[rows, i]
    psi = Psi[rows, i] + Fb[rows, i] * x + 0.5 * sl[rows, i] * x * x
    return float(np.sum(np.where(d > 0.0, psi, 0.0)))


def _newton(A, bp, Fb, sl, b, e, u):
    """Damped Newton on Φ(u) = Σ ψ_j(Aᵀu − e) − bᵀu for one instant (eq. 2)."""
    scale = float(b[0])
    reg = 1e-12 * float(np.max(sl)) * A.shape[1]
    for _ in range(200):
        d = A.T @ u - e
        F, s, _ = _force(bp, Fb, sl, d[None])
        r = A @ F[0] - b
        if np.linalg.norm(r) <= _TOL * scale:
            return _polish(A, bp, Fb, sl, b, e, u), True
        H = (A * s[0]) @ A.T + reg * np.eye(3)
        du = -np.linalg.solve(H, r)
        phi0 = _energy(bp, Fb, sl, d) - b @ u
        t = 1.0
        for _ in range(60):
            un = u + t * du
            if _energy(bp, Fb, sl, A.T @ un - e) - b @ un <= phi0 + 1e-4 * t * (r @ du):
                break
            t *= 0.5
        u = un
    return u, False


def _polish(A, bp, Fb, sl, b, e, u):
    """The exact solution on the pieces of the laws the elements sit on at u
    (kept if every element stays on its piece), else u."""
    d = A.T @ u - e
    _, s, seg = _force(bp, Fb, sl, d[None])
    s, seg = s[0], seg[0]
    on = d > 0.0
    rows = np.arange(len(d))
    b_seg, f_seg = bp[rows, seg], Fb[rows, seg]
    H = (A * s) @ A.T
    if np.linalg.cond(H) > 1e12:
        return u
    un = np.linalg.solve(H, b - A @ np.where(on, f_seg - s * (e + b_seg), 0.0))
    _, s2, seg2 = _force(bp, Fb, sl, (A.T @ un - e)[None])
    same = np.array_equal(seg2[0], seg) and np.array_equal(s2[0] > 0, s > 0)
    return un if same else u


def support_loads(model, cop_xy, f_z, *, floor=None) -> SupportLoads:
    """Normal load of each contact under `model` (eqs. 1-2 of the module docstring).

    Parameters
    ----------
    model : SupportModel
    cop_xy : array_like (2,) or (n, 2)   centre of pressure on the ground, base frame, m
    f_z : float or array_like (n,)       total normal ground reaction, N, > 0
    floor : array_like (k,) or (n, k), optional
        Floor dip under each contact, m (> 0 lower, < 0 a step); default flat.

    Returns
    -------
    SupportLoads   arrays with a leading instant axis (n = 1 for one instant)
    """
    cop = np.atleast_2d(np.asarray(cop_xy, dtype=float))
    f_z = np.asarray(f_z, dtype=float).reshape(-1)
    n = max(len(cop), len(f_z))
    cop, f_z = np.broadcast_to(cop, (n, 2)), np.broadcast_to(f_z, (n,))
    if not np.all(np.isfinite(cop)) or not np.all(f_z > 0):
        raise ValueError("`cop_xy` must be finite and `f_z` > 0 N (robot on the ground)")
    Pel, bp, Fb, sl, D = model._elements
    k, m = D.shape
    e_c = np.zeros((n, k)) if floor is None else np.broadcast_to(
        np.asarray(floor, dtype=float), (n, k))
    e = e_c @ D                                                   # element offsets (n, m)
    c0 = Pel.mean(axis=0)
    L = float(np.max(np.linalg.norm(Pel - c0, axis=1)))
    A = np.vstack([np.ones(m), ((Pel - c0) / L).T])               # (3, m), normalised
    B = f_z[:, None] * np.column_stack([np.ones(n), (cop - c0) / L])   # (n, 3)

    poly = support_polygon(Pel)
    if poly.is_segment:
        supported = np.zeros(n, dtype=bool)
    else:
        dist, side = _edge_distances((poly.vertices - c0) / L, (cop - c0) / L)
        supported = np.all(side >= 0.0, axis=1) | (dist.min(axis=1) <= _INSIDE_TOL)

    F = np.full((n, m), np.nan)
    U = np.full((n, 3), np.nan)
    if model.statically_determinate:
        F[supported] = np.linalg.solve(A, B[supported].T).T
        F = np.where(F < 0.0, 0.0, F)     # round-off on an edge
        U[supported] = _deflection_plane(A, bp, Fb, sl, F[supported], e[supported])
    else:
        _solve_all(A, bp, Fb, sl, B, e, supported, F, U)
    N = F @ D.T
    lifted = supported[:, None] & (N <= 1e-9 * f_z[:, None])
    N = np.where(lifted, 0.0, N)
    spring = model.kind == "sprung"
    top = supported[:, None] & model.driven & (N < model.preload) if spring else lifted & False
    bottom = (supported[:, None] & model.driven & (N > model.preload + model.spring_rate
                                                   * model.travel) if spring else lifted & False)
    tilt = U[:, 1:] / L
    return SupportLoads(N=N, lifted=lifted, supported=supported, topped_out=top & ~lifted,
                        bottomed=bottom, tilt=tilt, model=model.describe())


def _deflection_plane(A, bp, Fb, sl, F, e):
    """u of eq. (1) that gives the forces F (statically determinate case)."""
    d = np.zeros_like(F)
    for j in range(F.shape[1]):
        for t in np.flatnonzero(np.isfinite(bp[j])):
            b_next = bp[j, t + 1] if t + 1 < bp.shape[1] else np.inf
            F_next = Fb[j, t + 1] if np.isfinite(b_next) else np.inf
            sel = (F[:, j] >= Fb[j, t]) & (F[:, j] <= F_next)
            d[sel, j] = bp[j, t] + (F[sel, j] - Fb[j, t]) / sl[j, t]
    return np.linalg.solve(A.T, (d + e).T).T


def _pieces_batch(A, bp, Fb, sl, B, e, u, F, U, rows, iterations=12):
    """Many instants at once: from u, put each element on the piece of its law
    that its deflection reaches and solve (2) on those pieces (the full Newton
    step of `_newton`, exact on a piecewise-linear law), until the pieces of
    the solution are the pieces it was solved on.  Fills F and U at those rows
    and returns which rows were solved; the others are left to `_newton`."""
    done = np.zeros(len(rows), dtype=bool)
    m = A.shape[1]
    cols = np.arange(m)
    scale = np.abs(B[:, 0])
    for _ in range(iterations):
        live = np.flatnonzero(~done)
        if live.size == 0:
            break
        d = u[live] @ A - e[live]
        _, s, seg = _force(bp, Fb, sl, d)                       # s = 0 where lifted
        b_seg, f_seg = bp[cols, seg], Fb[cols, seg]
        H = np.einsum("im,nm,jm->nij", A, s, A)
        good = np.linalg.det(H) > 1e-12 * np.max(sl) ** 3
        if not np.any(good):
            break
        live, s, seg = live[good], s[good], seg[good]
        b_seg, f_seg, H = b_seg[good], f_seg[good], H[good]
        F0 = np.where(s > 0.0, f_seg - s * (e[live] + b_seg), 0.0)
        un = np.linalg.solve(H, (B[live] - F0 @ A.T)[..., None])[..., 0]
        dn = un @ A - e[live]
        Fn, _, seg_n = _force(bp, Fb, sl, dn)
        same = np.all((seg_n == seg) & ((dn > 0.0) == (s > 0.0)), axis=1)
        resid = np.linalg.norm(Fn @ A.T - B[live], axis=1) <= _TOL * scale[live]
        fin = same & resid
        F[rows[live[fin]]] = Fn[fin]
        U[rows[live[fin]]] = un[fin]
        done[live[fin]] = True
        u[live] = un
    return done


def _solve_all(A, bp, Fb, sl, B, e, supported, F, U):
    """Fill F (n, m) and U (n, 3) where supported: one linear solve for the
    instants whose elements all stay on the piece of the law the first
    instant's solution uses, Newton for the others."""
    idx = np.flatnonzero(supported)
    if idx.size == 0:
        return
    # the linear piece each element sits on at a typical instant
    j0 = idx[len(idx) // 2]
    u0 = np.linalg.solve((A * sl[:, 0]) @ A.T, B[j0])
    F0, U0 = np.full((1, A.shape[1]), np.nan), np.full((1, 3), np.nan)
    if _pieces_batch(A, bp, Fb, sl, B[j0:j0 + 1], e[j0:j0 + 1], u0[None].copy(), F0, U0,
                     np.zeros(1, dtype=int))[0]:
        u0 = U0[0]                                  # exact on its pieces, no line search
    else:
        u0, _ = _newton(A, bp, Fb, sl, B[j0], e[j0], u0)
    _, _, seg = _force(bp, Fb, sl, (A.T @ u0 - e[j0])[None])
    seg = seg[0]
    rows = np.arange(len(seg))
    b_seg, f_seg, s_seg = bp[rows, seg], Fb[rows, seg], sl[rows, seg]
    hi = np.where(seg + 1 < bp.shape[1], bp[rows, np.minimum(seg + 1, bp.shape[1] - 1)], np.inf)
    # F_j = f_seg + s_seg (a_jᵀu − e_j − b_seg)  →  H u = b − A (f_seg − s_seg (e + b_seg))
    H = (A * s_seg) @ A.T
    rhs = B[idx] - (f_seg - s_seg * (e[idx] + b_seg)) @ A.T
    u = np.linalg.solve(H, rhs.T).T
    d = u @ A - e[idx]
    ok = np.all((d >= b_seg - 1e-15) & (d <= hi + 1e-15) & (d > 0.0), axis=1)
    F[idx[ok]] = f_seg + s_seg * (d[ok] - b_seg)
    U[idx[ok]] = u[ok]
    rest = idx[~ok]
    if rest.size:
        done = _pieces_batch(A, bp, Fb, sl, B[rest], e[rest], u[~ok], F, U, rest)
        rest = rest[~done]
    for j in rest:
        uj, done = _newton(A, bp, Fb, sl, B[j], e[j], u0)
        if not done:
            raise ValueError(f"normal loads: Newton's method did not converge at instant {j}")
        Fj, _, _ = _force(bp, Fb, sl, (A.T @ uj - e[j])[None])
        F[j], U[j] = Fj[0], uj


_SUPPORT_MODELS = weakref.WeakKeyDictionary()


def support_model(robot) -> SupportModel:
    """The robot's `SupportModel` (from its description), built once per robot
    (kept beside it, dropped with it)."""
    cached = _SUPPORT_MODELS.get(robot)
    if cached is not None:
        return cached
    spec = robot.description.support
    model = SupportModel(
        kind=spec.model, names=tuple(c.name for c in robot.contacts),
        positions=np.array([c.position for c in robot.contacts]),
        driven=np.array([c.driven for c in robot.contacts]),
        stiffness=np.array(spec.stiffness, dtype=float), preload=spec.preload,
        spring_rate=spec.spring_rate, travel=spec.travel,
        rockers=tuple((a, b, np.array(p)) for a, b, p in spec.rockers),
        unevenness=spec.unevenness)
    _SUPPORT_MODELS[robot] = model
    return model


def check_standing(robot):
    """Refuse a robot that cannot stand: ConfigError naming the neutral pose and
    each [poses] entry whose centre of mass projects outside the support polygon
    (statics: the weight's line of action must meet the support; the polygon's
    corners are the drive wheels, the free casters and the rocker pivots)."""
    import pinocchio as pin

    from ..errors import ConfigError

    model = support_model(robot)
    polygon = support_polygon(model.element_positions)
    d = robot.description
    where = d.path.name
    if polygon.is_segment:
        raise ConfigError(f"{where}: the drive wheels and casters lie on one line: the base "
                          "cannot stand (move a caster off the drive axle's line)")
    poses = [("neutral pose (arm at zero)", robot.configuration())]
    poses += [(f"[poses] {name}", robot.configuration(arm=name)) for name in d.poses]
    data = robot.model.createData()
    bad = []
    for name, q in poses:
        c = pin.centerOfMass(robot.model, data, q, False)
        margin, _ = polygon.margin(c[:2])
        if margin < 0.0:
            bad.append(f"{name} (COM at x = {c[0]:.3f}, y = {c[1]:.3f} m, "
                       f"{-margin * 1000:.0f} mm outside)")
    if bad:
        raise ConfigError(f"{where}: the centre of mass lies outside the support polygon at "
                          f"{'; '.join(bad)}: the robot tips over standing still")


def lift_off_spans(t, lifted, names):
    """Where contacts carry no load: [{"contact", "start", "end"}] per unbroken run
    of lifted samples (s; `end` the last lifted sample), in time order.

    t (n,) s; lifted (n, k) bool; names: k contact names.
    """
    t = np.asarray(t, dtype=float)
    lifted = np.asarray(lifted, dtype=bool)
    spans = []
    for k, name in enumerate(names):
        x = np.concatenate([[False], lifted[:, k], [False]]).astype(int)
        starts, ends = np.flatnonzero(np.diff(x) == 1), np.flatnonzero(np.diff(x) == -1) - 1
        spans += [{"contact": name, "start": float(t[a]), "end": float(t[b])}
                  for a, b in zip(starts, ends)]
    return sorted(spans, key=lambda s: (s["start"], s["contact"]))


def describe_lift_off(spans, limit=3):
    """Lift-off spans in words: "wheel_right lifts off at t = 3.20 s (to 3.85 s)"."""
    if not spans:
        return "no contact lifts off"
    parts = [f"{s['contact']} lifts off at t = {s['start']:.2f} s"
             + (f" (to {s['end']:.2f} s)" if s["end"] > s["start"] else "") for s in spans[:limit]]
    more = len(spans) - limit
    return "; ".join(parts) + (f"; and {more} more" if more > 0 else "")
