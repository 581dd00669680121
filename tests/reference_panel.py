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


def _polish(f, theta, variance, rounds=40, step=1e-6):
    """Projected Newton steps (finite-difference Hessian of the exact score) with backtracking.

    `variance` marks parameters bounded below by 0; one at 0 whose score points below 0 is held there.
    Returns the point, the criterion, the largest free |score| and the free mask.
    """
    value, grad = f(theta)
    for _ in range(rounds):
        free = ~(variance & (theta <= 0.0) & (grad > 0))
        idx = np.flatnonzero(free)
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
            trial = np.where(variance, np.maximum(trial, 0.0), trial)
            new_value, new_grad = f(trial)
            if new_value <= value:
                break
        else:
            break
        theta, value, grad = trial, new_value, new_grad
    free = ~(variance & (theta <= 0.0) & (grad > 0))
    return theta, value, float(np.abs(grad[free]).max()), free


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
    variance = np.array([name in VARIANCES for name in NAMES])
    theta, value, score, free = _polish(f, np.where(variance & (best <= 1e-10), 0.0, best), variance)
    maxima = sorted({round(-r.fun, 4) for r in ends}, reverse=True)
    return PanelMaximum(params=dict(zip(NAMES, map(float, theta))), means=means.reshape(T, 2),
                        loglik=float(-value), score_norm=score, se=_standard_errors(f, theta, free),
                        local_maxima=tuple(maxima))


def _standard_errors(f, theta, free, names=NAMES, step=1e-6) -> dict[str, float]:
    """Observed-information standard errors (NaN for a parameter held at its bound)."""
    idx = np.flatnonzero(free)
    H = np.zeros((len(idx), len(idx)))
    for a, i in enumerate(idx):
        e = np.zeros_like(theta)
        e[i] = step
        H[:, a] = (f(theta + e)[1][idx] - f(theta - e)[1][idx]) / (2 * step)
    se = np.full(len(theta), np.nan)
    se[idx] = np.sqrt(np.diag(np.linalg.inv(0.5 * (H + H.T))))
    return dict(zip(names, map(float, se)))


# --- the dynamic panel ---------------------------------------------------------------------------

def dynamic_panel_names(relaxed: bool) -> tuple[str, ...]:
    """Parameter names: first-wave means and (co)variances, intercepts, paths, person effects, residuals."""
    names = ["m_x", "m_y", "var_first_x", "var_first_y", "cov_first", "intercept_x", "intercept_y",
             "a_x", "a_y", "c_xy", "c_yx", "var_trait_x", "var_trait_y", "var_res_x", "var_res_y"]
    if relaxed:
        names += ["cov_trait", "cov_res", "g_x_x", "g_x_y", "g_y_x", "g_y_y"]   # g_k_j = Cov(person k, first-wave j)
    return tuple(names)


def dynamic_panel_moments(theta, T: int, relaxed: bool):
    """Implied mean and covariance of (x_1, y_1, ..., x_T, y_T) (works for complex theta).

    v_1 is given (free means and covariance); for t >= 2, v_t = i + B v_{t-1} + h + e_t with person
    effects h (mean 0) and residuals e_t (one covariance for all waves). Restricted (Allison, Williams &
    Moral-Benito 2017 call it the random-effects form): h unrelated to v_1 and to each other, residuals of
    the two equations uncorrelated. Relaxed: all three covariances free, as in the tool's relaxed form.
    """
    p = dict(zip(dynamic_panel_names(relaxed), theta))
    get = lambda key: p.get(key, 0.0)  # noqa: E731  (fixed at 0 in the restricted form)
    B = np.array([[p["a_x"], p["c_yx"]], [p["c_xy"], p["a_y"]]])
    first = np.array([[p["var_first_x"], p["cov_first"]], [p["cov_first"], p["var_first_y"]]])
    trait = np.array([[p["var_trait_x"], get("cov_trait")], [get("cov_trait"), p["var_trait_y"]]])
    g = np.array([[get("g_x_x"), get("g_x_y")], [get("g_y_x"), get("g_y_y")]])     # rows: person effect
    residual = np.array([[p["var_res_x"], get("cov_res")], [get("cov_res"), p["var_res_y"]]])
    base = np.block([[first, g.T], [g, trait]])                                   # Cov(v_1, h)
    intercept = np.array([p["intercept_x"], p["intercept_y"]])
    dtype = np.result_type(theta, float)
    mean, L = [np.array([p["m_x"], p["m_y"]])], [np.hstack([np.eye(2), np.zeros((2, 2))]).astype(dtype)]
    M = [np.zeros((2, 2 * (T - 1)), dtype)]
    for t in range(1, T):
        mean.append(intercept + B @ mean[-1])
        L.append(B @ L[-1] + np.hstack([np.zeros((2, 2)), np.eye(2)]))
        step = B @ M[-1]
        step[:, 2 * (t - 1):2 * t] += np.eye(2)
        M.append(step)
    L, M = np.vstack(L), np.vstack(M)
    sigma = L @ base @ L.T + M @ np.kron(np.eye(T - 1), residual) @ M.T
    return np.concatenate(mean), sigma


