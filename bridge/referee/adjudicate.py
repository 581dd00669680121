"""Decide which solution is the maximum, refit a library that stopped short, and attach standard errors."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compile import CompiledGrowth, CompiledPair, GrowthParameters, Key, LongDesign, cov_key, var_key
from ..fit import FitOutcome, fit_mixed, fit_sem
from ..compile.parameters import is_psd
from ..fit.mixed import boundary_face
from .certificate import Certificate
from .hessian import fixed_standard_errors, variance_standard_errors
from .likelihood import Referee
from .spaces import certify_growth, space_of

NEAR_SINGULAR = 1e-4  # smallest/largest eigenvalue of the person-effect covariance


@dataclass(frozen=True)
class Refit:
    """One refit the referee ordered, with the criterion before and after (user's scale)."""

    library: str
    reason: str
    before: float
    after: float
    kept: bool


@dataclass(frozen=True)
class LikelihoodCheck:
    """The referee's reproduction of a library's own log-likelihood at that library's optimum."""

    library: str
    criterion: str      # "ml" or "reml"
    library_value: float
    referee_value: float

    @property
    def relative_difference(self) -> float:
        return abs(self.library_value - self.referee_value) / max(1.0, abs(self.library_value))


@dataclass(frozen=True)
class Adjudication:
    """Both final fits, what the referee did to get them, and their standard errors."""

    sem: FitOutcome
    mixed: FitOutcome
    first_sem: FitOutcome       # as the libraries first returned them, before any refit the referee ordered
    first_mixed: FitOutcome
    refits: tuple[Refit, ...]
    checks: tuple[LikelihoodCheck, ...]
    log_likelihood: dict[str, float]
    sem_se: dict[Key, float]
    mixed_se: dict[Key, float]
    certificates: tuple[Certificate, ...] = ()

    @property
    def certified(self) -> bool:
        """Whether both final solutions are certified maxima of the models their libraries fitted."""
        return bool(self.certificates) and all(c.passed for c in self.certificates)


def _tolerance(value: float) -> float:
    """How much higher another solution must score before a library is refitted from it.

    Small on purpose: a refit from the better point costs one more fit and removes even the
    optimiser-tolerance gaps (1e-5 of a log-likelihood unit and up) between the two libraries.
    """
    return max(1e-6, 1e-10 * abs(value))


class _Judge:
    """Scores any solution under each library's own model, on the user's scale."""

    def __init__(self, pair: CompiledPair):
        self.pair, self.reml = pair, pair.plan.reml
        self._referees: dict[int, Referee] = {}
        self.sem_referee = self.referee(pair.sem.wave_design)
        self.mixed_referee = self.referee(pair.mixed.mixed_design)
        self.refits: list[Refit] = []

    def referee(self, design: LongDesign) -> Referee:
        """One referee per design (building one groups every person, so it is done once)."""
        if id(design) not in self._referees:
            self._referees[id(design)] = Referee(design)
        return self._referees[id(design)]

    def sem_score(self, params: GrowthParameters) -> float:
        return self.sem_referee.log_likelihood(params) + self.pair.sem.scaling.log_jacobian(self.sem_referee.n_obs)

    def mixed_score(self, params: GrowthParameters) -> float:
        mixed = self.pair.mixed
        shift = mixed.reml_log_jacobian() if self.reml else mixed.scaling.log_jacobian(self.mixed_referee.n_obs)
        return self.mixed_referee.criterion(params, self.reml) + shift

    def better(self, library: str, current: FitOutcome, candidate: GrowthParameters, reason: str, refit) -> FitOutcome:
        """Refit `library` from `candidate` when the candidate scores higher under its own criterion."""
        score = self.sem_score if library == "semopy" else self.mixed_score
        if library == "statsmodels" and not is_psd(candidate.cov):
            return current  # outside the mixed model's parameter space: a boundary matter, not a short stop
        before, rival = score(current.params), score(candidate)
        if not rival > before + _tolerance(before):
            return current
        new = refit(candidate)
        after = score(new.params)
        kept = bool(after > before + 1e-9 * max(1.0, abs(before)))
        self.refits.append(Refit(library, reason.format(gap=rival - before), before, after, kept))
        return new if kept else current

    def certified(self, library: str, compiled: CompiledGrowth, fit: FitOutcome, refit,
                  attempts: int = 2) -> tuple[FitOutcome, Certificate]:
        """Certify a solution in its library's own space; polish it (refit from the referee's maximum) until it passes.

        The library refits from the referee's maximum and its own numbers are kept, so the
        reported estimates stay the library's; the certificate of the last solution is returned.
        """
        wide = library == "semopy"
        referee = self.sem_referee if wide else self.mixed_referee
        space = space_of(compiled, referee, fit.params, reml=False if wide else self.reml, psd=not wide,
                         equal_residuals=compiled.equal_residuals if wide else True)
        form = "wide" if wide else "long"
        certificate, best = certify_growth(space, compiled, fit.params, fit.own_log_likelihood, library, form)
        repairs: list[str] = []
        for _ in range(attempts):
            if certificate.passed or best is None:
                break
            before = space.full(fit.params) + space.shift
            new = refit(best)
            new_certificate, new_best = certify_growth(space, compiled, new.params, new.own_log_likelihood,
                                                       library, form)
            after = space.full(new.params) + space.shift
            kept = bool(new_certificate.passed or after > before)
            self.refits.append(Refit(library, f"the referee's certificate failed ({certificate.reason}); refitted "
                                     "from the referee's maximum", before, after, kept))
            repairs.append(f"refitted from the referee's maximum: criterion {before:.6f} -> {after:.6f}")
            if kept:
                fit, certificate, best = new, new_certificate, new_best
        for text in repairs:
            certificate = certificate.with_repair(text)
        return fit, certificate

    def exact_log_likelihood(self, compiled: CompiledGrowth, params: GrowthParameters) -> float:
        referee = self.referee(compiled.exact_design)
        return referee.log_likelihood(params) + compiled.scaling.log_jacobian(referee.n_obs)


def _boundary_candidate(compiled: CompiledGrowth, mixed: FitOutcome, reml: bool) -> FitOutcome | None:
    """The mixed model with the variance on its boundary fixed at zero, when one variance is (nearly) zero.

    Only a variance at zero can be fixed that way; a singular matrix of another kind (a correlation of
    +/-1) is left to the certificate, whose Cholesky space contains it.
    """
    diag = np.diag(mixed.params.cov)
    if len(diag) < 2:
        return None
    low = [i for i, d in enumerate(diag) if d <= NEAR_SINGULAR * max(float(diag.max()), 1e-12)]
    if not low or len(low) == len(diag):
        return None
    return fit_mixed(compiled, reml, face=np.eye(len(diag))[:, [i for i in range(len(diag)) if i not in low]])


def adjudicate(pair: CompiledPair, sem: FitOutcome, mixed: FitOutcome) -> Adjudication:
    """Compare both solutions under each library's own model; refit the one that stopped short.

    A solution can be scored under the other library's model only when both forms
    use the same occasions and time coding (and, for the SEM's solution, the same
    residual structure); otherwise each library is checked against the referee alone.
    """
    judge, reml = _Judge(pair), pair.plan.reml
    first_sem, first_mixed = sem, mixed
    boundary = _boundary_candidate(pair.mixed, mixed, reml)
    if boundary is not None:
        mixed = judge.better("statsmodels", mixed, boundary.params,
                             "the solution with the boundary variance fixed at zero scores {gap:.4g} higher",
                             lambda p: fit_mixed(pair.mixed, reml, start=p))
    if pair.comparable:
        sem = judge.better("semopy", sem, mixed.params,
                           "the statsmodels solution scores {gap:.4g} higher under the wide-form likelihood",
                           lambda p: fit_sem(pair.sem, start=p))
    if pair.comparable and pair.sem.equal_residuals:
        mixed = judge.better("statsmodels", mixed, sem.params,
                             "the semopy solution scores {gap:.4g} higher under the long-form criterion",
                             lambda p: fit_mixed(pair.mixed, reml, start=p))
    sem, sem_certificate = judge.certified("semopy", pair.sem, sem, lambda p: fit_sem(pair.sem, start=p))
    mixed, mixed_certificate = judge.certified(
        "statsmodels", pair.mixed, mixed, lambda p: fit_mixed(pair.mixed, reml, start=p, face=boundary_face(p.cov)))
    # the certificates already hold each library's value and the referee's at the same estimates
    checks = tuple(LikelihoodCheck(c.library, c.criterion, c.reported, c.referee)
                   for c in (sem_certificate, mixed_certificate))
    sem_home = pair.mixed if pair.comparable else pair.sem
    log_likelihood = {"sem": sem.own_log_likelihood, "mixed": mixed.own_log_likelihood,
                      "referee_at_sem": judge.exact_log_likelihood(sem_home, sem.params),
                      "referee_at_mixed": judge.exact_log_likelihood(pair.mixed, mixed.params)}
    return Adjudication(sem=sem, mixed=mixed, first_sem=first_sem, first_mixed=first_mixed,
                        refits=tuple(judge.refits), checks=checks, log_likelihood=log_likelihood,
                        sem_se=standard_errors(pair.sem, judge.sem_referee, sem.params, pair.sem.equal_residuals,
                                               False),
                        mixed_se=standard_errors(pair.mixed, judge.mixed_referee, mixed.params, True, reml),
                        certificates=(sem_certificate, mixed_certificate))


def variance_keys(compiled: CompiledGrowth, equal_residuals: bool) -> list[list[Key]]:
    """For each free variance parameter, the quantity keys it stands for."""
    terms = compiled.random_terms
    keys = [[var_key(a) if i == j else cov_key(terms[j], a)] for i, a in enumerate(terms) for j in range(i + 1)]
    residual_keys = [k for k in compiled.keys if k.startswith("var.residual")]
    if equal_residuals:
        return keys + [residual_keys]
    return keys + [[k] for k in residual_keys]


def standard_errors(compiled: CompiledGrowth, referee: Referee, params: GrowthParameters,
                    equal_residuals: bool, reml: bool) -> dict[Key, float]:
    """Natural-scale standard errors of every quantity from the referee's observed information."""
    factors = compiled.scale_factors()
    internal: dict[Key, float] = dict(zip((c.key for c in compiled.fixed_columns),
                                          fixed_standard_errors(referee, params)))
    ses = variance_standard_errors(referee, params, equal_residuals, reml)
    for keys, se in zip(variance_keys(compiled, equal_residuals), ses):
        internal.update({k: float(se) for k in keys})
    return {k: internal[k] * factors[k] for k in compiled.keys}
