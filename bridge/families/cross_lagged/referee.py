"""The referee's work for the cross-lagged family: the long equations as referee designs, translations, SEs."""
from __future__ import annotations

import numpy as np

from ...compile import GrowthParameters, LongDesign
from ...referee.certificate import default_steps
from ...referee.hessian import numerical_hessian, variance_standard_errors
from ...referee.likelihood import Referee
from ...referee.path import PathReferee
from ...spec import Variant
from .long_fit import EquationFit
from .model import CompiledPanel, LongEquation


def equation_design(eq: LongEquation, wave_specific: bool) -> LongDesign:
    """The lagged regression as a referee design; wave-specific coefficients become per-wave column blocks."""
    if wave_specific:
        waves = np.unique(eq.wave)
        X = np.column_stack([eq.X * (eq.wave == w)[:, None] for w in waves])
    else:
        X = eq.X
    return LongDesign(y=eq.y, X=X, Z=np.ones((len(eq.y), 1)), wave=eq.wave, person=eq.person)


def equation_parameters(fit: EquationFit, eq: LongEquation, wave_specific: bool) -> GrowthParameters:
    waves = np.unique(eq.wave)
    fixed = fit.coefficients[waves].ravel() if wave_specific else fit.coefficients[waves[0]]
    return GrowthParameters(np.asarray(fixed, float), np.array([[fit.person_variance]]), fit.residual.copy())


def long_to_values(compiled: CompiledPanel, fits: list[EquationFit], nuisance: dict[str, float]) -> dict[str, float]:
    """The long form's solution written in the wide form's labels (first-wave moments taken from `nuisance`).

    Separate mixed models (dynamic panel, RI-CLPM) leave the person effects unrelated to the first wave
    and to each other, and the equations' residuals uncorrelated: those covariances are 0 in the long form.
    """
    separate = compiled.variant is not Variant.CLPM
    values = {label: 0.0 if label.startswith("g") or (separate and label.startswith(("r", "ut"))) else v
              for label, v in nuisance.items()}
    for eq, fit in zip(compiled.equations, fits):
        for t in np.unique(eq.wave):
            values.update(zip(eq.labels[t], fit.coefficients[t]))
            values[eq.residual[t]] = float(fit.residual[t])
        values[f"u{eq.outcome}"] = fit.person_variance
    for label in compiled.sem.labels:
        if label.startswith("r") and not separate:
            values[label] = _residual_covariance(compiled, fits, label)
    return {label: values[label] for label in nuisance}


def _residual_covariance(compiled: CompiledPanel, fits: list[EquationFit], label: str) -> float:
    head, _, wave = label[1:].partition("_w")
    j, k = map(int, head.split("_"))
    rows = {}
    for idx in (j, k):
        eq = compiled.equations[idx]
        keep = np.ones(len(eq.y), bool) if not wave else eq.wave == int(wave)
        rows[idx] = dict(zip(zip(eq.person[keep], eq.wave[keep]), fits[idx].residuals[keep]))
    common = rows[j].keys() & rows[k].keys()
    return float(np.mean([rows[j][c] * rows[k][c] for c in common])) if common else 0.0


def values_to_equation(values: dict[str, float], eq: LongEquation, n_waves: int) -> tuple[np.ndarray, float, float]:
    """A warm start for one equation's mixed model from wide-form values."""
    t = int(np.unique(eq.wave)[0])
    return (np.array([values[label] for label in eq.labels[t]]), values.get(f"u{eq.outcome}", 0.0),
            values[eq.residual[t]])


def path_standard_errors(referee: PathReferee, values: dict[str, float]) -> dict[str, float]:
    """Observed-information standard errors of every free label (numerical Hessian of the referee)."""
    labels = list(values)
    x = np.array([values[label] for label in labels])

    def criterion(vector: np.ndarray) -> float:
        return referee.log_likelihood(dict(zip(labels, vector)))

    steps = default_steps(x)   # the certificate's steps: never below 1e-6 of the largest value
    H = numerical_hessian(criterion, x, steps)
    try:
        cov = np.linalg.inv(-H) if np.all(np.isfinite(H)) else np.full(H.shape, np.nan)
    except np.linalg.LinAlgError:
        cov = np.full(H.shape, np.nan)
    diag = np.diag(cov)
    return dict(zip(labels, np.where(diag > 0, np.sqrt(np.abs(diag)), np.nan)))


def equation_standard_errors(fit: EquationFit, eq: LongEquation, wave_specific: bool, pooled: bool) -> dict[str, float]:
    """Standard errors of one equation's labels: fixed effects from (X'V^-1X)^-1, variances from the referee."""
    design = equation_design(eq, wave_specific)
    referee = Referee(design)
    params = equation_parameters(fit, eq, wave_specific)
    fixed = np.sqrt(np.diag(referee.fixed_covariance(params)))
    waves = np.unique(eq.wave)
    labels = [label for t in (waves if wave_specific else waves[:1]) for label in eq.labels[t]]
    out = dict(zip(labels, fixed))
    for t in waves:
        n = int((eq.wave == t).sum()) if wave_specific else len(eq.y)
        out[eq.residual[t]] = float(fit.residual[t] * np.sqrt(2.0 / n))  # ML variance: common practice
    if not pooled and fit.person_variance > 0:  # at the boundary the pooled formula above applies
        ses = variance_standard_errors(referee, params, equal_residuals=True)
        out[f"u{eq.outcome}"], residual_se = float(ses[0]), float(ses[1])
        out.update({eq.residual[t]: residual_se for t in waves})
    return out