def _mean_criterion(data: np.ndarray, moments):
    """Negative full-information log-likelihood (complete data) with its exact complex-step score."""
    N, k = data.shape
    xbar, S = data.mean(axis=0), np.cov(data, rowvar=False, bias=True)

    def f(theta):
        mu, sigma = moments(theta)
        try:
            C = linalg.cho_factor(sigma, lower=True)
        except linalg.LinAlgError:
            return 1e30, np.zeros_like(theta)
        inv = linalg.cho_solve(C, np.eye(k))
        d = xbar - mu
        value = 0.5 * N * (k * LOG_2PI + 2.0 * np.log(np.diag(C[0])).sum() + np.trace(inv @ S) + d @ inv @ d)
        W = 0.5 * N * (inv - inv @ (S + np.outer(d, d)) @ inv)
        w = -N * inv @ d
        grad = np.empty_like(theta)
        for j in range(len(theta)):
            step = np.zeros(len(theta), complex)
            step[j] = 1e-30j
            dmu, dsigma = moments(theta + step)
            grad[j] = (np.sum(W * dsigma.imag) + w @ dmu.imag) / 1e-30
        return value, grad
    return f


def dynamic_panel_mle(wide_x, wide_y, relaxed: bool = True, n_starts: int = 4, seed: int = 20261202) -> PanelMaximum:
    """The ML maximum of the two-outcome dynamic panel (complete data), variances >= 0, several starts.

    Fitted to the outcomes divided by their SDs (a well-scaled problem) and converted back exactly.
    """
    x, y = np.asarray(wide_x, float), np.asarray(wide_y, float)
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise ValueError("dynamic_panel_mle needs complete data")
    sx, sy = float(np.std(x)), float(np.std(y))
    fit = _dynamic_panel_scaled(x / sx, y / sy, relaxed, n_starts, seed)
    factor = _scale_factors(dynamic_panel_names(relaxed), sx, sy)
    N, T = x.shape
    return PanelMaximum(params={k: v * factor[k] for k, v in fit.params.items()},
                        means=fit.means * np.array([sx, sy]), loglik=fit.loglik - N * T * np.log(sx * sy),
                        score_norm=fit.score_norm, se={k: v * abs(factor[k]) for k, v in fit.se.items()},
                        local_maxima=tuple(m - N * T * np.log(sx * sy) for m in fit.local_maxima))


def _scale_factors(names, sx: float, sy: float) -> dict[str, float]:
    """Multiplier taking each parameter from the SD-scaled outcomes back to the data's units."""
    unit = {"x": sx, "y": sy}
    out = {}
    for name in names:
        ends = name.split("_")[1:]
        if name.startswith(("m_", "intercept_")):
            out[name] = unit[ends[-1]]
        elif name in ("a_x", "a_y"):
            out[name] = 1.0
        elif name == "c_xy":                      # x -> y
            out[name] = sy / sx
        elif name == "c_yx":
            out[name] = sx / sy
        elif name.startswith("var_"):
            out[name] = unit[ends[-1]] ** 2
        elif name.startswith("g_"):               # Cov(person effect k, first-wave j)
            out[name] = unit[ends[0]] * unit[ends[1]]
        else:                                     # cov_first, cov_trait, cov_res
            out[name] = sx * sy
    return out


def _dynamic_panel_scaled(x, y, relaxed, n_starts, seed) -> PanelMaximum:
    N, T = x.shape
    data = np.empty((N, 2 * T))
    data[:, 0::2], data[:, 1::2] = x, y
    names = dynamic_panel_names(relaxed)
    f = _mean_criterion(data, lambda theta: dynamic_panel_moments(theta, T, relaxed))
    ols = clpm_ols(x, y)
    rng = np.random.default_rng(seed)
    bounds = [(0.0, None) if n.startswith("var_") else (None, None) for n in names]
    ends = []
    for s in range(n_starts):
        share = 0.0 if s == 0 else rng.uniform(0.05, 0.8)       # the first start is pooled least squares
        start = {"m_x": x[:, 0].mean(), "m_y": y[:, 0].mean(), "var_first_x": x[:, 0].var(),
                 "var_first_y": y[:, 0].var(), "cov_first": np.cov(x[:, 0], y[:, 0], bias=True)[0, 1],
                 **{k: ols[k] * (1 - share if k[0] in "ac" else 1) for k in ("intercept_x", "intercept_y",
                                                                           "a_x", "a_y", "c_xy", "c_yx")},
                 "var_trait_x": share * ols["var_res_x"], "var_trait_y": share * ols["var_res_y"],
                 "var_res_x": (1 - share) * ols["var_res_x"], "var_res_y": (1 - share) * ols["var_res_y"]}
        theta = np.array([start.get(n, 0.0) for n in names])
        res = optimize.minimize(f, theta, jac=True, method="L-BFGS-B", bounds=bounds,
                                options={"ftol": 1e-15, "gtol": 1e-9, "maxiter": 20000})
        if res.fun < 1e29:     # the quasi-Newton search can stall on this surface: Newton-polish every end
            ends.append(_polished_end(f, res.x, names))
    ends.sort(key=lambda end: end[1])
    theta, value, score, free = ends[0]
    return PanelMaximum(params=dict(zip(names, map(float, theta))), means=data.mean(axis=0).reshape(T, 2),
                        loglik=float(-value), score_norm=score, se=_standard_errors(f, theta, free, names),
                        local_maxima=tuple(sorted({round(-end[1], 4) for end in ends}, reverse=True)))


def _polished_end(f, theta, names):
    """Newton polish from one search's end (variances bounded below by 0)."""
    variance = np.array([n.startswith("var_") for n in names])
    return _polish(f, np.where(variance & (theta <= 1e-10), 0.0, theta), variance)
