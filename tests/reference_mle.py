"""Independent maxima of the linear mixed (growth) model, written for the tests with numpy and scipy only.

Nothing here imports sembridge: these are the yardsticks the tool's two solutions are checked against.

Model (Laird & Ware 1982, Biometrics 38(4)): person i's vector y_i ~ N(X_i b, Z_i G Z_i' + s2 I).
The fixed effects are profiled out by generalised least squares; the criterion is the ML log-likelihood
or the REML criterion (Harville 1977, JASA 72(358)) with the constant (N - p) log(2 pi), the convention of
Bates, Maechler, Bolker & Walker (2015), J. Stat. Softw. 67(1).

Two parameter spaces:
- `psd=True`: G = L L' with L lower triangular (Cholesky factor, any sign): every positive semidefinite G,
  the space of a mixed-model program;
- `psd=False`: G's lower triangle free with each variance >= 0 (G may be indefinite as long as every V_i is
  positive definite): the space of a structural-equation program that only bounds variances.

The score of the profiled criterion is analytic (common practice: dl/dV_i = -1/2 (P_i - V_i^-1 r_i r_i' V_i^-1)
with P_i = V_i^-1 under ML and V_i^-1 - V_i^-1 X_i A^-1 X_i' V_i^-1 under REML); the optimiser runs from
several starts on an internally rescaled problem (outcome SD 1, random-effect columns within [-1, 1]),
then Newton steps on a finite-difference Hessian of that analytic score polish the best solution until the
(projected) score is below 1e-8.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg, optimize

from reference_panel import clpm_ols, ri_clpm_mle  # noqa: F401  (re-exported: the cross-lagged yardsticks)

LOG_2PI = np.log(2.0 * np.pi)
TOL_SCORE = 1e-8
S2_FLOOR = 0.0     # lower bound of a residual variance (psd=False; V_i must stay positive definite)


@dataclass(frozen=True)
class GrowthMaximum:
    """The maximum on the user's scale; standard errors are NaN on a boundary."""

    fixed: np.ndarray
    G: np.ndarray
    s2: float | np.ndarray   # an array (one per wave) with per-wave residual variances
    loglik: float
    se_fixed: np.ndarray
    se_G: np.ndarray
    se_s2: float | np.ndarray
    score_norm: float          # largest |score| over the free parameters, on the internal scale
    boundary: bool             # a variance at 0 (psd=False) or a singular G (psd=True)


class _Design:
    """Persons grouped by their random-effect design (one V per group), on the internal scale."""

    def __init__(self, y, X, Z, person, waves=None):
        y, X, Z = np.asarray(y, float), np.asarray(X, float), np.asarray(Z, float)
        person = np.asarray(person)
        labels, widx = np.unique(np.zeros(len(y)) if waves is None else np.asarray(waves), return_inverse=True)
        self.W = len(labels)
        self.sy = float(np.std(y))
        self.dz = np.maximum(np.abs(Z).max(axis=0), 1e-12)
        ys, Zs = y / self.sy, Z / self.dz
        self.N, self.p, self.q = len(y), X.shape[1], Z.shape[1]
        rows = {}
        for index, who in enumerate(person):
            rows.setdefault(who, []).append(index)
        groups = {}
        for idx in rows.values():
            key = (len(idx), Zs[idx].round(12).tobytes(), widx[idx].tobytes())
            groups.setdefault(key, []).append(idx)
        self.groups = []
        for members in groups.values():
            idx = np.array(members)
            self.groups.append((Zs[idx[0]], X[idx], ys[idx], widx[idx[0]]))

    def to_user(self, b, Gs, s2s):
        """Undo the internal scaling."""
        G = Gs / np.outer(self.dz, self.dz) * self.sy ** 2
        return b * self.sy, G, s2s * self.sy ** 2


