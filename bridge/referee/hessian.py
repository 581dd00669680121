"""Standard errors from the referee: observed information by central differences."""
from __future__ import annotations

import numpy as np

from ..compile import GrowthParameters
from .likelihood import Referee


def numerical_hessian(f, x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    """Central-difference Hessian of a scalar function at x with one step per coordinate."""
    k = len(x)
    H = np.zeros((k, k))
    f0 = f(x)
    shift = [np.eye(k)[i] * steps[i] for i in range(k)]
    for i in range(k):
        H[i, i] = (f(x + shift[i]) - 2 * f0 + f(x - shift[i])) / steps[i] ** 2
        for j in range(i):
            H[i, j] = H[j, i] = (f(x + shift[i] + shift[j]) - f(x + shift[i] - shift[j])
                                 - f(x - shift[i] + shift[j]) + f(x - shift[i] - shift[j])) / (4 * steps[i] * steps[j])
    return H


def variance_standard_errors(referee: Referee, params: GrowthParameters, equal_residuals: bool,
                             reml: bool = False) -> np.ndarray:
    """Standard errors of the free variance parameters (order of `GrowthParameters.variance_vector`).

    The fixed effects are profiled out, so the inverse Hessian equals the variance
    block of the full observed-information inverse. NaN where the likelihood is not
    defined on both sides of the estimate (a variance on its boundary).
    """
    theta = params.variance_vector(equal_residuals)

    def criterion(vector: np.ndarray) -> float:
        return referee.profile(params.with_variances(vector, equal_residuals), reml=reml)

    scale = max(float(np.abs(theta).max()), 1e-8)
    steps = 1e-4 * np.maximum(np.abs(theta), 1e-2 * scale)
    H = numerical_hessian(criterion, theta, steps)
    if not np.all(np.isfinite(H)):
        return np.full(len(theta), np.nan)
    try:
        cov = np.linalg.inv(-H)
    except np.linalg.LinAlgError:
        return np.full(len(theta), np.nan)
    diag = np.diag(cov)
    return np.where(diag > 0, np.sqrt(np.abs(diag)), np.nan)


def fixed_standard_errors(referee: Referee, params: GrowthParameters) -> np.ndarray:
    return np.sqrt(np.diag(referee.fixed_covariance(params)))
