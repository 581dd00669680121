"""The numbers behind the report's tables, computed once from a reconciliation.

The mixed-model summary holds the long form's fixed effects (estimate, standard
error, z, p, 95% interval), its person effects' covariance matrix (with standard errors and
correlations) and residual variance, and its fit statistics. The correspondence lines put every quantity's two estimates side by side
with the verdict and the causes that explain a difference. Renderers only lay these
out; nothing here depends on an output format.

Information criteria: AIC = -2 L + 2 k and BIC = -2 L + k ln(n), with k counting every
fixed effect and every variance parameter, n the number of observed occasions, and L
the criterion the mixed model was fitted by: the log-likelihood under ML, the REML
criterion under REML (then AIC and BIC compare only models with the same fixed effects).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from scipy.stats import norm

from ..compile import FixedColumn, Key, cov_key, var_key
from ..spec import Term
from .curves import TrajectoryData
from .result import Estimate, QuantityRow, Reconciliation

CONFIDENCE = 0.95


@dataclass(frozen=True)
class FixedEffect:
    """One estimate with its Wald test and interval: a fixed effect of the long form, or a wide-form parameter."""

    key: Key
    name: str
    estimate: float
    se: float
    z: float
    p: float
    lower: float
    upper: float


@dataclass(frozen=True)
class PersonEffectMatrix:
    """The person effects' covariance matrix with its standard errors, and the residual variance.

    `covariance[i][j]` holds the (co)variance of effects i and j (symmetric, with the referee's SE);
    `correlation[i][j]` their correlation (None on the diagonal or where a variance is not positive).
    """

    names: tuple[str, ...]
    covariance: tuple[tuple[Estimate, ...], ...]
    correlation: tuple[tuple[float | None, ...], ...]
    residual: Estimate | None

    @property
    def parameters(self) -> int:
        """Free variance parameters: the matrix's lower triangle and the residual variance."""
        q = len(self.names)
        return q * (q + 1) // 2 + (self.residual is not None)


@dataclass(frozen=True)
class FitStatistics:
    persons: int
    observations: int
    method: str                 # "ml" or "reml"
    criterion: str              # what `log_likelihood` is, in words
    log_likelihood: float
    referee_log_likelihood: float
    parameters: int
    aic: float
    bic: float


@dataclass(frozen=True)
class MixedModelSummary:
    """The long form's table: fixed effects, variance components, fit statistics."""

    fixed: tuple[FixedEffect, ...]
    person_effects: PersonEffectMatrix
    fit: FitStatistics
    confidence: float = CONFIDENCE


@dataclass(frozen=True)
class CorrespondenceLine:
    """One quantity in both frameworks."""

    key: Key
    wide_name: str
    long_name: str
    sem: Estimate
    mixed: Estimate
    difference: float
    verdict: str
    causes: tuple[str, ...]
    explanation: str            # the titles of the causes, or "" when the estimates agree


def time_name(rec: Reconciliation) -> str:
    """The user's name for time (the long layout's time column, or `time`)."""
    return rec.pair.mixed.shaped.description.data.time or "time"


def effect_name(column: FixedColumn, time: str) -> str:
    """A fixed effect in the user's words: `intercept`, `months`, `months^2`, `format[private] × months`."""
    term = {Term.INTERCEPT: "", Term.SLOPE: time, Term.QUADRATIC: f"{time}^2"}[column.term]
    if column.predictor is None:
        return term or "intercept"
    return f"{column.predictor.key} × {term}" if term else column.predictor.key


def wald(key: Key, name: str, value: Estimate, confidence: float) -> FixedEffect:
    z = value.estimate / value.se if value.se and math.isfinite(value.se) and value.se > 0 else math.nan
    p = float(2 * norm.sf(abs(z))) if math.isfinite(z) else math.nan
    half = float(norm.ppf(0.5 + confidence / 2)) * value.se
    return FixedEffect(key, name, value.estimate, value.se, float(z), p, value.estimate - half,
                       value.estimate + half)


def _mixed_estimates(rec: Reconciliation) -> dict[Key, Estimate]:
    """The long form's estimate of every quantity it has (its one residual variance under `var.residual`)."""
    out: dict[Key, Estimate] = {}
    for row in rec.quantities:
        key = "var.residual" if row.key.startswith("var.residual") else row.key
        out.setdefault(key, row.mixed)
    return out


def _correlation(cov: float, first: float, second: float) -> float | None:
    return cov / math.sqrt(first * second) if first > 0 and second > 0 else None


def person_effect_matrix(rec: Reconciliation, values: dict[Key, Estimate]) -> PersonEffectMatrix:
    """The long form's person-effect covariance as a matrix over its random terms, with the residual variance."""
    terms = rec.pair.mixed.random_terms
    missing = Estimate(math.nan, math.nan)

    def entry(a: Term, b: Term) -> Estimate:
        first, second = sorted((a, b), key=terms.index)
        return values.get(var_key(a) if a is b else cov_key(first, second), missing)

    cov = tuple(tuple(entry(a, b) for b in terms) for a in terms)
    corr = tuple(tuple(None if i == j else _correlation(cov[i][j].estimate, cov[i][i].estimate, cov[j][j].estimate)
                       for j in range(len(terms))) for i in range(len(terms)))
    return PersonEffectMatrix(names=tuple(t.value for t in terms), covariance=cov, correlation=corr,
                              residual=values.get("var.residual"))


def _fit_statistics(rec: Reconciliation, n_fixed: int, n_variance: int) -> FitStatistics:
    form = rec.data["forms"]["mixed"]
    reml = rec.data["method"] == "reml"
    value = float(rec.log_likelihood["mixed"])
    k = n_fixed + n_variance
    return FitStatistics(persons=int(form["persons"]), observations=int(form["occasions"]), method=rec.data["method"],
                         criterion="REML criterion" if reml else "log-likelihood", log_likelihood=value,
                         referee_log_likelihood=float(rec.log_likelihood["referee_at_mixed"]), parameters=k,
                         aic=-2 * value + 2 * k, bic=-2 * value + k * math.log(int(form["occasions"])))


def mixed_summary(rec: Reconciliation, confidence: float = CONFIDENCE) -> MixedModelSummary:
    """The long form's fixed effects, variance components and fit statistics, on the user's scale."""
    values = _mixed_estimates(rec)
    time = time_name(rec)
    fixed = tuple(wald(c.key, effect_name(c, time), values[c.key], confidence)
                  for c in rec.pair.mixed.fixed_columns if c.key in values)
    person_effects = person_effect_matrix(rec, values)
    return MixedModelSummary(fixed=fixed, person_effects=person_effects,
                             fit=_fit_statistics(rec, len(fixed), person_effects.parameters), confidence=confidence)


def _line(row: QuantityRow, titles: dict[str, str]) -> CorrespondenceLine:
    return CorrespondenceLine(key=row.key, wide_name=row.wide_name, long_name=row.long_name, sem=row.sem,
                              mixed=row.mixed, difference=row.difference, verdict=row.verdict.value,
                              causes=row.causes, explanation="; ".join(titles.get(c, c) for c in row.causes))


def correspondence_lines(rec: Reconciliation) -> tuple[CorrespondenceLine, ...]:
    """Every reconciled quantity with both estimates, the difference, the verdict and its causes."""
    titles = {e.cause: e.title for e in rec.explanations}
    return tuple(_line(row, titles) for row in rec.quantities)


def wide_parameters(rec: Reconciliation, confidence: float = CONFIDENCE) -> tuple[FixedEffect, ...]:
    """Every free parameter of the fitted wide form with its Wald test and interval, on the user's scale.

    Named by quantity key and the wide form's words (with our generated label in brackets); standard
    errors from the referee's Hessian of the wide form's own likelihood. Growth: one quantity row per
    free parameter of the SEM. Cross-lagged: every label of the fitted path model, also those the
    reconciliation does not compare (the first wave's moments, an RI-CLPM's wave means and trait variances).
    """
    words = {row.key: row.wide_name for row in rec.quantities}
    if rec.solution is None:
        return tuple(wald(row.key, row.wide_name, row.sem, confidence) for row in rec.quantities)
    solution, compiled = rec.solution, rec.pair
    out = {}
    for statement in solution.model.statements:
        label = statement.label
        if label and label in solution.wide and label not in out:
            key = compiled.keys.get(label) or compiled.family.nuisance_key(compiled, statement)
            out[label] = wald(key, words.get(key, key), Estimate(solution.wide[label],
                                                                 solution.wide_se.get(label, math.nan)), confidence)
    return tuple(out.values())


def figure_estimates(rec: Reconciliation) -> dict[Key, Estimate]:
    """The wide form's estimate of every free path the path figure draws, by quantity key.

    The reconciled quantities, and for a cross-lagged plan also the parameters the reconciliation
    does not compare (the first wave's moments, an RI-CLPM's wave means and trait variances), named
    as in its graph.
    """
    out = {row.key: row.sem for row in rec.quantities}
    if rec.solution is not None:
        for parameter in wide_parameters(rec):
            out.setdefault(parameter.key, Estimate(parameter.estimate, parameter.se))
    return out


@dataclass(frozen=True)
class ReportContent:
    """Everything the report shows, computed by the stages; renderers only lay it out.

    Growth models have `mixed` and `trajectories`; the cross-lagged family has `lagged` (the long
    lagged regressions) and `standardised` (the standardised paths over waves). `graph` is the wide
    form's graph and `estimates` the SEM estimate of each of its free paths, by key.
    """

    reconciliation: Reconciliation
    correspondence: tuple[CorrespondenceLine, ...]
    mixed: MixedModelSummary | None = None
    trajectories: TrajectoryData | None = None
    graph: Any = field(default=None, compare=False, repr=False)   # networkx graph of the wide form
    estimates: dict = field(default_factory=dict, compare=False, repr=False)
    lagged: Any = None          # the cross-lagged family's LaggedSummary (families/cross_lagged/lagged_summary.py)
    standardised: Any = None    # its StandardisedPaths (families/cross_lagged/standardised.py)
    wide: tuple[FixedEffect, ...] = ()   # every free parameter of the wide form (`wide_parameters`)


def report_content(rec: Reconciliation) -> ReportContent:
    """The tables' numbers, the figures' data and the model's graph for one reconciliation."""
    lines = correspondence_lines(rec)
    family = getattr(rec.pair, "family", None)   # the compiled models carry their family (the contract)
    if family is None:
        return ReportContent(reconciliation=rec, correspondence=lines)
    return ReportContent(reconciliation=rec, correspondence=lines, wide=wide_parameters(rec),
                         **family.report_parts(rec))
