"""Stage 3: compile a growth description into both forms, as pure functions of the shaped data.

User column names never reach either library: observed variables are `y0..`,
predictors `x0..`, factors `f0..`, parameters carry generated labels, and the
mixed model is built through MixedLM's array interface (no formula at all).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..data import PredictorColumn, ShapedData, complete_cases
from ..spec import Missing, Residuals, Term
from .parameters import GrowthParameters, Scaling
from .plan import Coding, TimeSource
from .quantities import Key, cov_key, effect_key, mean_key, residual_key, var_key

_TERM_WORDS = {Term.INTERCEPT: ("intercept", "constant"), Term.SLOPE: ("slope", "time"),
               Term.QUADRATIC: ("quadratic", "time squared")}
_RANDOM_WORDS = {Term.INTERCEPT: "random intercept", Term.SLOPE: "random slope of time",
                 Term.QUADRATIC: "random slope of time squared"}
INTERNAL_OUTCOME_SD = 10.0  # keeps semopy's objective positive (it turns negative values into inf)


@dataclass(frozen=True)
class FixedColumn:
    term: Term
    predictor: PredictorColumn | None
    key: Key
    sem_label: str
    mixed_name: str


@dataclass(frozen=True)
class Correspondence:
    """Which wide-form parameter and which long-form term estimate one quantity."""

    key: Key
    wide: str
    long: str


@dataclass(frozen=True)
class LongDesign:
    """Per-occasion arrays on the internal scale, the referee's input."""

    y: np.ndarray
    X: np.ndarray
    Z: np.ndarray
    wave: np.ndarray
    person: np.ndarray


@dataclass(frozen=True)
class MixedArrays:
    endog: np.ndarray
    exog: np.ndarray
    groups: np.ndarray
    exog_re: np.ndarray
    exog_names: tuple[str, ...]
    exog_re_names: tuple[str, ...]


@dataclass(frozen=True)
class CompiledGrowth:
    """Both generated specifications of one growth description, and the map between them."""

    shaped: ShapedData
    scaling: Scaling
    terms: tuple[Term, ...]
    random_terms: tuple[Term, ...]
    fixed_columns: tuple[FixedColumn, ...]
    equal_residuals: bool
    coding: Coding
    sem_text: str
    sem_frame: pd.DataFrame
    mixed: MixedArrays
    exact_design: LongDesign
    wave_design: LongDesign
    mixed_design: LongDesign      # what the mixed model is fitted on: exact times, or wave times
    correspondence: tuple[Correspondence, ...]

    @property
    def keys(self) -> tuple[Key, ...]:
        return tuple(c.key for c in self.correspondence)

    @property
    def n_waves(self) -> int:
        return len(self.shaped.waves)

    def to_quantities(self, params: GrowthParameters) -> dict[Key, float]:
        """Every quantity on the user's scale."""
        return {key: shift + factor * value for key, (value, shift, factor)
                in self._internal_values(params).items()}

    def reml_log_jacobian(self) -> float:
        """Add to an internal-scale REML criterion to get the user's-scale one.

        REML also depends on the scale of the fixed-effect columns, which the
        internal scale stretches by t_scale^power (and x_scale for predictors).
        """
        s = self.scaling
        columns = 0.0
        for column in self.fixed_columns:
            columns += column.term.power * np.log(s.t_scale)
            if column.predictor is not None:
                columns += np.log(s.x_scale[self.shaped.predictors.index(column.predictor)])
        n_obs, p = len(self.mixed.endog), len(self.fixed_columns)
        return float(-(n_obs - p) * np.log(s.y_scale) - columns)

    def scale_factors(self) -> dict[Key, float]:
        """User-scale value = shift + factor * internal value; standard errors scale by |factor|."""
        zero = GrowthParameters(np.zeros(len(self.fixed_columns)), np.zeros((len(self.random_terms),) * 2),
                                np.zeros(self.n_waves))
        return {key: abs(factor) for key, (_, _, factor) in self._internal_values(zero).items()}

    def _internal_values(self, params: GrowthParameters) -> dict[Key, tuple[float, float, float]]:
        s = self.scaling
        out: dict[Key, tuple[float, float, float]] = {}
        for value, column in zip(params.fixed, self.fixed_columns):
            factor = s.y_scale / s.t_scale ** column.term.power
            if column.predictor is not None:
                factor /= s.x_scale[self.shaped.predictors.index(column.predictor)]
            shift = s.y_center if (column.term is Term.INTERCEPT and column.predictor is None) else 0.0
            out[column.key] = (float(value), shift, factor)
        for i, first in enumerate(self.random_terms):
            for j, second in enumerate(self.random_terms[: i + 1]):
                key = var_key(first) if i == j else cov_key(second, first)
                out[key] = (float(params.cov[i, j]), 0.0,
                            s.y_scale ** 2 / s.t_scale ** (first.power + second.power))
        if self.equal_residuals:
            out[residual_key()] = (float(params.residual[0]), 0.0, s.y_scale ** 2)
        else:
            for wave, value in zip(self.shaped.waves, params.residual):
                out[residual_key(wave)] = (float(value), 0.0, s.y_scale ** 2)
        return out

    # semopy's labels <-> the shared parameter space
    def sem_values(self, params: GrowthParameters) -> dict[str, float]:
        values = {c.sem_label: float(v) for c, v in zip(self.fixed_columns, params.fixed)}
        for i, a in enumerate(self.random_terms):
            for j, b in enumerate(self.random_terms[: i + 1]):
                values[_cov_label(b, a)] = float(params.cov[i, j])
        if self.equal_residuals:
            values["e"] = float(params.residual[0])
        else:
            values.update({f"e{w}": float(v) for w, v in enumerate(params.residual)})
        return values

    def from_sem_values(self, values: dict[str, float]) -> GrowthParameters:
        fixed = np.array([values[c.sem_label] for c in self.fixed_columns])
        q = len(self.random_terms)
        cov = np.zeros((q, q))
        for i, a in enumerate(self.random_terms):
            for j, b in enumerate(self.random_terms[: i + 1]):
                cov[i, j] = cov[j, i] = values[_cov_label(b, a)]
        if self.equal_residuals:
            residual = np.full(self.n_waves, values["e"])
        else:
            residual = np.array([values[f"e{w}"] for w in range(self.n_waves)])
        return GrowthParameters(fixed, cov, residual)