def _evaluate(design: _Design, G, s2, reml: bool, score: bool = True):
    """Profiled criterion, GLS fixed effects, A = sum X'V^-1X, and the score in (G, s2) as (M, d_s2).

    `s2` holds one residual variance per wave (one in all when the design has no waves).
    The score is dl = tr(M dG) + d_s2 . ds2. Returns None when some V_i is not positive definite.
    """
    q, p = design.q, design.p
    A, c, logdet = np.zeros((p, p)), np.zeros(p), 0.0
    cache = []
    for Zg, Xg, yg, wg in design.groups:
        V = Zg @ G @ Zg.T + np.diag(s2[wg])
        try:
            C = linalg.cho_factor(V, lower=True)
        except linalg.LinAlgError:
            return None
        if not np.all(np.diag(C[0]) > 0):
            return None
        Vinv = linalg.cho_solve(C, np.eye(len(Zg)))
        logdet += len(yg) * 2.0 * np.log(np.diag(C[0])).sum()
        VX = np.einsum("st,mtp->msp", Vinv, Xg)
        A += np.einsum("mtp,mtr->pr", Xg, VX)
        c += np.einsum("mtp,mt->p", VX, yg)
        cache.append((Zg, Xg, yg, wg, Vinv, VX))
    b = linalg.solve(A, c, assume_a="pos")
    quad, M, ds2 = 0.0, np.zeros((q, q)), np.zeros(design.W)
    Ainv = linalg.inv(A) if reml else None
    for Zg, Xg, yg, wg, Vinv, VX in cache:
        R = (yg - Xg @ b) @ Vinv            # rows V^-1 r_i (V symmetric)
        quad += np.einsum("mt,mt->", R, yg - Xg @ b)
        if score:
            S = len(yg) * Vinv - R.T @ R
            if reml:
                S -= np.einsum("msp,pr,mtr->st", VX, Ainv, VX)
            M += -0.5 * Zg.T @ S @ Zg
            np.add.at(ds2, wg, -0.5 * np.diag(S))
    n_eff = design.N - (design.p if reml else 0)
    ll = -0.5 * (n_eff * LOG_2PI + logdet + quad)
    if reml:
        ll -= 0.5 * np.linalg.slogdet(A)[1]
    return ll, b, A, M, ds2


# --- parameter vectors ---------------------------------------------------------------------------

def _tril(q):
    return np.tril_indices(q)


def _natural_score(M, ds2, q):
    """Score in (vech G, s2): an off-diagonal entry of G appears twice in the matrix."""
    rows, cols = _tril(q)
    return np.append(np.where(rows == cols, 1.0, 2.0) * M[rows, cols], ds2)


def _unpack(theta, q, psd):
    rows, cols = _tril(q)
    T = np.zeros((q, q))
    T[rows, cols] = theta[:len(rows)]
    if psd:
        return T @ T.T, np.exp(theta[len(rows):])
    return T + np.tril(T, -1).T, theta[len(rows):]


def _theta_score(theta, M, ds2, q, psd):
    rows, cols = _tril(q)
    if not psd:
        return _natural_score(M, ds2, q)
    L = np.zeros((q, q))
    L[rows, cols] = theta[:len(rows)]
    dL = 2.0 * M @ L                       # d tr(M L L') / dL for symmetric M
    return np.append(dL[rows, cols], ds2 * np.exp(theta[len(rows):]))


def _objective(design, reml, psd):
    """Negative criterion and its gradient in theta (a wall of 1e30 where some V_i is not positive definite)."""
    q = design.q

    def f(theta):
        G, s2 = _unpack(theta, q, psd)
        out = _evaluate(design, G, s2, reml) if np.all(s2 >= 0) else None
        if out is None:                         # outside the space: a finite wall the line searches back away from
            return 1e30, np.zeros_like(theta)
        ll, _, _, M, ds2 = out
        return -ll, -_theta_score(theta, M, ds2, q, psd)
    return f


