"""Evidence for each cause: one or two sentences with the numbers, and the numbers as data."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.stats import chi2

from ..compile import compile_growth
from ..data import ShapedData
from ..fit import fit_sem
from ..spec import Residuals
from .evaluation import Evaluation
from .harmonise import boundary_terms
from .result import QuantityRow, Verdict

SE_RATIO_LIMIT = 0.10  # standard errors differing by more than 10% are reported


@dataclass(frozen=True)
class Context:
    shaped: ShapedData
    base: Evaluation        # as described
    full: Evaluation        # every detected cause removed
    alone: Evaluation       # only this cause left
    keys: tuple[str, ...]   # quantities attributed to this cause


def _largest(ctx: Context) -> str:
    return max(ctx.keys, key=lambda k: abs(ctx.base.row(k).difference) / max(abs(ctx.base.row(k).sem.estimate), 1e-12)
               if ctx.base.row(k) else 0.0)


def _gap_sentence(ctx: Context) -> str:
    if not ctx.keys:
        return ""
    key = _largest(ctx)
    before, after = ctx.alone.row(key) or ctx.base.row(key), ctx.full.row(key)
    closed = f"{after.difference:.4g}" if after else "gone (the term was removed)"
    return f"The largest gap, {key}, goes from {before.difference:.4g} to {closed} after the refit."


def estimation_method(ctx: Context) -> tuple[str, dict]:
    key = _largest(ctx)
    reml, ml = ctx.base.row(key).mixed.estimate, ctx.full.row(key).mixed.estimate
    text = (f"The mixed model was fitted by REML and the SEM by ML; refitted by ML, the mixed model's {key} "
            f"moves from {reml:.4g} to {ml:.4g} (SEM {ctx.full.row(key).sem.estimate:.4g}). {_gap_sentence(ctx)}")
    return text, {"mixed_reml": reml, "mixed_ml": ml, "key": key}


def residual_structure(ctx: Context) -> tuple[str, dict]:
    test = residual_test(ctx.shaped, ctx.base)
    verdict = ("rejects" if test["p_value"] < 0.05 else "does not reject")
    text = (f"With one residual variance in the SEM as well, the gaps close. Likelihood-ratio test of equal "
            f"against per-wave residual variances: chi-square {test['statistic']:.3f} on {test['df']} df, "
            f"p = {test['p_value']:.3g}, which {verdict} the mixed model's single residual variance at the 5% "
            f"level. To relax it, a mixed model needs a separate residual variance for each occasion (a "
            f"heterogeneous level-1 variance); statsmodels MixedLM offers only one. {_gap_sentence(ctx)}")
    return text, test


def residual_test(shaped: ShapedData, base: Evaluation) -> dict:
    """Likelihood-ratio test of equal vs per-wave residual variances, both fitted as SEMs on the same data."""
    per_wave = base.adjudication.sem.own_log_likelihood
    equal = fit_sem(compile_growth(shaped, base.plan.sem, Residuals.EQUAL, base.plan.random)).own_log_likelihood
    statistic = max(0.0, 2.0 * (per_wave - equal))
    df = len(shaped.waves) - 1
    return {"statistic": statistic, "df": df, "p_value": float(chi2.sf(statistic, df)),
            "log_likelihood_per_wave": per_wave, "log_likelihood_equal": equal}


def missing_data(ctx: Context) -> tuple[str, dict]:
    def used(compiled):
        return compiled.shaped.n_persons, len(compiled.shaped.outcome)
    sem, mixed = used(ctx.base.pair.sem), used(ctx.base.pair.mixed)
    text = (f"The SEM used {sem[0]} persons and {sem[1]} occasions ({ctx.base.plan.sem.missing.value}); the mixed "
            f"model used {mixed[0]} persons and {mixed[1]} occasions ({ctx.base.plan.mixed.missing.value}). "
            f"Refitted with both on every available occasion, the gaps close. {_gap_sentence(ctx)}")
    return text, {"sem": {"persons": sem[0], "occasions": sem[1]},
                  "mixed": {"persons": mixed[0], "occasions": mixed[1]}}


def time_binning(ctx: Context) -> tuple[str, dict]:
    from ..timing.predict import binning_prediction

    timing = ctx.base.pair.mixed.shaped.timing
    predicted, details = binning_prediction(ctx.base.pair.mixed.shaped, ctx.base.rows, ctx.base.plan.mixed.scale)
    text = (f"Times vary by person: the wide form moved each occasion to its nearest wave, by up to "
            f"{timing.displacement_max:.3g} ({timing.displacement_mean:.3g} on average). Refitting the mixed "
            f"model on the same rounded times closes the gaps, so rounding is the whole difference. Trust the "
            f"exact-time mixed model. {_gap_sentence(ctx)} {predicted}".rstrip())
    return text, {"displacement_max": timing.displacement_max, "displacement_mean": timing.displacement_mean,
                  **details}


def time_coding(ctx: Context) -> tuple[str, dict]:
    sem, mixed = ctx.base.plan.sem, ctx.base.plan.mixed
    rows = {k: ctx.base.row(k) for k in ("mean.intercept", "mean.slope")}
    details = {"sem": {"origin": sem.origin, "scale": sem.scale}, "mixed": {"origin": mixed.origin,
                                                                             "scale": mixed.scale}}
    implied = ""
    if all(rows.values()) and rows["mean.slope"].mixed.estimate != 0 and rows["mean.slope"].sem.estimate != 0:
        b0s, b0m = rows["mean.intercept"].sem.estimate, rows["mean.intercept"].mixed.estimate
        b1s, b1m = rows["mean.slope"].sem.estimate, rows["mean.slope"].mixed.estimate
        details["implied_unit_ratio"] = b1m / b1s
        details["implied_origin_shift"] = (b0s - b0m) / b1m
        implied = (f" From the estimates: one SEM time unit is {b1s / b1m:.4g} mixed-model units and the SEM's "
                   f"zero lies {(b0s - b0m) / b1m:.4g} mixed-model units from the mixed model's.")
    ll = ctx.alone.adjudication.log_likelihood
    same = abs(ll["sem"] - ll["mixed"]) <= 1e-6 * max(1.0, abs(ll["mixed"]))
    details["log_likelihood"] = {"sem": ll["sem"], "mixed": ll["mixed"], "same": bool(same)}
    fit = ("Their log-likelihoods are equal, so the recoding only reparameterises the model." if same else
           f"Their log-likelihoods differ ({ll['sem']:.4f} against {ll['mixed']:.4f}), so with this random part "
           "the recoding changes the model, not only its parameters.")
    text = (f"The SEM codes time as (time - {sem.origin:g}) x {sem.scale:g}, the mixed model as (time - "
            f"{mixed.origin:g}) x {mixed.scale:g}.{implied} {fit} Recoded to one time coding, the gaps close. "
            f"{_gap_sentence(ctx)}")
    return text, details


def boundary(ctx: Context) -> tuple[str, dict]:
    dropped = [t.value for t in ctx.base.plan.random if t not in ctx.full.plan.random]
    ll_base = ctx.base.adjudication.log_likelihood["referee_at_mixed"]
    ll_bound = ctx.full.adjudication.log_likelihood["referee_at_mixed"]
    remaining = "agree" if all(r.verdict is Verdict.AGREE for r in ctx.full.rows) else "still differ in places"
    text = (f"The variance of the random {', '.join(dropped)} term is at or near zero. Without it the two forms "
            f"{remaining}; the log-likelihood at the boundary is {ll_bound:.4f} against {ll_base:.4f} with the term "
            f"(difference {ll_base - ll_bound:.3g}), so the data barely inform it. {_gap_sentence(ctx)}")
    return text, {"terms_removed": dropped, "log_likelihood_with": ll_base, "log_likelihood_without": ll_bound}


def parameter_space(ctx: Context) -> tuple[str, dict]:
    """The SEM's indefinite maximum beside the referee's maximum over positive semidefinite matrices."""
    unconstrained = ctx.alone.adjudication.sem
    constrained = ctx.full.adjudication.sem
    eigen = [float(v) for v in np.linalg.eigvalsh(unconstrained.params.cov)]
    text = (f"The SEM's person-effect covariance matrix is not positive semidefinite (smallest eigenvalue "
            f"{min(eigen):.4g} on the internal scale); no covariance of person effects can have that. The "
            f"referee's maximum of the same SEM over positive semidefinite matrices has log-likelihood "
            f"{constrained.own_log_likelihood:.6f} against {unconstrained.own_log_likelihood:.6f} unconstrained "
            f"(difference {unconstrained.own_log_likelihood - constrained.own_log_likelihood:.4g}), and there the "
            f"two forms meet. {_gap_sentence(ctx)}")
    return text, {"eigenvalues_internal": eigen, "log_likelihood_unconstrained": unconstrained.own_log_likelihood,
                  "log_likelihood_constrained": constrained.own_log_likelihood}


def optimizer_evidence(base: Evaluation) -> tuple[str, dict]:
    refits = [r for r in base.adjudication.refits if r.kept]
    parts = [f"{r.library} reported success, but {r.reason}; refitted from there, its criterion went from "
             f"{r.before:.4f} to {r.after:.4f}" for r in refits]
    messages = [m for fit in (base.adjudication.first_sem, base.adjudication.first_mixed) for m in fit.messages]
    if messages:
        parts.append("library messages: " + "; ".join(messages[:3]))
    return ". ".join(parts) + ".", {"refits": [{"library": r.library, "before": r.before, "after": r.after}
                                               for r in refits], "messages": messages}


def standard_error_evidence(base: Evaluation, rows: dict[str, QuantityRow]):
    """Quantities whose estimates agree but whose standard errors differ by more than 10%."""
    keys = [k for k, r in rows.items() if r.verdict is Verdict.AGREE
            and all(math.isfinite(x) and x > 0 for x in (r.sem.se, r.mixed.se))
            and abs(r.sem.se / r.mixed.se - 1) > SE_RATIO_LIMIT]
    if not keys:
        return None
    ratios = {k: rows[k].sem.se / rows[k].mixed.se for k in keys}
    if boundary_terms(base):
        reason = ("a variance is at or near its boundary, where the likelihood is flat on one side and "
                  "standard errors from the curvature are unreliable in both forms")
    elif base.plan.reml:
        reason = ("the mixed model's standard errors come from the REML criterion, whose larger variance "
                  "estimates widen them (a small-sample correction)")
    else:
        reason = "the standard errors depend on the variance estimates and the data each form used, which differ"
    shown = ", ".join(f"{k} {r:.3g}" for k, r in ratios.items())
    return keys, (f"Standard-error ratios SEM/mixed: {shown}. Both are observed-information standard errors "
                  f"from the referee; they differ because {reason}.", {"ratios": ratios})


EVIDENCE = {"estimation-method": estimation_method, "residual-structure": residual_structure,
            "missing-data": missing_data, "time-binning": time_binning, "time-coding": time_coding,
            "boundary": boundary, "parameter-space": parameter_space}
