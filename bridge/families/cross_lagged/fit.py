"""Fit one cross-lagged plan: the wide path model and the long lagged regressions, each checked by the referee.

Guards: each outcome on its own internal scale; semopy's objective must be finite (semopy
turns a negative objective into inf and still reports success), otherwise every internal
scale is multiplied by 10 and the plan refitted (the shared guard `bridge.fit.guard`); the
wide form is started several times for the variants known to have local optima; each
library's solution gets a certificate from the referee (`bridge.referee.certificate`) on
the likelihood of the model that library fitted, and a solution that fails is refitted
from the referee's maximum before it is given up.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...compile.path import PathModel
from ...fit.guard import finite_semopy, rescaling
from ...fit.sem import SemopyRun, semopy_log_likelihood
from ...referee.adjudicate import LikelihoodCheck, Refit
from ...referee.certificate import Certificate, certify
from ...referee.likelihood import Referee
from ...referee.path import PathReferee
from ...spec import Paths, Variant
from .long_fit import EquationFit, fit_person_intercept, fit_pooled
from .model import CompiledPanel
from .referee import (equation_design, equation_parameters, equation_standard_errors, long_to_values,
                      path_standard_errors, values_to_equation)

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


@dataclass(frozen=True)
class PanelFits:
    """Both forms of one plan after the referee's checks, on the user's scale, with what it took to get there."""

    compiled: CompiledPanel          # with the internal scales finally used
    model: PathModel                 # the wide model fitted (restricted or relaxed)
    solution: PanelSolution
    first: PanelSolution             # before any refit the referee ordered
    sem_log_likelihood: float        # user's scale
    long_log_likelihood: float       # sum over the equations, user's scale
    referee_at_long: float           # the long solution under the wide likelihood (NaN when not the same model)
    refits: tuple[Refit, ...]
    checks: tuple[LikelihoodCheck, ...]
    certificates: tuple[Certificate, ...]
    notes: tuple[str, ...]           # guards that acted (rescaling, extra starts)
    messages: tuple[tuple[str, str], ...]   # (library, captured warning)
    long_fits: tuple[EquationFit, ...] = ()  # the long form's final fits, internal scale of `compiled`
    first_long_fits: tuple[EquationFit, ...] = ()   # ... and as the library first returned them


def _long_labels(compiled: CompiledPanel, fits) -> dict[str, float]:
    """Every coefficient and residual variance of the long equations by label (also those the wide form lacks)."""
    out = {}
    for eq, fit in zip(compiled.equations, fits):
        for t in np.unique(eq.wave):
            out.update(zip(eq.labels[t], (float(v) for v in fit.coefficients[t])))
            out[eq.residual[t]] = float(fit.residual[t])
        out[f"u{eq.outcome}"] = float(fit.person_variance)
    return out


def _long_fits(compiled: CompiledPanel) -> list[EquationFit]:
    wave_specific = compiled.paths is Paths.WAVE_SPECIFIC
    if compiled.variant is Variant.CLPM:
        return [fit_pooled(eq, compiled.n_waves, wave_specific) for eq in compiled.equations]
    return [fit_person_intercept(eq, compiled.n_waves) for eq in compiled.equations]


def _equation_referee(compiled: CompiledPanel, eq) -> Referee:
    return Referee(equation_design(eq, compiled.paths is Paths.WAVE_SPECIFIC))


def _equation_score(compiled: CompiledPanel, eq, fit: EquationFit) -> float:
    wave_specific = compiled.paths is Paths.WAVE_SPECIFIC
    return _equation_referee(compiled, eq).log_likelihood(equation_parameters(fit, eq, wave_specific))


def _equation_shift(compiled: CompiledPanel, eq) -> float:
    return len(eq.y) * float(np.log(compiled.scales[eq.outcome]))


def _better_long(compiled: CompiledPanel, fits: list[EquationFit], sem_values: dict, refits: list) -> list:
    """Refit a mixed model that scores below the wide form's solution (or below its own boundary)."""
    if compiled.variant is Variant.CLPM:
        return fits
    out = []
    for eq, fit in zip(compiled.equations, fits):
        before = _equation_score(compiled, eq, fit)
        shift = _equation_shift(compiled, eq)
        candidates = [("the boundary (no person variance)", fit_pooled(eq, compiled.n_waves, False))]
        if compiled.equivalent and sem_values is not None:
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


def _semopy(compiled: CompiledPanel, model: PathModel, start: dict | None) -> SemopyRun:
    """One semopy fit on the plan's internal scales (`NotFinite` when its objective is not finite)."""
    return finite_semopy(model.text(), compiled.frame, start)


def _start(compiled: CompiledPanel, model: PathModel, start_user: dict) -> dict[str, float]:
    internal = compiled.values_from_user({k: v for k, v in start_user.items() if k in compiled.factors})
    return {label: internal.get(label, 0.0) for label in model.labels}


