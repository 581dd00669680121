"""Adapter around semopy: fit the wide form by full-information ML until it stops improving."""
from __future__ import annotations

import time
import warnings

import numpy as np
import pandas as pd
import semopy

from ..compile import CompiledGrowth, GrowthParameters
from ..errors import FitError
from ..referee import LOG_2PI
from .result import FitOutcome

MAX_FITS = 30
RELATIVE_GAIN = 1e-10


def _model(compiled: CompiledGrowth) -> semopy.ModelMeans:
    try:
        return semopy.ModelMeans(compiled.sem_text)
    except Exception as exc:  # semopy raises bare exceptions from its parser
        raise FitError(f"semopy rejected the generated wide-form model ({exc})") from exc


def _active_names(model: semopy.ModelMeans) -> list[str]:
    return [name for name, p in model.parameters.items() if p.active]


def _frame(compiled: CompiledGrowth, factor: float) -> pd.DataFrame:
    frame = compiled.sem_frame.copy()
    outcome = [c for c in frame.columns if c.startswith("y")]
    frame[outcome] = frame[outcome] * factor
    return frame


def _rescale(params: GrowthParameters, factor: float) -> GrowthParameters:
    return GrowthParameters(params.fixed * factor, params.cov * factor ** 2, params.residual * factor ** 2)


def _run(compiled: CompiledGrowth, factor: float, start: GrowthParameters | None):
    model, frame = _model(compiled), _frame(compiled, factor)
    messages: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if start is not None:
            model.load(frame)
            values = compiled.sem_values(_rescale(start, factor))
            model.param_vals = np.array([values[name] for name in _active_names(model)])
        last, fits, result = np.inf, 0, None
        while fits < MAX_FITS:
            result = model.fit(frame, obj="ML", clean_slate=False)
            fits += 1
            if not np.isfinite(result.fun) or last - result.fun <= RELATIVE_GAIN * max(1.0, abs(result.fun)):
                break
            last = result.fun
    messages += [str(w.message).splitlines()[0] for w in caught]
    return model, result, fits, messages


def fit_sem(compiled: CompiledGrowth, start: GrowthParameters | None = None) -> FitOutcome:
    """Fit the wide form; refit from its own last point until the objective stops improving.

    semopy replaces a negative objective by inf and still reports success, so the
    outcome is rescaled by 10 and refitted whenever the objective is not finite.
    """
    began = time.perf_counter()
    factor, notes = 1.0, []
    for _ in range(4):
        model, result, fits, messages = _run(compiled, factor, start)
        if np.isfinite(result.fun):
            break
        notes.append(f"objective was not finite on the outcome scale x{factor:g}; refitted with the outcome x10")
        factor *= 10.0
    else:
        raise FitError("semopy's objective stayed non-finite after rescaling the outcome")
    values = dict(zip(_active_names(model), model.param_vals))
    params = _rescale(compiled.from_sem_values(values), 1.0 / factor)
    n_obs = int(np.isfinite(compiled.sem_frame.filter(regex=r"^y").to_numpy()).sum())
    internal = -0.5 * (result.fun + n_obs * LOG_2PI) + n_obs * np.log(factor)
    own = internal + compiled.scaling.log_jacobian(n_obs)
    return FitOutcome(library="semopy", params=params, own_log_likelihood=float(own),
                      reported_success=bool(result.success), messages=tuple(dict.fromkeys(messages)),
                      fits=fits, seconds=time.perf_counter() - began,
                      start="library default" if start is None else "warm start", notes=tuple(notes))