def _cov_label(first: Term, second: Term) -> str:
    return f"v{first.power}" if first is second else f"c{first.power}_{second.power}"


def _scaling(shaped: ShapedData, coding: Coding) -> Scaling:
    origin = coding.origin
    spread = coding.scale * max(np.abs(shaped.times - origin).max(), np.abs(np.asarray(shaped.waves) - origin).max())
    x_scale = shaped.predictor_values.std(axis=0) if shaped.predictors else np.zeros(0)
    numeric = np.array([p.level is None for p in shaped.predictors], dtype=bool)
    x_scale = np.where((x_scale > 0) & numeric, x_scale, 1.0)
    return Scaling(y_center=float(shaped.outcome.mean()), y_scale=float(shaped.outcome.std()) / INTERNAL_OUTCOME_SD,
                   t_origin=origin, t_scale=float(spread) if spread > 0 else 1.0, x_scale=np.asarray(x_scale, float),
                   t_unit=coding.scale)


def _fixed_columns(terms: tuple[Term, ...], predictors: tuple[PredictorColumn, ...]) -> tuple[FixedColumn, ...]:
    columns = []
    for term in terms:
        k = term.power
        columns.append(FixedColumn(term, None, mean_key(term), f"m{k}", f"k{k}"))
        columns += [FixedColumn(term, p, effect_key(p.key, term), f"g{k}_{j}", f"k{k}_x{j}")
                    for j, p in enumerate(predictors)]
    return tuple(columns)


def _design(shaped: ShapedData, scaling: Scaling, times: np.ndarray, columns, random_terms) -> LongDesign:
    t = scaling.time(times)
    x = shaped.predictor_values[shaped.person_index] / scaling.x_scale if shaped.predictors else None
    X = np.column_stack([t ** c.term.power * (1.0 if c.predictor is None
                                              else x[:, shaped.predictors.index(c.predictor)]) for c in columns])
    Z = np.column_stack([t ** term.power for term in random_terms])
    return LongDesign(y=scaling.outcome(shaped.outcome), X=X, Z=Z, wave=shaped.wave_index,
                      person=shaped.person_index)


def _sem_text(terms, random_terms, columns, n_predictors: int, wave_times: np.ndarray, equal: bool) -> str:
    n_waves = len(wave_times)
    lines = [f"f{t.power} =~ " + " + ".join(f"{w ** t.power:.12f}*y{i}" for i, w in enumerate(wave_times))
             for t in terms]
    for t in terms:
        if n_predictors:
            lines.append(f"f{t.power} ~ " + " + ".join(f"g{t.power}_{j}*x{j}" for j in range(n_predictors)))
        lines.append(f"f{t.power} ~ m{t.power}*1")
    for i in range(n_waves):
        lines += [f"y{i} ~ 0*1", f"y{i} ~~ {'e' if equal else f'e{i}'}*y{i}"]
    for i, a in enumerate(terms):
        for b in terms[: i + 1]:
            free = a in random_terms and b in random_terms
            lines.append(f"f{b.power} ~~ {_cov_label(b, a) if free else '0'}*f{a.power}")
    lines.append("START(0.0) " + " ".join(c.sem_label for c in columns))
    return "\n".join(lines) + "\n"


