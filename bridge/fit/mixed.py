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


def boundary_face(cov: np.ndarray, relative: float = 1e-7) -> np.ndarray | None:
    """An orthonormal basis of the range of a singular person-effect covariance (None when it is regular)."""
    w, V = np.linalg.eigh((cov + cov.T) / 2)
    kept = w > relative * max(float(w.max()), 1e-300)
    return None if kept.all() or not kept.any() else V[:, kept]


def fit_mixed(compiled: CompiledGrowth, reml: bool, start: GrowthParameters | None = None,
              face: np.ndarray | None = None) -> FitOutcome:
    """Fit the long form by ML or REML; refit from its own last point until the criterion stops improving.

    `face` (q x r, orthonormal columns) fits the model on a boundary face of the positive semidefinite
    cone: person effects confined to the span of those columns (covariance face H face'). A subset of
    the identity's columns drops random terms (their variances and covariances fixed at zero); another
    basis reaches a singular maximum that MixedLM cannot approach from inside the cone: it optimises
    over a Cholesky factor and stops short of a zero on its diagonal.
    """
    began = time.perf_counter()
    arrays = compiled.mixed
    q = arrays.exog_re.shape[1]
    face = np.eye(q) if face is None else np.asarray(face, float)
    model = MixedLM(arrays.endog, arrays.exog, arrays.groups, arrays.exog_re @ face)
    messages: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = _fit_once(model, reml, None if start is None else _start(_on_face(start, face)))
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
    params = _from_face(_translate(result, compiled.n_waves), face)
    own = float(result.llf) + (compiled.reml_log_jacobian() if reml else
                               compiled.scaling.log_jacobian(len(arrays.endog)))
    return FitOutcome(library="statsmodels", params=params, own_log_likelihood=own,
                      reported_success=bool(result.converged), messages=tuple(dict.fromkeys(messages)),
                      fits=fits, seconds=time.perf_counter() - began,
                      start="library default" if start is None else "warm start",
                      notes=_face_note(compiled, face))


def _face_note(compiled: CompiledGrowth, face: np.ndarray) -> tuple[str, ...]:
    q, r = face.shape
    if r == q:
        return ()
    axes = [i for i in range(q) if np.allclose(face[i], 0.0)]
    if len(axes) == q - r:
        return (f"reduced model without the random {', '.join(compiled.random_terms[i].value for i in axes)} term",)
    return (f"person effects confined to {r} of {q} directions (a singular covariance on the boundary)",)


def _on_face(params: GrowthParameters, face: np.ndarray) -> GrowthParameters:
    return GrowthParameters(params.fixed, face.T @ params.cov @ face, params.residual)


def _from_face(params: GrowthParameters, face: np.ndarray) -> GrowthParameters:
    """The face's covariance H written back as the full person-effect covariance face H face'."""
    return GrowthParameters(params.fixed, face @ params.cov @ face.T, params.residual)