def _starts(q, W, psd):
    """A few spread-out starting points on the internal scale (outcome SD 1)."""
    rows, cols = _tril(q)
    out = []
    for var, s2, corr in [(0.5, 0.3, 0.0), (0.05, 0.5, 0.0), (1.0, 0.1, 0.5), (0.2, 0.2, -0.5), (0.01, 0.8, 0.0)]:
        G = np.full((q, q), corr * var) + np.eye(q) * var * (1 - corr)
        if psd:
            L = np.linalg.cholesky(G)
            out.append(np.append(L[rows, cols], np.full(W, np.log(s2))))
        else:
            out.append(np.append(G[rows, cols], np.full(W, s2)))
    return out


def _bounds(q, W, psd):
    if psd:
        return None
    rows, cols = _tril(q)
    return [(0.0, None) if r == c else (None, None) for r, c in zip(rows, cols)] + [(S2_FLOOR, None)] * W



def _lower(theta, q):
    """Lower bound of each coordinate in the psd=False space: 0 for G's variances, S2_FLOOR for residual
    variances, -inf for covariances."""
    rows, cols = _tril(q)
    return np.append(np.where(rows == cols, 0.0, -np.inf), np.full(len(theta) - len(rows), S2_FLOOR))


def _active(theta, grad, q, psd):
    """Variances held at their bound by a score pointing out of the space (psd=False only)."""
    if psd:
        return np.zeros(len(theta), bool)
    return (theta <= _lower(theta, q) + 1e-9) & (grad > 0)   # grad of the NEGATIVE criterion > 0: wants lower


def _hessian(f, theta, free, step=1e-6):
    """Central differences of the analytic gradient over the free coordinates."""
    idx = np.flatnonzero(free)
    H = np.zeros((len(idx), len(idx)))
    for a, i in enumerate(idx):
        e = np.zeros_like(theta)
        e[i] = step
        H[:, a] = (f(theta + e)[1][idx] - f(theta - e)[1][idx]) / (2 * step)
    return 0.5 * (H + H.T)


def _polish(f, theta, q, psd, rounds=50):
    """Newton steps with backtracking on the free coordinates until the projected score is tiny."""
    value, grad = f(theta)
    for _ in range(rounds):
        active = _active(theta, grad, q, psd)
        theta = np.where(active, _lower(theta, q), theta)
        value, grad = f(theta)
        free = ~active
        if np.abs(grad[free]).max() < TOL_SCORE * 1e-2:
            break
        H = _hessian(f, theta, free)
        try:
            step = -np.linalg.solve(H, grad[free])
        except np.linalg.LinAlgError:
            break
        if grad[free] @ step >= 0:                     # not a descent direction: fall back to the gradient
            step = -grad[free]
        for shrink in 0.5 ** np.arange(30):
            trial = theta.copy()
            trial[free] += shrink * step
            if not psd:
                trial = _clip(trial, q)
            new_value, new_grad = f(trial)
            if new_value <= value + 1e-13 * abs(value):
                break
        else:
            break
        if new_value > value - 1e-15 and np.abs(new_grad[free]).max() >= np.abs(grad[free]).max():
            break
        theta, value, grad = trial, new_value, new_grad
    active = _active(theta, grad, q, psd)
    return theta, value, float(np.abs(grad[~active]).max())


def _clip(theta, q):
    return np.maximum(theta, _lower(theta, q))


def growth_mle(y, X, Z, person, reml: bool = False, psd: bool = True, waves=None) -> GrowthMaximum:
    """The ML (or REML) maximum of y_i ~ N(X_i b, Z_i G Z_i' + s2 I) over the chosen space of G.

    With `waves` (a label per row) the residual variance is one per wave: s2 I becomes diag(s2_wave),
    and `s2`, `se_s2` of the result are arrays in the order of the sorted wave labels.

    The space without the semidefinite constraint contains the other one, so its search also starts
    from the semidefinite maximum (and from that point moved towards an indefinite G).
    """
    design = _Design(y, X, Z, person, waves)
    q = design.q
    f = _objective(design, reml, psd)
    starts = _starts(q, design.W, psd)
    if not psd:
        starts += _from_psd(design, reml, q)
    best = None
    for start in starts:
        method = "BFGS" if psd else "L-BFGS-B"
        res = optimize.minimize(f, start, jac=True, method=method, bounds=_bounds(q, design.W, psd),
                                options={"gtol": 1e-10, "maxiter": 5000} if psd else
                                {"ftol": 1e-15, "gtol": 1e-10, "maxiter": 5000})
        if res.fun < 1e29 and (best is None or res.fun < best.fun):
            best = res
    theta, value, score_norm = _polish(f, best.x, q, psd)
    return _result(design, theta, q, psd, reml, score_norm)


