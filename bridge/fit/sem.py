"""Adapter around semopy: fit the wide form by full-information ML until it stops improving."""
from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import pandas as pd
import semopy
from threadpoolctl import threadpool_limits

from ..capture import library_messages
from ..compile import CompiledGrowth, GrowthParameters
from ..errors import FitError
from ..referee import LOG_2PI
from .result import FitOutcome

MAX_FITS = 30
RELATIVE_GAIN = 1e-10


@dataclass(frozen=True)
class SemopyRun:
    """One semopy fit, refitted from its own point until the objective stopped improving."""

    values: dict[str, float]   # every free parameter by label
    objective: float           # semopy's objective: -2 log L - (observed data points) x log(2 pi)
    success: bool
    fits: int
    messages: tuple[str, ...]


def _active_names(model: semopy.ModelMeans) -> list[str]:
    return [name for name, p in model.parameters.items() if p.active]


def start_covariance(frame: pd.DataFrame) -> pd.DataFrame | None:
    """A sample covariance for semopy's start values when the pairwise one is undefined, else None.

    semopy derives start values from the pairwise sample covariance, which does not exist
    when two columns are never observed together (a fine wave grid over individually
    varying times); unknown covariances become 0 and unknown variances the mean known one.
    Only the start changes: the full-information objective uses the raw data.
    """
    pairwise = frame.cov(min_periods=2, ddof=0)
    values = pairwise.to_numpy(copy=True)
    if np.isfinite(values).all():
        return None
    diagonal = np.diag(values).copy()
    known = np.isfinite(diagonal) & (diagonal > 0)
    diagonal[~known] = diagonal[known].mean() if known.any() else 1.0
    values[~np.isfinite(values)] = 0.0
    np.fill_diagonal(values, diagonal)
    return pd.DataFrame(values, index=pairwise.index, columns=pairwise.columns)


def run_semopy(text: str, frame: pd.DataFrame, start: dict[str, float] | None = None) -> SemopyRun:
    """Fit a semopy model text by full-information ML; refit until the objective stops improving.

    `start` gives starting values by label (a warm start from another solution).
    """
    try:
        model = semopy.ModelMeans(text)
    except Exception as exc:  # semopy raises bare exceptions from its parser
        raise FitError(f"semopy rejected the generated wide-form model ({exc})") from exc
    covariance = start_covariance(frame)
    # one BLAS thread: on a busy machine semopy's many small products slow down 10-25x with more
    with threadpool_limits(limits=1), library_messages() as caught:  # semopy logs on the root logger
        if start is not None:
            model.load(frame, cov=covariance)
            model.param_vals = np.array([start[name] for name in _active_names(model)])
        last, fits, result = np.inf, 0, None
        while fits < MAX_FITS:
            result = model.fit(frame, cov=covariance, obj="ML", clean_slate=False)
            fits += 1
            if not np.isfinite(result.fun) or last - result.fun <= RELATIVE_GAIN * max(1.0, abs(result.fun)):
                break
            last = result.fun
    return SemopyRun(values=dict(zip(_active_names(model), map(float, model.param_vals))),
                     objective=float(result.fun), success=bool(result.success), fits=fits,
                     messages=tuple(caught))


def semopy_log_likelihood(run: SemopyRun, n_observed: int) -> float:
    """The log-likelihood behind semopy's full-information objective (internal scale)."""
    return -0.5 * (run.objective + n_observed * LOG_2PI)


def _frame(compiled: CompiledGrowth, factor: float) -> pd.DataFrame:
    frame = compiled.sem_frame.copy()
    outcome = [c for c in frame.columns if c.startswith("y")]
    frame[outcome] = frame[outcome] * factor
    return frame


def _rescale(params: GrowthParameters, factor: float) -> GrowthParameters:
    return GrowthParameters(params.fixed * factor, params.cov * factor ** 2, params.residual * factor ** 2)


def fit_sem(compiled: CompiledGrowth, start: GrowthParameters | None = None) -> FitOutcome:
    """Fit the wide form; refit from its own last point until the objective stops improving.

    semopy replaces a negative objective by inf and still reports success, so the
    outcome is rescaled by 10 and refitted whenever the objective is not finite.
    """
    began = time.perf_counter()
    factor, notes = 1.0, []
    for _ in range(4):
        start_values = None if start is None else compiled.sem_values(_rescale(start, factor))
        run = run_semopy(compiled.sem_text, _frame(compiled, factor), start_values)
        if np.isfinite(run.objective):
            break
        notes.append(f"objective was not finite on the outcome scale x{factor:g}; refitted with the outcome x10")
        factor *= 10.0
    else:
        raise FitError("semopy's objective stayed non-finite after rescaling the outcome")
    params = _rescale(compiled.from_sem_values(run.values), 1.0 / factor)
    n_obs = int(np.isfinite(compiled.sem_frame.filter(regex=r"^y").to_numpy()).sum())
    internal = semopy_log_likelihood(run, n_obs) + n_obs * np.log(factor)
    own = internal + compiled.scaling.log_jacobian(n_obs)
    return FitOutcome(library="semopy", params=params, own_log_likelihood=float(own),
                      reported_success=run.success, messages=run.messages, fits=run.fits,
                      seconds=time.perf_counter() - began,
                      start="library default" if start is None else "warm start", notes=tuple(notes))
