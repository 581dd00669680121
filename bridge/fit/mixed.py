"""Adapter around statsmodels MixedLM: the long form, through the array interface (no formulas)."""
from __future__ import annotations

import time
import warnings

import numpy as np
from statsmodels.regression.mixed_linear_model import MixedLM, MixedLMParams

from ..compile import CompiledGrowth, GrowthParameters
from ..errors import FitError
from .result import FitOutcome

MAX_FITS = 5


def _start(params: GrowthParameters) -> MixedLMParams:
    scale = float(params.residual.mean())
    cov = params.cov / scale
    # MixedLM works with a Cholesky factor: nudge a singular start inside the cone
    ridge = 1e-6 * max(float(np.trace(cov)), 1.0)
    cov = cov + ridge * np.eye(len(cov)) if np.linalg.eigvalsh(cov).min() <= ridge else cov
    return MixedLMParams.from_components(fe_params=np.asarray(params.fixed, float), cov_re=cov)


def _translate(result, n_waves: int) -> GrowthParameters:
    cov = np.atleast_2d(np.asarray(result.cov_re, float))
    return GrowthParameters(np.asarray(result.fe_params, float), cov, np.full(n_waves, float(result.scale)))


def _fit_once(model: MixedLM, reml: bool, start):
    kwargs = {"start_params": start} if start is not None else {}
    return model.fit(reml=reml, **kwargs)


def fit_mixed(compiled: CompiledGrowth, reml: bool, start: GrowthParameters | None = None,
              keep: tuple[int, ...] | None = None) -> FitOutcome:
    """Fit the long form by ML or REML; refit from its own last point until the criterion stops improving.

    `keep` fits a reduced model with only those random terms (by position; the others' variances
    and covariances held at zero), used to reach a maximum on the boundary.
    """
    began = time.perf_counter()
    arrays = compiled.mixed
    keep = tuple(range(arrays.exog_re.shape[1])) if keep is None else tuple(keep)
    model = MixedLM(arrays.endog, arrays.exog, arrays.groups, arrays.exog_re[:, list(keep)])
    messages: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = _fit_once(model, reml, None if start is None else _start(_reduced(start, keep)))
            fits = 1
            while fits < MAX_FITS:
                again = _fit_once(model, reml, result.params_object)
                fits += 1
                improved = again.llf - result.llf > 1e-10 * max(1.0, abs(result.llf))
                if np.isfinite(again.llf) and again.llf >= result.llf:
                    result = again
                if not improved:
                    break
        except (np.linalg.LinAlgError, ValueError) as exc:
            raise FitError(f"statsmodels MixedLM could not fit the long form ({exc})") from exc
    messages += [str(w.message).splitlines()[0] for w in caught]
    params = _embed(_translate(result, compiled.n_waves), len(compiled.random_terms), keep)
    own = float(result.llf) + (compiled.reml_log_jacobian() if reml else
                               compiled.scaling.log_jacobian(len(arrays.endog)))
    return FitOutcome(library="statsmodels", params=params, own_log_likelihood=own,
                      reported_success=bool(result.converged), messages=tuple(dict.fromkeys(messages)),
                      fits=fits, seconds=time.perf_counter() - began,
                      start="library default" if start is None else "warm start",
                      notes=() if len(keep) == len(compiled.random_terms) else
                      (f"reduced model without the random {', '.join(t.value for i, t in enumerate(compiled.random_terms) if i not in keep)} term",))


def _reduced(params: GrowthParameters, keep: tuple[int, ...]) -> GrowthParameters:
    return GrowthParameters(params.fixed, params.cov[np.ix_(keep, keep)], params.residual)


def _embed(params: GrowthParameters, q: int, keep: tuple[int, ...]) -> GrowthParameters:
    """The reduced model's covariance placed at its terms' positions, zero for the terms left out."""
    cov = np.zeros((q, q))
    cov[np.ix_(keep, keep)] = params.cov
    return GrowthParameters(params.fixed, cov, params.residual)
