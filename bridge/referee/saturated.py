"""The two reference models of absolute fit over the waves: saturated and independence.

Both model the outcome at every wave given the predictors (the predictors are conditioned on, as in
both forms): each wave's mean is a free regression on the predictors (a free mean when there are
none). The saturated model leaves the residual covariance over the waves unrestricted; the
independence baseline keeps only one variance per wave (no covariances).

With missing occasions the saturated model's full-information maximum is found by the EM algorithm
for a multivariate normal regression with missing outcomes (Dempster, Laird & Rubin 1977; Little &
Rubin 2002, ch. 11). We write it ourselves: none of our dependencies offers a multivariate-normal EM
with missing values, and with complete predictors each step is two closed-form lines.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .likelihood import LOG_2PI

EM_TOLERANCE = 1e-11     # relative change of the log-likelihood that ends the iterations
EM_MAX_STEPS = 20_000


class NoSaturatedMaximum(ValueError):
    """The saturated model has no maximum on these data (the message says why, in words)."""


@dataclass(frozen=True)
class Saturated:
    """The saturated model's maximum: coefficients (predictor columns x waves), covariance, log-likelihood."""

    coefficients: np.ndarray
    covariance: np.ndarray
    log_likelihood: float
    steps: int


def _patterns(Y: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
    """(seen waves, persons) for every pattern of observed waves with at least one observation."""
    seen = np.isfinite(Y)
    patterns, which = np.unique(seen, axis=0, return_inverse=True)
    return [(pattern, np.flatnonzero(which.ravel() == g)) for g, pattern in enumerate(patterns) if pattern.any()]


def _start(Y: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each wave's own regression on the persons seen there, and their residual variances."""
    B = np.zeros((X.shape[1], Y.shape[1]))
    variances = np.ones(Y.shape[1])
    for w in range(Y.shape[1]):
        seen = np.isfinite(Y[:, w])
        B[:, w] = np.linalg.lstsq(X[seen], Y[seen, w], rcond=None)[0]
        variances[w] = float(np.mean((Y[seen, w] - X[seen] @ B[:, w]) ** 2))
    return B, variances


def _e_step(Y: np.ndarray, mean: np.ndarray, cov: np.ndarray, patterns) -> tuple[np.ndarray, np.ndarray, float]:
    """The completed outcomes, the summed conditional covariance of the missing parts, and the observed-data
    log-likelihood at these parameters (one factorisation per pattern serves all three)."""
    filled, extra, total = Y.copy(), np.zeros_like(cov), 0.0
    for seen, rows in patterns:
        L = np.linalg.cholesky(cov[np.ix_(seen, seen)])
        residual = Y[np.ix_(rows, seen)] - mean[np.ix_(rows, seen)]
        white = np.linalg.solve(L, residual.T)
        total -= 0.5 * (white.size * LOG_2PI + len(rows) * 2.0 * np.log(np.diag(L)).sum() + float((white ** 2).sum()))
        gone = ~seen
        if gone.any():
            weights = np.linalg.solve(L.T, np.linalg.solve(L, cov[np.ix_(seen, gone)]))
            filled[np.ix_(rows, gone)] = mean[np.ix_(rows, gone)] + residual @ weights
            extra[np.ix_(gone, gone)] += len(rows) * (cov[np.ix_(gone, gone)] - cov[np.ix_(gone, seen)] @ weights)
    return filled, extra, float(total)


def saturated(Y: np.ndarray, X: np.ndarray) -> Saturated:
    """Maximum of the saturated model: Y (persons x waves, NaN missing) on X (persons x columns, complete)."""
    keep = np.isfinite(Y).any(axis=1)
    Y, X = Y[keep], X[keep]
    if len(Y) < Y.shape[1] + X.shape[1]:    # the residuals of N persons on k columns span at most N - k dimensions
        raise NoSaturatedMaximum(f"the saturated model needs at least as many persons ({len(Y)}) as variables and "
                                 f"predictor columns together ({Y.shape[1]} + {X.shape[1]}) to have a maximum")
    patterns = _patterns(Y)
    B, variances = _start(Y, X)
    cov = np.diag(variances)
    solve_x = np.linalg.pinv(X)
    before, steps = -np.inf, 0
    for steps in range(1, EM_MAX_STEPS + 1):
        try:
            filled, extra, now = _e_step(Y, X @ B, cov, patterns)   # `now`: the log-likelihood at B, cov
        except np.linalg.LinAlgError:
            raise NoSaturatedMaximum("the saturated model's covariance becomes singular on these data (some "
                                     "waves are never observed together, or vary too little)") from None
        if now - before <= EM_TOLERANCE * max(1.0, abs(now)):
            break
        before = now
        B = solve_x @ filled
        residual = filled - X @ B
        cov = (residual.T @ residual + extra) / len(Y)
    return Saturated(B, cov, now, steps)


def independence_log_likelihood(Y: np.ndarray, X: np.ndarray) -> float:
    """Maximum of the baseline: each wave its own regression on X and its own variance, no covariances."""
    B, variances = _start(Y, X)
    counts = np.isfinite(Y).sum(axis=0)
    return float(-0.5 * (counts * (LOG_2PI + np.log(variances) + 1.0)).sum())
