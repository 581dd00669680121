"""Fit one cross-lagged plan end to end: the wide path model, the long lagged regressions, the referee."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compile.panel import CompiledPanel
from ..compile.path import PathModel
from ..fit.lagged import EquationFit, fit_person_intercept, fit_pooled
from ..fit.sem import SemopyRun, run_semopy, semopy_log_likelihood
from ..referee.adjudicate import LikelihoodCheck, Refit
from ..referee.likelihood import Referee
from ..referee.panel import PathReferee
from ..referee.panel_judge import (equation_design, equation_parameters, equation_standard_errors,
                                   long_to_values, path_standard_errors, values_to_equation)
from ..spec import Paths, Variant


@dataclass(frozen=True)
class PanelFits:
    compiled: CompiledPanel
    model: PathModel                 # the wide model fitted (restricted or relaxed)
    sem: SemopyRun
    first_sem: SemopyRun
    long: tuple[EquationFit, ...]
    first_long: tuple[EquationFit, ...]
    sem_log_likelihood: float        # internal scale
    referee_at_long: float           # the long solution scored by the wide-form referee
    refits: tuple[Refit, ...]
    checks: tuple[LikelihoodCheck, ...]
    sem_se: dict[str, float]
    long_se: dict[str, float]

    @property
    def long_values(self) -> dict[str, float]:
        return long_to_values(self.compiled, list(self.long), self.sem.values)

    def solution(self) -> "PanelSolution":
        """Every free parameter of both forms on the user's scale, with the long equations' rows and fit."""
        c = self.compiled
        shift = float(np.log(c.scale))
        return PanelSolution(
            model=self.model, wide=_to_user(self.model, c.scale, self.sem.values),
            wide_se=_to_user(self.model, c.scale, self.sem_se, se=True),
            long=_to_user(self.model, c.scale, {**_long_labels(c, self.long), **self.long_values}),
            long_se=_to_user(self.model, c.scale, self.long_se, se=True),
            rows=tuple(len(eq.y) for eq in c.equations),
            log_likelihood=tuple(f.log_likelihood + len(eq.y) * shift for f, eq in zip(self.long, c.equations)),
            person_intercept=c.variant is not Variant.CLPM)


@dataclass(frozen=True)
class PanelSolution:
    """Both fitted forms of a cross-lagged plan, every parameter by label on the user's scale.

    `wide` and `wide_se` hold every free parameter of the fitted path model `model` (also those the
    reconciliation does not compare, such as the first wave's moments); `long` and `long_se` the long
    lagged regressions written in the same labels. `rows` and `log_likelihood` are per outcome's equation.
    """

    model: PathModel
    wide: dict[str, float]
    wide_se: dict[str, float]
    long: dict[str, float]
    long_se: dict[str, float]
    rows: tuple[int, ...]
    log_likelihood: tuple[float, ...]
    person_intercept: bool      # whether the long equations have a random person intercept


def _long_labels(compiled: CompiledPanel, fits) -> dict[str, float]:
    """Every coefficient and residual variance of the long equations by label (also those the wide form lacks)."""
    out = {}
    for eq, fit in zip(compiled.equations, fits):
        for t in np.unique(eq.wave):
            out.update(zip(eq.labels[t], (float(v) for v in fit.coefficients[t])))
            out[eq.residual[t]] = float(fit.residual[t])
    return out


def _to_user(model: PathModel, scale: float, values: dict[str, float], se: bool = False) -> dict[str, float]:
    """Parameters on the user's scale: means divided by the scale once, (co)variances twice, paths unchanged.

    The power comes from the statement a label belongs to; the long form's constants (`i...`), which the
    RI-CLPM's wide form does not have, are means.
    """
    power = {label: 1 for label in values if label.startswith("i")}
    for s in model.statements:
        if s.label:
            power.setdefault(s.label, 1 if s.op == "1" else 2 if s.op == "~~" else 0)
    out = {}
    for label, value in values.items():
        value = float(value) / scale ** power.get(label, 0)
        out[label] = abs(value) if se else value
    return out


def _long_fits(compiled: CompiledPanel) -> list[EquationFit]:
    wave_specific = compiled.paths is Paths.WAVE_SPECIFIC
    if compiled.variant is Variant.CLPM:
        return [fit_pooled(eq, compiled.n_waves, wave_specific) for eq in compiled.equations]
    return [fit_person_intercept(eq, compiled.n_waves) for eq in compiled.equations]


def _equation_score(compiled: CompiledPanel, eq, fit: EquationFit) -> float:
    wave_specific = compiled.paths is Paths.WAVE_SPECIFIC
    return Referee(equation_design(eq, wave_specific)).log_likelihood(equation_parameters(fit, eq, wave_specific))


def _better_long(compiled: CompiledPanel, fits: list[EquationFit], sem_values: dict, refits: list) -> list:
    """Refit a mixed model that scores below the wide form's solution (or below its own boundary)."""
    if compiled.variant is Variant.CLPM:
        return fits
    out = []
    for eq, fit in zip(compiled.equations, fits):
        before = _equation_score(compiled, eq, fit)
        shift = len(eq.y) * float(np.log(compiled.scale))  # reported on the user's scale
        candidates = [("the boundary (no person variance)", fit_pooled(eq, compiled.n_waves, False))]
        if compiled.equivalent:
            start = values_to_equation(sem_values, eq, compiled.n_waves)
            candidates.insert(0, ("the wide-form solution", fit_person_intercept(eq, compiled.n_waves, start)))
        best = fit
        for name, candidate in candidates:
            score = _equation_score(compiled, eq, candidate)
            if score > max(before, _equation_score(compiled, eq, best)) + 1e-6 * max(1.0, abs(before)):
                best = candidate
                refits.append(Refit("statsmodels", f"{name} scores {score - before:.4g} higher for outcome "
                                    f"{compiled.panel.names[eq.outcome]}", before + shift, score + shift, True))
        out.append(best)
    return out


def fit_panel(compiled: CompiledPanel, model: PathModel, start: dict[str, float] | None = None) -> PanelFits:
    """Both forms of one plan, each checked by the referee and refitted when another point scores higher.

    `start` (values by label, from a related fit) only speeds up the wide form's first fit.
    """
    frame = compiled.frame
    referee = PathReferee(model, frame.to_numpy())
    start = None if start is None else {label: start.get(label, 0.0) for label in model.labels}
    first_sem = sem = run_semopy(model.text(), frame, start=start)
    first_long = long = _long_fits(compiled)
    refits: list[Refit] = []
    long = _better_long(compiled, long, sem.values, refits)
    candidate = {**sem.values, **{k: v for k, v in long_to_values(compiled, long, sem.values).items()
                                  if k in sem.values}}
    before, rival = referee.log_likelihood(sem.values), referee.log_likelihood(candidate)
    if compiled.equivalent and rival > before + 1e-9:  # polish even tiny gaps: the long form is exact (closed form, or refitted)
        again = run_semopy(model.text(), frame, start=candidate)
        after = referee.log_likelihood(again.values)
        kept = after > before
        shift = referee.n_observed * float(np.log(compiled.scale))
        refits.append(Refit("semopy", f"the long-form solution scores {rival - before:.4g} higher under the "
                            "wide-form likelihood", before + shift, after + shift, kept))
        sem = again if kept else sem
    sem_ll = semopy_log_likelihood(sem, referee.n_observed)
    checks = [LikelihoodCheck("semopy", "ml", sem_ll, referee.log_likelihood(sem.values))]
    checks += [LikelihoodCheck("statsmodels", "ml", fit.log_likelihood, _equation_score(compiled, eq, fit))
               for eq, fit in zip(compiled.equations, long)]
    long_se: dict[str, float] = {}
    for eq, fit in zip(compiled.equations, long):
        long_se.update(equation_standard_errors(fit, eq, compiled.paths is Paths.WAVE_SPECIFIC,
                                                pooled=compiled.variant is Variant.CLPM))
    _residual_covariance_se(compiled, long, long_se)
    return PanelFits(compiled=compiled, model=model, sem=sem, first_sem=first_sem, long=tuple(long),
                     first_long=tuple(first_long), sem_log_likelihood=sem_ll,
                     referee_at_long=referee.log_likelihood(candidate) if compiled.equivalent else float("nan"),
                     refits=tuple(refits), checks=tuple(checks),
                     sem_se=path_standard_errors(referee, sem.values), long_se=long_se)


def _residual_covariance_se(compiled: CompiledPanel, fits: list[EquationFit], out: dict[str, float]) -> None:
    """Large-sample SE of a residual covariance, sqrt((s_jj s_kk + s_jk^2) / n): common practice."""
    values = long_to_values(compiled, fits, {label: 0.0 for label in compiled.sem.labels})
    for label in compiled.sem.labels:
        if label.startswith("r"):
            head, _, wave = label[1:].partition("_w")
            j, k = map(int, head.split("_"))
            t = int(wave) if wave else 1
            n = min(len(compiled.equations[j].y), len(compiled.equations[k].y))
            if wave:
                n = int((compiled.equations[j].wave == t).sum())
            sj, sk = values[compiled.equations[j].residual[t]], values[compiled.equations[k].residual[t]]
            out[label] = float(np.sqrt((sj * sk + values[label] ** 2) / max(n, 1)))