def _alternative_starts(compiled: CompiledPanel, model: PathModel, run: SemopyRun) -> list[dict[str, float]]:
    """Other starts for variants with known local optima.

    The dynamic panel: the first solution with its paths at 0, and halved. The RI-CLPM: starts built from
    the data's moments (trait variance = the average covariance of an outcome across different waves, the
    rest within-person), with the autoregressions at 0 and at 0.5, the cross-lagged paths at 0.
    """
    if compiled.variant is Variant.CLPM:
        return []
    if compiled.variant is Variant.RI_CLPM:
        return [_moment_start(compiled, model, auto) for auto in (0.0, 0.5)]
    zero_paths = {k: (0.0 if k.startswith(("a", "c")) else v) for k, v in run.values.items()}
    halved = {k: (0.5 * v if k.startswith(("a", "c")) else v) for k, v in run.values.items()}
    return [zero_paths, halved]


def _moment_start(compiled: CompiledPanel, model: PathModel, auto: float) -> dict[str, float]:
    """An RI-CLPM start from pairwise moments of the internal data (see `_alternative_starts`)."""
    K, T = len(compiled.panel.names), compiled.n_waves
    frame = compiled.frame
    cov = frame.cov(min_periods=2).to_numpy()
    at = {name: i for i, name in enumerate(frame.columns)}
    means = frame.mean().to_dict()

    def between(j: int, k: int, same_wave: bool) -> float:
        pairs = [cov[at[f"v{j}_{t}"], at[f"v{k}_{s}"]] for t in range(T) for s in range(T)
                 if (t == s) == same_wave and (j != k or t != s or same_wave)]
        pairs = [p for p in pairs if np.isfinite(p)]
        return float(np.mean(pairs)) if pairs else 0.0

    variance = [between(k, k, True) for k in range(K)]
    trait = [min(max(between(k, k, False), 0.05 * variance[k]), 0.9 * variance[k]) for k in range(K)]
    out = {}
    for label in model.labels:
        head = label.rstrip("0123456789_")
        if label.startswith("mu"):
            out[label] = float(means[f"v{label[2:]}"])
        elif label.startswith("ut"):
            j, k = map(int, label[2:].split("_"))
            out[label] = 0.5 * between(j, k, False)
        elif head == "u":
            out[label] = trait[int(label[1:])]
        elif head in ("s", "r"):
            j, k = map(int, label[1:].split("_")[:2])
            out[label] = variance[k] - trait[k] if j == k else 0.5 * (between(j, k, True) - between(j, k, False))
        elif head == "e":
            k = int(label[1:].split("_")[0])
            out[label] = (1.0 - auto ** 2) * (variance[k] - trait[k])
        elif head == "a":
            out[label] = auto
        else:
            out[label] = 0.0
    return out


def _bounds(model: PathModel) -> tuple[np.ndarray, np.ndarray]:
    variances = {s.label for s in model.statements if s.op == "~~" and s.lhs == s.rhs and s.label}
    lower = np.array([0.0 if label in variances else -np.inf for label in model.labels])
    return lower, np.full(len(lower), np.inf)


def _wide(compiled: CompiledPanel, model: PathModel, start_user: dict | None, notes: list, refits: list):
    """The wide form's best solution over several starts, certified (and repaired) by the referee."""
    run = _semopy(compiled, model, None if start_user is None else _start(compiled, model, start_user))
    referee = PathReferee(model, compiled.frame.to_numpy())
    first = run
    best, best_ll = run, referee.log_likelihood(run.values)
    for start in _alternative_starts(compiled, model, run):
        other = _semopy(compiled, model, start)
        score = referee.log_likelihood(other.values)
        if score > best_ll + 1e-6 * max(1.0, abs(best_ll)):
            notes.append(f"another start of the wide form reached a log-likelihood {score - best_ll:.4g} higher")
            best, best_ll = other, score
    starts = 1 + len(_alternative_starts(compiled, model, run))
    return compiled, referee, first, best, starts


def _certificate(compiled: CompiledPanel, model: PathModel, referee: PathReferee, run: SemopyRun,
                 starts: int) -> tuple[Certificate, object]:
    labels = model.labels
    lower, upper = _bounds(model)
    x = np.array([run.values[label] for label in labels])
    shift = compiled.log_shift(compiled.panel.observed_by_outcome())
    reported = semopy_log_likelihood(run, referee.n_observed) + shift
    return certify(lambda v: referee.log_likelihood(dict(zip(labels, v))), x, labels, reported, library="semopy",
                   form="wide", lower=lower, upper=upper, shift=shift, starts=starts)


