"""Absolute fit of both forms: each solution as a model for the wave means and covariances (docs/absolute-fit.md).

The saturated model and the independence baseline are fitted to the wide form's data (the outcome at
each wave given the predictors, `saturated.py`); each form's solution is scored by the referee as a
model of the same data, and the indices follow (`fit_indices.py`). A form gets a reason in words
instead of numbers where its solution is no maximum likelihood model of those wave moments.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compile import CompiledGrowth, CompiledPair, GrowthParameters
from .fit_indices import FormFit, form_fit
from .likelihood import Referee
from .saturated import NoSaturatedMaximum, Saturated, independence_log_likelihood, saturated


@dataclass(frozen=True)
class AbsoluteFit:
    """The saturated and baseline models over the waves, and each form's fit against them.

    A form's fit is None when it cannot be judged this way; its reason says why (and `reason`
    when nothing could be computed at all). `note` qualifies numbers that are shown.
    """

    saturated_log_likelihood: float | None
    baseline_chi_square: float | None
    baseline_df: int | None
    moments: int | None
    persons: int | None
    sem: FormFit | None
    mixed: FormFit | None
    sem_reason: str = ""
    mixed_reason: str = ""
    reason: str = ""
    note: str = ""

    @classmethod
    def unavailable(cls, reason: str) -> "AbsoluteFit":
        return cls(None, None, None, None, None, None, None, reason, reason, reason)


ROUNDED_NOTE = ("The wide form places each occasion on its nearest wave; its saturated model and its fit are over "
                "those waves, not the exact times.")
NOT_CERTIFIED = "its solution is not a certified maximum, so a likelihood-ratio test against it would prove nothing"
REML = ("it was fitted by REML, whose criterion is not the full-information log-likelihood the saturated model is "
        "compared with")
OWN_TIMES = ("it was fitted at each occasion's own time (individually varying times): its parameters imply no "
             "single set of means and covariances over waves, so there is no saturated model to compare it with")
OTHER_OCCASIONS = ("it uses other occasions than the wide form (a different missing-data handling), so it has no "
                   "saturated model in common with it")


def _wide_data(compiled: CompiledGrowth) -> tuple[np.ndarray, np.ndarray]:
    """The outcome by person and wave (user's scale, NaN missing) and the predictors with a constant."""
    shaped = compiled.shaped
    X = np.column_stack([np.ones(shaped.n_persons), shaped.predictor_values]) if shaped.predictors \
        else np.ones((shaped.n_persons, 1))
    return shaped.wide_outcome(), X


def _implied_covariance(compiled: CompiledGrowth, params: GrowthParameters) -> np.ndarray:
    """Lambda G Lambda' + diag(residuals) over the waves, on the user's scale."""
    t = compiled.scaling.time(np.asarray(compiled.shaped.waves, float))
    loadings = np.column_stack([t ** term.power for term in compiled.random_terms])
    cov = loadings @ params.cov @ loadings.T + np.diag(params.residual)
    return cov * compiled.scaling.y_scale ** 2


def _free_parameters(compiled: CompiledGrowth, equal_residuals: bool) -> int:
    q = len(compiled.random_terms)
    return len(compiled.fixed_columns) + q * (q + 1) // 2 + (1 if equal_residuals else compiled.n_waves)


def _score(compiled: CompiledGrowth, params: GrowthParameters) -> float:
    """The referee's log-likelihood of the wide data (occasions on their waves), user's scale."""
    referee = Referee(compiled.wave_design)
    return referee.log_likelihood(params) + compiled.scaling.log_jacobian(referee.n_obs)


def _same_design(a, b) -> bool:
    return a.X.shape == b.X.shape and np.allclose(a.X, b.X) and np.allclose(a.Z, b.Z)


def _mixed_reason(pair: CompiledPair, certified: bool) -> str:
    if not certified:
        return NOT_CERTIFIED
    if pair.plan.reml:
        return REML
    if not _same_design(pair.mixed.mixed_design, pair.mixed.wave_design):
        return OWN_TIMES
    if not np.array_equal(pair.mixed.shaped.wide_outcome(), pair.sem.shaped.wide_outcome(), equal_nan=True):
        return OTHER_OCCASIONS
    return ""


@dataclass(frozen=True)
class References:
    """The saturated and baseline models of one wide data set, ready to judge any solution of it."""

    saturated: Saturated
    baseline: tuple[float, int]     # chi-square and df of the independence model
    moments: int
    persons: int

    def judge(self, log_likelihood: float, parameters: int, implied_cov: np.ndarray,
              reason: str = "") -> tuple[FormFit | None, str]:
        """A solution's indices, or None and the reason in words why it cannot be judged this way."""
        if not reason and self.moments - parameters <= 0:
            reason = "it has as many free parameters as there are moments (no degrees of freedom left)"
        if reason:
            return None, reason
        return form_fit(log_likelihood, parameters, self.saturated.log_likelihood, self.moments, self.persons,
                        self.baseline, self.saturated.covariance, implied_cov), ""

    def result(self, sem: tuple[FormFit | None, str], mixed: tuple[FormFit | None, str], note: str = "") -> AbsoluteFit:
        return AbsoluteFit(saturated_log_likelihood=self.saturated.log_likelihood, baseline_chi_square=self.baseline[0],
                           baseline_df=self.baseline[1], moments=self.moments, persons=self.persons, sem=sem[0],
                           mixed=mixed[0], sem_reason=sem[1], mixed_reason=mixed[1], note=note)


def references(Y: np.ndarray, X: np.ndarray) -> References:
    """Saturated and baseline models of Y (persons x variables, NaN missing) given X (complete, with a constant)."""
    best = saturated(Y, X)
    width = Y.shape[1]
    baseline = (max(2.0 * (best.log_likelihood - independence_log_likelihood(Y, X)), 0.0), width * (width - 1) // 2)
    return References(best, baseline, moments=width * X.shape[1] + width * (width + 1) // 2,
                      persons=int(np.isfinite(Y).any(axis=1).sum()))


def growth_absolute_fit(pair: CompiledPair, sem: GrowthParameters, mixed: GrowthParameters,
                        certified: tuple[bool, bool]) -> AbsoluteFit:
    """Saturated model, baseline and each form's indices for a growth model; `certified` per form (sem, mixed)."""
    try:
        refs = references(*_wide_data(pair.sem))
    except NoSaturatedMaximum as problem:
        return AbsoluteFit.unavailable(str(problem))

    def judged(compiled: CompiledGrowth, params: GrowthParameters, equal: bool, reason: str):
        return refs.judge(_score(compiled, params), _free_parameters(compiled, equal),
                          _implied_covariance(compiled, params), reason)

    rounded = not _same_design(pair.sem.wave_design, pair.sem.exact_design)
    return refs.result(judged(pair.sem, sem, pair.sem.equal_residuals, "" if certified[0] else NOT_CERTIFIED),
                       judged(pair.mixed, mixed, True, _mixed_reason(pair, certified[1])),
                       note=ROUNDED_NOTE if rounded else "")
