"""The shared fitting guard against semopy's non-finite objective, for any family's compiled plan.

semopy replaces a negative objective (-2 log L - n log 2 pi < 0, which happens when variances are
small) by inf and still reports success. A family fits a plan on internal scales; when any semopy
fit of the plan returns a non-finite objective, the whole plan is fitted again with every internal
scale multiplied by 10 (the compiled plan provides `rescaled(factor)` and `scales`). The numbers are
converted back exactly by the family, so only the finding records that it happened.
"""
from __future__ import annotations

from functools import wraps

import numpy as np
import pandas as pd

from ..errors import FitError
from .sem import SemopyRun, run_semopy

RESCALE = 10.0
RESCALE_TRIES = 4


class NotFinite(Exception):
    """semopy returned a non-finite objective: the plan must be fitted again on larger internal scales."""


def finite_semopy(text: str, frame: pd.DataFrame, start: dict[str, float] | None = None) -> SemopyRun:
    """`run_semopy`, raising `NotFinite` when the objective is not finite."""
    run = run_semopy(text, frame, start=start)
    if not np.isfinite(run.objective):
        raise NotFinite
    return run


def rescaling(fit):
    """Decorate `fit(compiled, ..., notes=list)`: on `NotFinite`, rescale the plan by 10 and start over.

    Each retry adds one sentence to `notes`; after `RESCALE_TRIES` attempts a `FitError` is raised.
    """
    @wraps(fit)
    def guarded(compiled, *args, **kwargs):
        notes: list[str] = []
        for _ in range(RESCALE_TRIES):
            try:
                return fit(compiled, *args, notes=notes, **kwargs)
            except NotFinite:
                notes.append("semopy's objective was not finite (it replaces a negative objective by inf and "
                             "still reports success) with internal scales "
                             f"{', '.join(f'{s:.3g}' for s in compiled.scales)}; every outcome was rescaled by "
                             f"{RESCALE:g} and the fit repeated")
                compiled = compiled.rescaled(RESCALE)
        raise FitError("semopy's objective stayed non-finite after rescaling every outcome; the wide form could "
                       "not be fitted")
    return guarded