def _repair_wide(compiled, model, referee, run, certificate, maximum, starts, refits):
    """Refit semopy from the referee's maximum when its solution failed the certificate."""
    if certificate.passed or maximum is None:
        return run, certificate
    start = dict(zip(model.labels, map(float, maximum.point)))
    again = _semopy(compiled, model, start)
    shift = compiled.log_shift(compiled.panel.observed_by_outcome())
    before, after = referee.log_likelihood(run.values), referee.log_likelihood(again.values)
    kept = after >= before
    refits.append(Refit("semopy", f"its solution failed the referee's certificate ({certificate.reason}); refitted "
                        "from the referee's maximum", before + shift, after + shift, kept))
    if not kept:
        return run, certificate.with_repair("refit from the referee's maximum did not improve it")
    new, _ = _certificate(compiled, model, referee, again, starts)
    return again, new.with_repair("refitted from the referee's maximum")


@rescaling
def fit_wide(compiled: CompiledPanel, model: PathModel, notes: list) -> tuple[dict, dict, Certificate]:
    """The wide form alone (guards, several starts, certificate): estimates and SEs by label, user's scale."""
    refits: list[Refit] = []
    compiled, referee, _, run, starts = _wide(compiled, model, None, notes, refits)
    certificate, maximum = _certificate(compiled, model, referee, run, starts)
    run, certificate = _repair_wide(compiled, model, referee, run, certificate, maximum, starts, refits)
    return (compiled.values_to_user(run.values),
            compiled.values_to_user(path_standard_errors(referee, run.values), se=True), certificate)


def _long_certificates(compiled: CompiledPanel, fits: list[EquationFit], refits: list
                       ) -> tuple[list[Certificate], list[EquationFit]]:
    """Each equation's solution under its own likelihood; a mixed model that fails is refitted from the
    referee's maximum and kept when it then passes (or scores higher)."""
    certificates, out = [], []
    for eq, fit in zip(compiled.equations, fits):
        certificate, maximum = _long_certificate(compiled, eq, fit)
        if not certificate.passed and maximum is not None and compiled.variant is not Variant.CLPM:
            nf = eq.X.shape[1]
            point = maximum.point
            again = fit_person_intercept(eq, compiled.n_waves, (point[:nf], float(point[-1]), float(point[nf])))
            shift = _equation_shift(compiled, eq)
            before, after = _equation_score(compiled, eq, fit), _equation_score(compiled, eq, again)
            polished, _ = _long_certificate(compiled, eq, again)
            kept = bool(polished.passed or after > before)
            refits.append(Refit("statsmodels", f"its solution for outcome {compiled.panel.names[eq.outcome]} failed "
                                f"the referee's certificate ({certificate.reason}); refitted from the referee's "
                                "maximum", before + shift, after + shift, kept))
            if kept:
                fit, certificate = again, polished.with_repair("refitted from the referee's maximum")
        certificates.append(certificate)
        out.append(fit)
    return certificates, out


def _long_certificate(compiled: CompiledPanel, eq, fit: EquationFit):
    """One equation's certificate and the referee's maximum (`bridge.referee.certificate.certify`).

    Coordinates: the coefficients, the residual variance (one per wave when wave-specific) and, for a
    mixed model, the person-intercept variance (bounded below by 0).
    """
    wave_specific = compiled.paths is Paths.WAVE_SPECIFIC
    mixed = compiled.variant is not Variant.CLPM
    referee = _equation_referee(compiled, eq)
    params = equation_parameters(fit, eq, wave_specific)
    nf, waves = len(params.fixed), np.unique(eq.wave)
    residual = params.residual[waves] if wave_specific else params.residual[waves[:1]]
    x = np.concatenate([params.fixed, residual, [fit.person_variance] if mixed else []])

    def criterion(v: np.ndarray) -> float:
        res = np.full(compiled.n_waves, np.nan)
        res[waves] = v[nf:nf + len(residual)] if len(residual) == len(waves) else v[nf]
        cov = np.array([[v[-1]]]) if mixed else np.zeros((1, 1))
        if np.any(res[waves] <= 0) or cov[0, 0] < 0:
            return -np.inf
        return referee.log_likelihood(type(params)(v[:nf], cov, res))

    lower = np.concatenate([np.full(nf, -np.inf), np.zeros(len(x) - nf)])
    names = tuple(f"b{i}" for i in range(nf)) + tuple(f"residual{i}" for i in range(len(residual))) \
        + (("person variance",) if mixed else ())
    shift = _equation_shift(compiled, eq)
    outcome = compiled.panel.names[eq.outcome]
    return certify(criterion, x, names, fit.log_likelihood + shift, library=f"statsmodels ({outcome})",
                   form=f"long ({outcome})", lower=lower, shift=shift)


