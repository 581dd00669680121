"""The long form's table for the cross-lagged family: each outcome's lagged regression.

Per outcome: the coefficients (the constant, then the lag of every outcome; centred on
the person's mean for the RI-CLPM; one set per wave when paths are wave-specific) with
estimate, standard error, z, p and 95% interval; the residual variance (per wave when
wave-specific) and, when the long form has one, the variance of the random person
intercept; the rows the regression used and its log-likelihood. All on the user's scale,
from `families.cross_lagged.fit.PanelSolution`; the Wald statistics as for growth models.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ...reconcile.result import Estimate, Reconciliation
from ...reconcile.summary import CONFIDENCE, FixedEffect, wald
from ...spec import Paths, Variant
from .model import CompiledPanel


@dataclass(frozen=True)
class LaggedCoefficient:
    outcome: str
    wave: float | None          # the outcome's wave for wave-specific paths, None when time-invariant
    effect: FixedEffect         # key (e.g. auto.practice), name (e.g. "practice lag"), Wald statistics


@dataclass(frozen=True)
class LaggedVariance:
    outcome: str
    wave: float | None
    key: str
    name: str                   # "residual" or "person intercept"
    estimate: float
    se: float
    sd: float | None


@dataclass(frozen=True)
class LaggedFit:
    outcome: str
    rows: int
    log_likelihood: float
    method: str                 # how the equation was fitted, in words


@dataclass(frozen=True)
class LaggedSummary:
    """The long form of a cross-lagged plan, one lagged regression per outcome."""

    coefficients: tuple[LaggedCoefficient, ...]
    variances: tuple[LaggedVariance, ...]
    fits: tuple[LaggedFit, ...]
    centred: bool               # lags centred on each person's mean (RI-CLPM)
    confidence: float = CONFIDENCE


def _key(compiled: CompiledPanel, label: str, outcome: str, wave: float | None) -> str:
    """The quantity key of a long-form label (the wide form names the same parameter)."""
    if label in compiled.keys:
        return compiled.keys[label]
    head = "intercept" if label.startswith("i") else "var.residual"
    return f"{head}.{outcome}" + ("" if wave is None else f".wave{wave:g}")


def _estimate(values: dict, ses: dict, label: str) -> Estimate:
    se = ses.get(label, math.nan)
    return Estimate(float(values.get(label, math.nan)), float(se) if np.isfinite(se) else math.nan)


def _term_names(compiled: CompiledPanel) -> tuple[str, ...]:
    lag = "lag, person-centred" if compiled.variant is Variant.RI_CLPM else "lag"
    return ("constant",) + tuple(f"{name} {lag}" for name in compiled.panel.names)


def _waves(compiled: CompiledPanel, eq) -> list[tuple[int, float | None]]:
    used = [int(t) for t in np.unique(eq.wave)]
    if compiled.paths is Paths.TIME_INVARIANT:
        return [(used[0], None)]
    return [(t, compiled.panel.waves[t]) for t in used]


def lagged_summary(rec: Reconciliation, confidence: float = CONFIDENCE) -> LaggedSummary:
    """The long lagged regressions of a cross-lagged reconciliation, on the user's scale."""
    compiled, solution = rec.pair, rec.solution
    values, ses = solution.long, solution.long_se
    names, terms = compiled.panel.names, _term_names(compiled)
    coefficients, variances, fits = [], [], []
    for eq, rows, loglik in zip(compiled.equations, solution.rows, solution.log_likelihood):
        outcome = names[eq.outcome]
        for t, wave in _waves(compiled, eq):
            for label, term in zip(eq.labels[t], terms):
                effect = wald(_key(compiled, label, outcome, wave), term, _estimate(values, ses, label), confidence)
                coefficients.append(LaggedCoefficient(outcome, wave, effect))
            v = _estimate(values, ses, eq.residual[t])
            variances.append(LaggedVariance(outcome, wave, _key(compiled, eq.residual[t], outcome, wave), "residual",
                                            v.estimate, v.se, math.sqrt(v.estimate) if v.estimate >= 0 else None))
        if solution.person_intercept:
            v = _estimate(values, ses, f"u{eq.outcome}")
            variances.append(LaggedVariance(outcome, None, f"var.trait.{outcome}", "person intercept", v.estimate,
                                            v.se, math.sqrt(v.estimate) if v.estimate >= 0 else None))
        method = "least squares (ML)" if not solution.person_intercept else "MixedLM, ML, random person intercept"
        fits.append(LaggedFit(outcome, rows, loglik, method))
    return LaggedSummary(tuple(coefficients), tuple(variances), tuple(fits),
                         centred=compiled.variant is Variant.RI_CLPM, confidence=confidence)
