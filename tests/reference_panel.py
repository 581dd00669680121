"""Independent maxima of the cross-lagged family for two outcomes, written for the tests (numpy, scipy only).

Nothing here imports sembridge. Data come as arrays of shape (persons, waves), one per outcome, complete.

- `clpm_ols`: the cross-lagged panel model with time-invariant paths, intercepts and residual (co)variances
  and the first wave taken as given. Its likelihood factorises into wave-to-wave regressions with the same
  regressors in both equations, so the ML solution is pooled least squares (residual (co)variance =
  cross-products / n): common practice for seemingly unrelated regressions with identical regressors.
- `ri_clpm_mle`: the random-intercept cross-lagged panel model (Hamaker, Kuiper & Grasman 2015,
  Psychological Methods 20(1)) as sembridge parameterises it (bridge/compile/panel.py `_ri_clpm`): a free
  mean per outcome and wave; stable traits with free variances and covariance, uncorrelated with the
  first wave's within-person parts; free first-wave within variances and covariance; time-invariant
  autoregressive and cross-lagged paths among the within parts; time-invariant residual variances and one
  residual covariance within each wave. (The published model lets the residual (co)variances differ over
  waves; the tool holds them equal, and so does this yardstick.) Variances are bounded below by 0 and
  covariances are free, the space of a structural-equation program.

With complete data the free wave means are the sample means, and the ML criterion concentrates to
-N/2 [log|Sigma| + tr(Sigma^-1 S)] with S the ML sample covariance (common practice). The implied Sigma is
a polynomial in the parameters, so its derivatives are exact by the complex step; the score is
N/2 tr[(Sigma^-1 S Sigma^-1 - Sigma^-1) dSigma].
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg, optimize

LOG_2PI = np.log(2.0 * np.pi)
NAMES = ("a_x", "a_y", "c_xy", "c_yx", "var_trait_x", "var_trait_y", "cov_trait",
         "var_first_x", "var_first_y", "cov_first", "var_res_x", "var_res_y", "cov_res")
VARIANCES = {"var_trait_x", "var_trait_y", "var_first_x", "var_first_y", "var_res_x", "var_res_y"}


def clpm_ols(wide_x: np.ndarray, wide_y: np.ndarray) -> dict[str, float]:
    """Pooled least squares of each outcome on both lagged outcomes (persons with every value of a pair).

    Keys: intercept_x, a_x (x on lagged x), c_yx (lagged y -> x), var_res_x, and the same for y
    (intercept_y, a_y, c_xy, var_res_y), cov_res, n (rows used); `se_<key>` for the coefficients
    (sigma^2 (X'X)^-1 with the ML sigma^2 = RSS / n: common practice).
    """
    x, y = np.asarray(wide_x, float), np.asarray(wide_y, float)
    rows = np.column_stack([x[:, 1:].ravel(), y[:, 1:].ravel(), x[:, :-1].ravel(), y[:, :-1].ravel()])
    rows = rows[np.isfinite(rows).all(axis=1)]
    X = np.column_stack([np.ones(len(rows)), rows[:, 2], rows[:, 3]])
    bx, *_ = np.linalg.lstsq(X, rows[:, 0], rcond=None)
    by, *_ = np.linalg.lstsq(X, rows[:, 1], rcond=None)
    ex, ey = rows[:, 0] - X @ bx, rows[:, 1] - X @ by
    n = len(rows)
    out = {"intercept_x": bx[0], "a_x": bx[1], "c_yx": bx[2], "intercept_y": by[0], "c_xy": by[1], "a_y": by[2],
           "var_res_x": ex @ ex / n, "var_res_y": ey @ ey / n, "cov_res": ex @ ey / n, "n": n}
    inverse = np.diag(np.linalg.inv(X.T @ X))
    for names, var in ((("intercept_x", "a_x", "c_yx"), out["var_res_x"]), (("intercept_y", "c_xy", "a_y"), out["var_res_y"])):
        out.update({f"se_{name}": float(np.sqrt(var * v)) for name, v in zip(names, inverse)})
    return {key: float(value) for key, value in out.items()}


@dataclass(frozen=True)
class PanelMaximum:
    """Parameters by name (see NAMES), the wave means, the log-likelihood, and how the search went."""

    params: dict[str, float]
    means: np.ndarray          # (waves, 2): the free mean of each outcome at each wave
    loglik: float
    score_norm: float
    se: dict[str, float]       # from the inverse Hessian of the log-likelihood (NaN for a variance at 0)
    local_maxima: tuple[float, ...]   # distinct log-likelihoods the starts ended at (highest first)


def ri_clpm_sigma(theta: np.ndarray, T: int) -> np.ndarray:
    """Implied covariance of (x_1, y_1, x_2, y_2, ...) under the tool's RI-CLPM (works for complex theta)."""
    a_x, a_y, c_xy, c_yx, tx, ty, tc, fx, fy, fc, rx, ry, rc = theta
    B = np.array([[a_x, c_yx], [c_xy, a_y]])          # row: outcome at t; column: outcome at t - 1
    psi = np.array([[rx, rc], [rc, ry]])
    cov = [np.array([[fx, fc], [fc, fy]])]
    for _ in range(1, T):
        cov.append(B @ cov[-1] @ B.T + psi)
    trait = np.array([[tx, tc], [tc, ty]])
    sigma = np.zeros((2 * T, 2 * T), dtype=np.result_type(theta, float))
    for t in range(T):
        lag = cov[t]
        for s in range(t, T):                           # Cov(w_s, w_t) = B^(s-t) Cov(w_t)
            sigma[2 * s:2 * s + 2, 2 * t:2 * t + 2] = lag + trait
            sigma[2 * t:2 * t + 2, 2 * s:2 * s + 2] = (lag + trait).T
            lag = B @ lag
    return sigma


def _criterion(S: np.ndarray, N: int, T: int):
    """Negative concentrated log-likelihood and its exact score (complex-step derivatives of Sigma)."""
    def f(theta):
        sigma = ri_clpm_sigma(theta, T)
        try:
            C = linalg.cho_factor(sigma, lower=True)
        except linalg.LinAlgError:
            return 1e30, np.zeros_like(theta)
        inv = linalg.cho_solve(C, np.eye(2 * T))
        logdet = 2.0 * np.log(np.diag(C[0])).sum()
        value = 0.5 * N * (logdet + np.trace(inv @ S) + 2 * T * LOG_2PI)
        W = 0.5 * N * (inv - inv @ S @ inv)             # d value / d Sigma
        grad = np.empty_like(theta)
        for k in range(len(theta)):
            step = np.zeros(len(theta), complex)
            step[k] = 1e-30j
            grad[k] = np.sum(W * ri_clpm_sigma(theta + step, T).imag) / 1e-30
        return value, grad
    return f


def _starts(S: np.ndarray, T: int, n_starts: int, seed: int) -> list[np.ndarray]:
    """Spread-out starting points: paths from -0.5 to 1.2, the total variance split at random."""
    rng = np.random.default_rng(seed)
    vx, vy = np.mean(np.diag(S)[0::2]), np.mean(np.diag(S)[1::2])
    out = []
    for _ in range(n_starts):
        share = rng.uniform(0.05, 0.9)
        paths = [rng.uniform(-0.5, 1.2), rng.uniform(-0.5, 1.2), rng.uniform(-0.4, 0.4), rng.uniform(-0.4, 0.4)]
        out.append(np.array(paths + [share * vx, share * vy, 0.0, (1 - share) * vx, (1 - share) * vy, 0.0,
                                     0.5 * (1 - share) * vx, 0.5 * (1 - share) * vy, 0.0]))
    return out


def _polish(f, theta, free, rounds=40, step=1e-6):
    """Newton steps (finite-difference Hessian of the exact score) with backtracking on the free coordinates."""
    value, grad = f(theta)
    idx = np.flatnonzero(free)
    for _ in range(rounds):
        if np.abs(grad[idx]).max() < 1e-9:
            break
        H = np.zeros((len(idx), len(idx)))
        for a, i in enumerate(idx):
            e = np.zeros_like(theta)
            e[i] = step
            H[:, a] = (f(theta + e)[1][idx] - f(theta - e)[1][idx]) / (2 * step)
        H = 0.5 * (H + H.T)
        direction = -np.linalg.lstsq(H, grad[idx], rcond=None)[0]
        if grad[idx] @ direction >= 0:
            direction = -grad[idx]
        for shrink in 0.5 ** np.arange(40):
            trial = theta.copy()
            trial[idx] += shrink * direction
            new_value, new_grad = f(trial)
            if new_value <= value:
                break
        else:
            break
        theta, value, grad = trial, new_value, new_grad
    return theta, value, float(np.abs(grad[idx]).max())


def ri_clpm_mle(wide_x, wide_y, n_starts: int = 12, seed: int = 20261202) -> PanelMaximum:
    """The global ML maximum (over n_starts random starts, then Newton polishing) of the tool's RI-CLPM."""
    x, y = np.asarray(wide_x, float), np.asarray(wide_y, float)
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise ValueError("ri_clpm_mle needs complete data")
    N, T = x.shape
    data = np.empty((N, 2 * T))
    data[:, 0::2], data[:, 1::2] = x, y
    means = data.mean(axis=0)
    S = np.cov(data, rowvar=False, bias=True)
    f = _criterion(S, N, T)
    bounds = [(0.0, None) if name in VARIANCES else (None, None) for name in NAMES]
    ends = []
    for start in _starts(S, T, n_starts, seed):
        res = optimize.minimize(f, start, jac=True, method="L-BFGS-B", bounds=bounds,
                                options={"ftol": 1e-15, "gtol": 1e-9, "maxiter": 10000})
        if res.fun < 1e29:
            ends.append(res)
    ends.sort(key=lambda r: r.fun)
    best = ends[0].x
    at_bound = np.array([name in VARIANCES for name in NAMES]) & (best <= 1e-10)
    theta, value, score = _polish(f, np.where(at_bound, 0.0, best), ~at_bound)
    maxima = sorted({round(-r.fun, 4) for r in ends}, reverse=True)
    return PanelMaximum(params=dict(zip(NAMES, map(float, theta))), means=means.reshape(T, 2),
                        loglik=float(-value), score_norm=score, se=_standard_errors(f, theta, ~at_bound),
                        local_maxima=tuple(maxima))


def _standard_errors(f, theta, free, step=1e-6) -> dict[str, float]:
    """Observed-information standard errors of the covariance parameters (the means are not included)."""
    idx = np.flatnonzero(free)
    H = np.zeros((len(idx), len(idx)))
    for a, i in enumerate(idx):
        e = np.zeros_like(theta)
        e[i] = step
        H[:, a] = (f(theta + e)[1][idx] - f(theta - e)[1][idx]) / (2 * step)
    se = np.full(len(theta), np.nan)
    se[idx] = np.sqrt(np.diag(np.linalg.inv(0.5 * (H + H.T))))
    return dict(zip(NAMES, map(float, se)))