@rescaling
def fit_panel(compiled: CompiledPanel, model: PathModel, start: dict[str, float] | None = None,
              prior: "PanelFits | None" = None, notes: list | None = None) -> PanelFits:
    """Both forms of one plan, each checked by the referee and refitted when another point scores higher.

    `start` (values by label on the user's scale, from a related fit) only speeds up the wide form's first
    fit; `prior` is a fit of the same data whose long form (already checked) is taken over with its refits.
    """
    notes = [] if notes is None else notes
    refits: list[Refit] = []
    compiled, referee, first_sem, sem, starts = _wide(compiled, model, start, notes, refits)
    if prior is not None and prior.compiled.scales == compiled.scales:
        first_long, long = list(prior.first_long_fits), list(prior.long_fits)
        refits = [r for r in prior.refits if r.library == "statsmodels"] + refits
    else:
        first_long = long = _long_fits(compiled)
    long = _better_long(compiled, long, sem.values if model is compiled.sem else None, refits)
    shift = compiled.log_shift(compiled.panel.observed_by_outcome())
    candidate = {**sem.values, **{k: v for k, v in long_to_values(compiled, long, sem.values).items()
                                  if k in sem.values}}
    before, rival = referee.log_likelihood(sem.values), referee.log_likelihood(candidate)
    if compiled.equivalent and rival > before + 1e-9:
        again = _semopy(compiled, model, candidate)   # polish: the long form is exact
        after = referee.log_likelihood(again.values)
        kept = bool(after > before)
        refits.append(Refit("semopy", f"the long-form solution scores {rival - before:.4g} higher under the "
                            "wide-form likelihood", before + shift, after + shift, kept))
        sem = again if kept else sem
    certificate, maximum = _certificate(compiled, model, referee, sem, starts)
    sem, certificate = _repair_wide(compiled, model, referee, sem, certificate, maximum, starts, refits)
    long_certificates, long = _long_certificates(compiled, long, refits)
    sem_ll = semopy_log_likelihood(sem, referee.n_observed) + shift
    checks = [LikelihoodCheck("semopy", "ml", sem_ll, referee.log_likelihood(sem.values) + shift)]
    checks += [LikelihoodCheck(f"statsmodels ({compiled.panel.names[eq.outcome]})", "ml",
                               fit.log_likelihood + _equation_shift(compiled, eq),
                               _equation_score(compiled, eq, fit) + _equation_shift(compiled, eq))
               for eq, fit in zip(compiled.equations, long)]
    long_se: dict[str, float] = {}
    for eq, fit in zip(compiled.equations, long):
        long_se.update(equation_standard_errors(fit, eq, compiled.paths is Paths.WAVE_SPECIFIC,
                                                pooled=compiled.variant is Variant.CLPM))
    _residual_covariance_se(compiled, long, long_se)
    messages = tuple(("semopy", m) for m in sem.messages) + tuple(("statsmodels", m) for f in long for m in f.messages)
    return PanelFits(
        compiled=compiled, model=model,
        solution=_solution(compiled, model, sem.values, path_standard_errors(referee, sem.values), long, long_se),
        first=_solution(compiled, model, first_sem.values, {}, first_long, {}),
        sem_log_likelihood=sem_ll,
        long_log_likelihood=sum(f.log_likelihood + _equation_shift(compiled, eq)
                                for f, eq in zip(long, compiled.equations)),
        referee_at_long=referee.log_likelihood(candidate) + shift if compiled.equivalent else float("nan"),
        refits=tuple(refits), checks=tuple(checks), certificates=(certificate, *long_certificates),
        notes=tuple(notes), messages=messages, long_fits=tuple(long), first_long_fits=tuple(first_long))


def _solution(compiled: CompiledPanel, model: PathModel, wide: dict, wide_se: dict, long, long_se: dict
              ) -> PanelSolution:
    every = {**{label: 0.0 for label in compiled.keys}, **wide}   # every quantity, also those `model` fixes
    long_values = {**_long_labels(compiled, long), **long_to_values(compiled, long, every)}
    return PanelSolution(
        model=model, wide=compiled.values_to_user(wide), wide_se=compiled.values_to_user(wide_se, se=True),
        long=compiled.values_to_user(long_values), long_se=compiled.values_to_user(long_se, se=True),
        rows=tuple(len(eq.y) for eq in compiled.equations),
        log_likelihood=tuple(f.log_likelihood + _equation_shift(compiled, eq)
                             for f, eq in zip(long, compiled.equations)),
        person_intercept=compiled.variant is not Variant.CLPM)


def _residual_covariance_se(compiled: CompiledPanel, fits: list[EquationFit], out: dict[str, float]) -> None:
    """Large-sample SE of a residual covariance, sqrt((s_jj s_kk + s_jk^2) / n): common practice (CLPM only)."""
    if compiled.variant is not Variant.CLPM:
        return
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
