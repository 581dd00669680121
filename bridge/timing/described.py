"""`timing SPEC`: the timing of a description's data, what rounding is predicted to do and what it does.

The description is evaluated once with every other cause removed (ML in both forms, one residual
variance, the mixed model's time coding and missing-data handling in the wide form too), so the
wide-minus-mixed gap of each quantity is the cost of rounding the times onto the waves alone. The
prediction (`predict.py`) comes from the exact-time mixed model's estimates.

The exact wide form: a wide layout whose slope loadings are each person's own times (person-specific
loadings, the "definition variables" of Mehta & Neale 2005, Psychological Methods 10(3)) has, person
by person, y_i ~ N(Lambda_i mu, Lambda_i Psi Lambda_i' + theta I), which is the marginal likelihood of
the exact-time long design. The referee maximises it over the SEM's parameter space (variances >= 0,
covariances free; `bridge.referee.spaces`) from a start away from the mixed solution; when the mixed
solution is inside the positive semidefinite cone the two maxima are the same number.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..compile import GrowthParameters, Plan
from ..data import ShapedData, shape_frame
from ..data.reading import read_table
from ..errors import DescriptionError
from ..spec import Description, Method, Residuals, load
from ..spec.vocabulary import Kind
from .predict import Prediction, predict


@dataclass(frozen=True)
class ExactWide:
    """The wide form with person-specific loadings at the exact times, maximised by the referee."""

    log_likelihood: float          # its maximum over the SEM's space (user's scale)
    mixed_log_likelihood: float    # the mixed model's maximum: statsmodels' solution polished by the referee
    library_log_likelihood: float  # statsmodels' own ML log-likelihood, as it stopped
    start_log_likelihood: float    # where the referee's search started
    estimates: dict[str, float]

    @property
    def difference(self) -> float:
        return self.log_likelihood - self.mixed_log_likelihood

    def to_dict(self) -> dict:
        return {"log_likelihood": self.log_likelihood, "mixed_log_likelihood": self.mixed_log_likelihood,
                "library_log_likelihood": self.library_log_likelihood,
                "difference": self.difference, "start_log_likelihood": self.start_log_likelihood,
                "estimates": self.estimates}


@dataclass(frozen=True)
class RoundingCheck:
    """The description fitted once on its wave grid: exact-time values, the gaps and the prediction."""

    description: str
    exact: dict[str, float]          # the mixed model at the exact times
    exact_se: dict[str, float]
    observed: dict[str, float]       # wide form on the grid minus the exact-time mixed model
    prediction: Prediction | None
    exact_wide: ExactWide | None
    per_wave_residuals: bool         # the description asks for a residual variance per wave
    offset_predictor: str | None = None   # the person-offset predictor added (--with-offset)

    def observed_se(self) -> dict[str, float]:
        return {k: v / self.exact_se[k] if self.exact_se.get(k) else float("nan") for k, v in self.observed.items()}

    def ranked(self) -> list[tuple[str, float]]:
        """The observed gaps in standard errors, largest first."""
        values = [(k, v) for k, v in self.observed_se().items() if np.isfinite(v)]
        return sorted(values, key=lambda kv: -abs(kv[1]))

    def to_dict(self) -> dict:
        out = {"description": self.description, "exact": self.exact, "exact_se": self.exact_se,
               "observed_change": self.observed, "observed_change_se": self.observed_se(),
               "offset_predictor": self.offset_predictor}
        if self.prediction is not None:
            out.update(self.prediction.to_dict())
        if self.exact_wide is not None:
            out["exact_wide_form"] = self.exact_wide.to_dict()
        return out


def rounding_plan(description: Description) -> Plan:
    """The description's plan with every cause but rounding removed."""
    plan = Plan.from_description(description)
    return plan.with_(method=Method.ML, sem_residuals=Residuals.EQUAL, sem=plan.mixed)


def exact_wide_form(evaluation) -> ExactWide:
    """The referee's maximum of the wide form with person-specific loadings at the exact times."""
    from ..referee.likelihood import Referee
    from ..referee.spaces import space_of

    compiled, mixed = evaluation.pair.mixed, evaluation.adjudication.mixed
    referee = Referee(compiled.exact_design)
    space = space_of(compiled, referee, mixed.params, reml=False, psd=False, equal_residuals=True)
    p = mixed.params
    start = GrowthParameters(p.fixed, np.diag(np.diag(p.cov)) * 1.5 + 0.1 * np.eye(len(p.cov)), p.residual * 0.7)
    best, value = space.maximum(start)
    cone = space_of(compiled, referee, mixed.params, reml=False, psd=True, equal_residuals=True)
    _, polished = cone.maximum(mixed.params)
    return ExactWide(log_likelihood=float(value), mixed_log_likelihood=float(polished),
                     library_log_likelihood=float(mixed.own_log_likelihood),
                     start_log_likelihood=float(space.full(referee.gls_fixed(start)) + space.shift),
                     estimates={k: float(v) for k, v in compiled.to_quantities(best).items()})


def add_offset(description: Description, frame, shaped: ShapedData) -> tuple[Description, object, str]:
    """The description with each person's mean displacement from the grid as a person-level predictor."""
    name = "time_offset"
    while name in frame.columns:
        name = "_" + name
    signed = shaped.times - np.asarray(shaped.waves)[shaped.wave_index]
    counts = np.bincount(shaped.person_index)
    offset = np.bincount(shaped.person_index, weights=signed) / counts
    by_person = dict(zip(shaped.persons, offset))
    frame = frame.assign(**{name: frame[description.data.person].astype(str).map(by_person)})
    model = replace(description.model, predictors=tuple(description.model.predictors) + (name,))
    return replace(description, model=model), frame, name


def check_description(description: Description | str, frame=None, with_offset: bool = False,
                      exact_wide: bool = True) -> tuple[ShapedData, RoundingCheck]:
    """Fit a growth description once on its wave grid and predict and measure what rounding does."""
    from ..reconcile.evaluation import evaluate
    from .experiment import _fitting_quietly

    description = description if isinstance(description, Description) else load(description)
    if description.model.kind is not Kind.GROWTH:
        raise DescriptionError(f"{description.label}: `timing` with a description is for growth models; "
                               f"model.kind is {description.model.kind.value}")
    frame = read_table(description.data.path) if frame is None else frame
    shaped = shape_frame(description, frame)
    offset = None
    if with_offset:
        description, frame, offset = add_offset(description, frame, shaped)
        shaped = shape_frame(description, frame)
    with _fitting_quietly():
        evaluation = evaluate(shaped, rounding_plan(description))
    exact = {r.key: float(r.mixed.estimate) for r in evaluation.rows}
    exact_se = {r.key: float(r.mixed.se) for r in evaluation.rows}
    observed = {r.key: float(r.sem.estimate - r.mixed.estimate) for r in evaluation.rows}
    scale = evaluation.plan.mixed.scale
    prediction = predict(shaped, exact, exact_se, observed, time_scale=scale, offset_key=offset)
    check = RoundingCheck(description=description.label, exact=exact, exact_se=exact_se, observed=observed,
                          prediction=prediction, exact_wide=exact_wide_form(evaluation) if exact_wide else None,
                          per_wave_residuals=description.model.residuals is Residuals.PER_WAVE,
                          offset_predictor=offset)
    return shaped, check