def _correspondence(shaped, columns, random_terms, equal: bool) -> tuple[Correspondence, ...]:
    out = []
    for c in columns:
        word, long_word = _TERM_WORDS[c.term]
        if c.predictor is None:
            out.append(Correspondence(c.key, f"mean of the {word} factor [{c.sem_label}]",
                                      f"fixed effect of the {long_word} [{c.mixed_name}]"))
        else:
            long_name = c.predictor.key + ("" if c.term is Term.INTERCEPT else f" x {long_word}")
            out.append(Correspondence(c.key, f"{c.predictor.key} -> {word} factor [{c.sem_label}]",
                                      f"fixed effect of {long_name} [{c.mixed_name}]"))
    for i, a in enumerate(random_terms):
        for b in random_terms[: i + 1]:
            if a is b:
                out.append(Correspondence(var_key(a), f"variance of the {a.value} factor [{_cov_label(a, a)}]",
                                          f"variance of the {_RANDOM_WORDS[a]}"))
            else:
                out.append(Correspondence(cov_key(b, a), f"covariance of the {b.value} and {a.value} factors "
                                          f"[{_cov_label(b, a)}]", f"covariance of the {_RANDOM_WORDS[b]} and "
                                          f"the {_RANDOM_WORDS[a]}"))
    if equal:
        out.append(Correspondence(residual_key(), "residual variance shared by every wave [e]",
                                  "residual variance (one for all occasions)"))
    else:
        out += [Correspondence(residual_key(w), f"residual variance at wave {w:g} [e{i}]",
                               "residual variance (one for all occasions)") for i, w in enumerate(shaped.waves)]
    return tuple(out)


def compile_growth(shaped: ShapedData, coding: Coding | None = None, residuals: Residuals | None = None,
                   random: tuple[Term, ...] | None = None,
                   mixed_times: TimeSource = TimeSource.EXACT) -> CompiledGrowth:
    """Both generated specifications for a shaped growth description.

    The optional arguments override the description (they are how a harmonised
    plan is compiled): the occasions used and the time coding, the SEM's residual
    structure, the random terms, and whether the mixed model sees exact or wave times.
    """
    model = shaped.description.model
    coding = coding or Coding(shaped.description.estimation.missing, model.time_origin)
    if coding.missing is Missing.COMPLETE_CASES:
        shaped = complete_cases(shaped)
    scaling = _scaling(shaped, coding)
    terms = model.terms
    random_terms = tuple(t for t in terms if t in (random or model.random))
    columns = _fixed_columns(terms, shaped.predictors)
    equal = (residuals or model.residuals) is Residuals.EQUAL
    wave_times = scaling.time(np.asarray(shaped.waves))
    exact = _design(shaped, scaling, shaped.times, columns, random_terms)
    waved = _design(shaped, scaling, np.asarray(shaped.waves)[shaped.wave_index], columns, random_terms)
    fitted = exact if mixed_times is TimeSource.EXACT else waved
    wide = pd.DataFrame(scaling.outcome(shaped.wide_outcome()), columns=[f"y{i}" for i in range(len(wave_times))])
    for j in range(len(shaped.predictors)):
        wide[f"x{j}"] = shaped.predictor_values[:, j] / scaling.x_scale[j]
    mixed = MixedArrays(endog=fitted.y, exog=fitted.X, groups=shaped.person_index, exog_re=fitted.Z,
                        exog_names=tuple(c.mixed_name for c in columns),
                        exog_re_names=tuple(f"k{t.power}" for t in random_terms))
    return CompiledGrowth(shaped=shaped, scaling=scaling, terms=terms, random_terms=random_terms,
                          fixed_columns=columns, equal_residuals=equal, coding=coding,
                          sem_text=_sem_text(terms, random_terms, columns, len(shaped.predictors), wave_times, equal),
                          sem_frame=wide, mixed=mixed, exact_design=exact, wave_design=waved, mixed_design=fitted,
                          correspondence=_correspondence(shaped, columns, random_terms, equal))