def _from_psd(design, reml, q):
    """Starts for the wider space: the semidefinite maximum, and copies whose variances shrink faster than
    their covariances (towards an indefinite G); only points where every V_i is positive definite."""
    f = _objective(design, reml, True)
    best = min((optimize.minimize(f, s, jac=True, method="BFGS", options={"gtol": 1e-10, "maxiter": 5000})
                for s in _starts(q, design.W, True)), key=lambda r: r.fun)
    theta, _, _ = _polish(f, best.x, q, True)
    G, s2 = _unpack(theta, q, True)
    rows, cols = _tril(q)
    wide = _objective(design, reml, False)
    out = []
    for shrink in (1.0, 0.5, 0.1):
        H = G * shrink
        H[np.diag_indices(q)] = np.diag(G) * shrink ** 2
        start = np.append(H[rows, cols], s2)
        if wide(start)[0] < 1e30:
            out.append(start)
    return out


def _result(design, theta, q, psd, reml, score_norm) -> GrowthMaximum:
    Gs, s2s = _unpack(theta, q, psd)
    ll, b, A, _, _ = _evaluate(design, Gs, s2s, reml)
    fixed, G, s2 = design.to_user(b, Gs, s2s)
    shift = (design.N - (design.p if reml else 0)) * np.log(design.sy)
    se_fixed = np.sqrt(np.diag(linalg.inv(A))) * design.sy
    eig = np.linalg.eigvalsh(Gs)
    boundary = bool(eig.min() < 1e-7 * max(eig.max(), 1e-12)) if psd else bool((np.diag(Gs) < 1e-9).any())
    se_G, se_s2 = _variance_se(design, Gs, s2s, reml, q, boundary)
    s2 = float(s2[0]) if design.W == 1 else s2
    return GrowthMaximum(fixed=fixed, G=G, s2=s2, loglik=float(ll - shift), se_fixed=se_fixed,
                         se_G=se_G, se_s2=se_s2, score_norm=score_norm, boundary=boundary)


def _variance_se(design, Gs, s2s, reml, q, boundary):
    """SEs of (G, s2) from the Hessian of the profiled criterion in natural parameters (NaN on a boundary)."""
    rows, cols = _tril(q)
    if boundary:
        return np.full((q, q), np.nan), float("nan") if design.W == 1 else np.full(design.W, np.nan)
    f = _objective(design, reml, psd=False)
    theta = np.append(Gs[rows, cols], s2s)
    H = _hessian(f, theta, np.ones(len(theta), bool))   # Hessian of the negative criterion
    cov = linalg.inv(H)
    scale = np.append(design.sy ** 2 / (design.dz[rows] * design.dz[cols]), np.full(design.W, design.sy ** 2))
    se = np.sqrt(np.diag(cov)) * scale
    out = np.zeros((q, q))
    out[rows, cols] = se[:len(rows)]
    out[cols, rows] = se[:len(rows)]
    return out, float(se[-1]) if design.W == 1 else se[len(rows):]


def polynomial_design(time, degree: int) -> np.ndarray:
    """Columns 1, t, ..., t^degree (the fixed and the random part of polynomial growth)."""
    time = np.asarray(time, float)
    return np.column_stack([time ** k for k in range(degree + 1)])
