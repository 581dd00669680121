"""Adapters for the long lagged regressions of the cross-lagged family (statsmodels OLS and MixedLM)."""
from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, replace

import numpy as np
import statsmodels.api as sm
from statsmodels.regression.mixed_linear_model import MixedLM, MixedLMParams

from .model import LongEquation
from ...errors import FitError


@dataclass(frozen=True)
class EquationFit:
    """One outcome's lagged regression, on the internal scale."""

    outcome: int
    coefficients: np.ndarray      # (waves, columns) coefficients used at each wave index (rows 1.. used)
    residual: np.ndarray          # (waves,) residual variance at each wave index
    person_variance: float        # random person intercept variance (0 for pooled regressions)
    residuals: np.ndarray         # per row
    log_likelihood: float         # the library's own value
    converged: bool
    messages: tuple[str, ...]
    seconds: float
    fits: int = 1


def _wave_blocks(eq: LongEquation, wave_specific: bool) -> list[np.ndarray]:
    waves = np.unique(eq.wave) if wave_specific else [None]
    return [np.ones(len(eq.y), bool) if w is None else eq.wave == w for w in waves]


def fit_pooled(eq: LongEquation, n_waves: int, wave_specific: bool) -> EquationFit:
    """Least squares (the ML estimates of a regression with normal errors), pooled or wave by wave."""
    began = time.perf_counter()
    coefficients, residual = np.full((n_waves, eq.X.shape[1]), np.nan), np.full(n_waves, np.nan)
    residuals, loglik = np.zeros(len(eq.y)), 0.0
    for rows in _wave_blocks(eq, wave_specific):
        result = sm.OLS(eq.y[rows], eq.X[rows]).fit()
        waves = np.unique(eq.wave[rows])
        coefficients[waves] = result.params
        residual[waves] = float(result.ssr / rows.sum())
        residuals[rows] = result.resid
        loglik += float(result.llf)
    return EquationFit(eq.outcome, coefficients, residual, 0.0, residuals, loglik, True, (),
                       time.perf_counter() - began)


def fit_person_intercept(eq: LongEquation, n_waves: int, start: tuple[np.ndarray, float, float] | None = None,
                         ) -> EquationFit:
    """MixedLM with a random person intercept, by ML (lbfgs); refitted from its own point until it stops improving.

    `start` = (coefficients, person variance, residual variance) warm-starts the fit. When the maximum is
    on the boundary (person variance 0) MixedLM cannot invert its Hessian there and raises; the boundary
    solution is then the pooled regression, which is returned with a note saying so.
    """
    began = time.perf_counter()
    model = MixedLM(eq.y, eq.X, eq.person, np.ones((len(eq.y), 1)))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            kwargs = {"method": ["lbfgs"]}
            if start is not None:
                ratio = max(start[1] / start[2], 1e-6)
                kwargs["start_params"] = MixedLMParams.from_components(start[0], cov_re=np.array([[ratio]]))
            result, fits = model.fit(reml=False, **kwargs), 1
            while fits < 3:
                again = model.fit(reml=False, **{**kwargs, "start_params": result.params_object})
                fits += 1
                better = again.llf > result.llf + 1e-10 * abs(result.llf)
                result = again if again.llf >= result.llf else result
                if not better:
                    break
        except np.linalg.LinAlgError:
            boundary = fit_pooled(eq, n_waves, False)
            note = "MixedLM reached the boundary (person variance 0), where its Hessian is singular"
            return replace(boundary, messages=(note,), converged=False, seconds=time.perf_counter() - began)
        except ValueError as exc:
            raise FitError(f"statsmodels MixedLM could not fit the lagged regression ({exc})") from exc
    coefficients = np.tile(np.asarray(result.fe_params, float), (n_waves, 1))
    return EquationFit(eq.outcome, coefficients, np.full(n_waves, float(result.scale)),
                       float(np.asarray(result.cov_re)[0, 0]), eq.y - eq.X @ result.fe_params, float(result.llf),
                       bool(result.converged), tuple(dict.fromkeys(str(w.message).splitlines()[0] for w in caught)),
                       time.perf_counter() - began, fits)
