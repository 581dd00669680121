"""Absolute fit of the wide path model against the saturated model over every outcome at every wave.

The long form (one lagged regression per outcome) takes the first wave as given and, for the
RI-CLPM, is another model altogether: its parameters imply no joint means and covariances of all
waves, so it gets the reason in words instead of numbers.
"""
from __future__ import annotations

import numpy as np

from ...compile.path import PathModel
from ...referee.absolute_fit import NOT_CERTIFIED, AbsoluteFit, references
from ...referee.saturated import NoSaturatedMaximum
from ...referee.path import PathReferee
from .model import CompiledPanel

LONG_REASON = ("its lagged regressions take the first wave as given and model no joint means and covariances of "
               "every wave, so there is no saturated model over the waves to compare it with")


def panel_absolute_fit(compiled: CompiledPanel, model: PathModel, wide: dict[str, float],
                       certified: bool) -> AbsoluteFit:
    """The wide form's fit (user's scale) against the saturated and independence models of all observed values."""
    frame = compiled.frame.to_numpy()                      # internal scale, columns model.observed
    outcome = np.array([int(name[1:].split("_")[0]) for name in model.observed])
    scale = np.asarray(compiled.scales)[outcome]           # internal = user x scale
    Y = frame / scale
    try:
        refs = references(Y, np.ones((len(Y), 1)))
    except NoSaturatedMaximum as problem:
        return AbsoluteFit.unavailable(str(problem))
    values = compiled.values_from_user(wide)
    log_likelihood = PathReferee(model, frame).log_likelihood(values) + compiled.log_shift(
        compiled.panel.observed_by_outcome())
    implied = model.moments(values)[1] / np.outer(scale, scale)
    sem = refs.judge(log_likelihood, len(model.labels), implied, "" if certified else NOT_CERTIFIED)
    return refs.result(sem, (None, LONG_REASON))
