"""Absolute fit indices from a model's, the saturated and the baseline log-likelihoods (docs/absolute-fit.md).

Conventions: chi-square = 2 (saturated - model log-likelihood), the full-information likelihood-ratio
statistic (no N - 1 rescaling); RMSEA and its interval divide by N - 1, N the number of persons.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq
from scipy.stats import chi2, ncx2


@dataclass(frozen=True)
class FormFit:
    """One form's solution judged against the saturated model over the waves."""

    log_likelihood: float
    parameters: int
    chi_square: float
    df: int
    p_value: float
    rmsea: float
    rmsea_ci90: tuple[float, float]
    cfi: float
    tli: float
    srmr: float


def rmsea(chi_square: float, df: int, persons: int) -> float:
    """Steiger (1990): sqrt(max(chi-square - df, 0) / (df (N - 1)))."""
    return math.sqrt(max(chi_square - df, 0.0) / (df * (persons - 1)))


def _noncentrality(chi_square: float, df: int, level: float) -> float:
    """The noncentrality at which chi-square is the `level` quantile (0 when even 0 puts it below)."""
    def gap(lam: float) -> float:
        return float(ncx2.cdf(chi_square, df, lam)) - level if lam > 0 else float(chi2.cdf(chi_square, df)) - level
    if gap(0.0) <= 0:
        return 0.0
    high = max(1.0, chi_square)
    while gap(high) > 0:
        high *= 2
    return float(brentq(gap, 0.0, high, xtol=1e-10))


def rmsea_interval(chi_square: float, df: int, persons: int) -> tuple[float, float]:
    """The 90% interval by inverting the noncentral chi-square distribution (Browne & Cudeck 1993)."""
    lower, upper = _noncentrality(chi_square, df, 0.95), _noncentrality(chi_square, df, 0.05)
    return (math.sqrt(lower / (df * (persons - 1))), math.sqrt(upper / (df * (persons - 1))))


def cfi(chi_square: float, df: int, baseline_chi_square: float, baseline_df: int) -> float:
    """Bentler (1990): 1 - max(chi2 - df, 0) / max(chi2_b - df_b, chi2 - df, 0)."""
    model, baseline = max(chi_square - df, 0.0), max(baseline_chi_square - baseline_df, chi_square - df, 0.0)
    return 1.0 if baseline == 0 else 1.0 - model / baseline


def tli(chi_square: float, df: int, baseline_chi_square: float, baseline_df: int) -> float:
    """Tucker & Lewis (1973): (chi2_b/df_b - chi2/df) / (chi2_b/df_b - 1)."""
    ratio = baseline_chi_square / baseline_df
    return (ratio - chi_square / df) / (ratio - 1.0)


def srmr(sample: np.ndarray, implied: np.ndarray) -> float:
    """Hu & Bentler (1999): root mean square of (s_ij - sigma_ij) / sqrt(s_ii s_jj) over i <= j (covariances only)."""
    scale = np.sqrt(np.diag(sample))
    residual = (sample - implied) / np.outer(scale, scale)
    rows, cols = np.tril_indices(len(sample))
    return float(np.sqrt(np.mean(residual[rows, cols] ** 2)))


def form_fit(log_likelihood: float, parameters: int, saturated_log_likelihood: float, moments: int, persons: int,
             baseline: tuple[float, int], sample_cov: np.ndarray, implied_cov: np.ndarray) -> FormFit:
    """Every index for one solution (needs df > 0)."""
    statistic = max(2.0 * float(saturated_log_likelihood - log_likelihood), 0.0)  # EM's last digits can dip below 0
    df = moments - parameters
    return FormFit(log_likelihood=float(log_likelihood), parameters=parameters, chi_square=statistic, df=df,
                   p_value=float(chi2.sf(statistic, df)), rmsea=rmsea(statistic, df, persons),
                   rmsea_ci90=rmsea_interval(statistic, df, persons), cfi=float(cfi(statistic, df, *baseline)),
                   tli=float(tli(statistic, df, *baseline)), srmr=srmr(sample_cov, implied_cov))
