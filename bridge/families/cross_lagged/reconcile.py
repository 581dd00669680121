"""Reconcile the cross-lagged family: rows, the causes proved by refits, notes, the reconciliation.

The rule is the one for every family: a row is `agree` when both solutions are certified and the
gap is within tolerance; `explained` only when a harmonise-and-refit removes the gap (the refit's
log-likelihoods are recorded in the explanation); otherwise `unexplained`. Short-panel bias (the
RI-CLPM's long form centres lags on person means) cannot be removed by a refit: it is a note with
Nickell's prediction beside the observed gap and never changes a verdict. Neither does rounding
occasions onto waves, which both forms share here.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
from scipy.stats import chi2

from ...progress import Progress, quiet
from ...reconcile.build import CAUTION, overall_verdict
from ...reconcile.result import Estimate, Explanation, Finding, QuantityRow, Reconciliation, Verdict
from ...reconcile.tolerance import DEFAULT_TOLERANCE
from ...referee.certificate import GAIN
from ...spec import Variant
from .absolute import panel_absolute_fit
from .causes import CAUSES
from .data import PanelData
from .fit import PanelFits, PanelSolution, fit_panel
from .model import CompiledPanel, compile_panel
from .nickell import nickell_bias
from .texts import legend, long_heading, long_text


def panel_rows(compiled: CompiledPanel, solution: PanelSolution) -> tuple[QuantityRow, ...]:
    """One row per quantity key, both forms on the user's scale.

    A key whose parameter the fitted wide model fixes at 0 (a restricted dynamic panel's covariances)
    is 0 in that model.
    """
    long_names = {c.key: c.long for c in compiled.correspondence}
    free = set(solution.model.labels)
    rows = []
    for label, key in compiled.keys.items():
        a = Estimate(solution.wide[label], solution.wide_se.get(label, float("nan"))) if label in free \
            else Estimate(0.0, float("nan"))
        b = Estimate(solution.long.get(label, float("nan")), solution.long_se.get(label, float("nan")))
        finite = np.isfinite(a.estimate) and np.isfinite(b.estimate)
        agree = finite and DEFAULT_TOLERANCE.agree(a.estimate, b.estimate, a.se, b.se)
        gap = DEFAULT_TOLERANCE.allowed_gap(a.estimate, b.estimate, a.se, b.se) if finite else float("nan")
        rows.append(QuantityRow(key=key, wide_name=f"{key} [{label}]", long_name=long_names[key], sem=a, mixed=b,
                                allowed_gap=gap, verdict=Verdict.AGREE if agree else Verdict.UNEXPLAINED))
    return tuple(rows)


def _complete(panel: PanelData) -> PanelData:
    keep = np.isfinite(panel.values).all(axis=(1, 2))
    return replace(panel, persons=tuple(p for p, k in zip(panel.persons, keep) if k), values=panel.values[keep])


def _explanation(cause: str, keys, before: dict, after: dict, evidence: str, details: dict) -> Explanation:
    return Explanation(cause=cause, title=CAUSES[cause].title, quantities=tuple(keys),
                       gap_before={k: before[k] for k in keys}, gap_after={k: after[k] for k in keys if k in after},
                       evidence=evidence, why=CAUSES[cause].why, details=details)


def _gaps(rows) -> dict[str, float]:
    return {r.key: r.difference for r in rows}


def _mark(rows: dict, keys, cause: str) -> None:
    for k in keys:
        rows[k] = replace(rows[k], verdict=Verdict.EXPLAINED, causes=rows[k].causes + (cause,))


def _closed(rows: dict, after: dict) -> list[str]:
    """Keys that differ now and agree after a harmonised refit."""
    return [k for k, r in rows.items() if r.verdict is Verdict.UNEXPLAINED and k in after
            and after[k].verdict is Verdict.AGREE]


def _optimizer(fits: PanelFits, rows: dict) -> list[Explanation]:
    """Only when a refit the referee ordered turned a difference into agreement.

    Polishing a solution that stopped short by less than the certificate's allowed gain is part of
    reaching the maximum, not a cause of difference.
    """
    kept = [r for r in fits.refits if r.kept and r.after - r.before > GAIN]
    if not kept:
        return []
    before = {r.key: r for r in panel_rows(fits.compiled, fits.first)}
    keys = [k for k, r in rows.items() if r.verdict is Verdict.AGREE and k in before
            and before[k].verdict is Verdict.UNEXPLAINED]
    if not keys:
        return []
    _mark(rows, keys, "optimizer")
    text = "; ".join(f"{r.library}: {r.reason}, log-likelihood {r.before:.4f} -> {r.after:.4f}" for r in kept)
    return [_explanation("optimizer", keys, _gaps(before.values()), _gaps(rows.values()), text + ".",
                         {"refits": [{"library": r.library, "before": r.before, "after": r.after} for r in kept]})]


def _initial_conditions(base: PanelFits, restricted: PanelFits, rows: dict) -> list[Explanation]:
    after = {r.key: r for r in panel_rows(restricted.compiled, restricted.solution)}
    keys = _closed(rows, after)
    _mark(rows, keys, "initial-conditions")
    statistic = max(0.0, 2.0 * (base.sem_log_likelihood - restricted.sem_log_likelihood))
    df = len(base.model.labels) - len(restricted.model.labels)
    p = float(chi2.sf(statistic, df))
    text = (f"The mixed models assume the stable person differences are unrelated to the first wave and fit each "
            f"outcome's equation on its own (person effects and residuals of the two equations uncorrelated). The "
            f"wide form without those assumptions differs; refitted with them (log-likelihood "
            f"{base.sem_log_likelihood:.4f} -> {restricted.sem_log_likelihood:.4f}) it matches the mixed models. "
            f"Likelihood-ratio test of the assumptions: chi-square {statistic:.3f} on {df} df, p = {p:.3g}.")
    details = {"statistic": statistic, "df": df, "p_value": p, "log_likelihood_relaxed": base.sem_log_likelihood,
               "log_likelihood_restricted": restricted.sem_log_likelihood,
               "log_likelihood_mixed": restricted.long_log_likelihood}
    return [_explanation("initial-conditions", keys, _gaps(rows.values()), _gaps(after.values()), text, details)] \
        if keys else []


def _short_panel_note(fits: PanelFits, rows: dict) -> list[Explanation]:
    """Nickell's predicted bias beside the observed gap: a note, computed only from a certified wide solution."""
    panel = fits.compiled.panel
    periods = len(panel.waves) - 1
    details = {}
    for name in panel.names:
        row = rows.get(f"auto.{name}")
        if row is not None and np.isfinite(row.sem.estimate):
            details[row.key] = {"predicted_bias": nickell_bias(row.sem.estimate, periods),
                                "observed_gap": row.mixed.estimate - row.sem.estimate}
    if not details:
        return []
    shown = "; ".join(f"{k}: predicted {d['predicted_bias']:.3f}, observed {d['observed_gap']:.3f}"
                      for k, d in details.items())
    text = (f"Centring the lagged outcomes on each person's mean biases the within estimates in short panels "
            f"({periods} lagged occasions per person here). Nickell's predicted bias of the autoregressive "
            f"effects beside the observed gap (mixed minus RI-CLPM): {shown}. No refit can remove this difference "
            f"(the two are different models), so it does not change any verdict.")
    gaps = _gaps(rows.values())
    return [replace(_explanation("short-panel-bias", list(details), gaps, {}, text, {"note": True, **details}),
                    note=True)]


def _missing(compiled: CompiledPanel, base: PanelFits, rows: dict) -> list[Explanation]:
    complete = compile_panel(_complete(compiled.panel))
    relaxed = base.model is compiled.relaxed
    fitted = fit_panel(complete, complete.relaxed if relaxed else complete.sem, start=base.solution.wide)
    after = {r.key: r for r in panel_rows(fitted.compiled, fitted.solution)}
    keys = _closed(rows, after)
    _mark(rows, keys, "missing-data")
    used = {compiled.panel.names[eq.outcome]: len(eq.y) for eq in compiled.equations}
    text = (f"The wide form used every observed value of all {compiled.panel.n_persons} persons "
            f"({compiled.panel.n_observed} values, full-information ML); the lagged regressions lose a row whenever "
            f"the outcome or a lag is missing ({', '.join(f'{k}: {v} rows' for k, v in used.items())}). Refitted "
            f"on the {complete.panel.n_persons} persons observed at every wave (wide log-likelihood "
            f"{fitted.sem_log_likelihood:.4f}, long {fitted.long_log_likelihood:.4f}), the gaps are "
            + ("closed." if keys else "not closed."))
    return [_explanation("missing-data", keys, _gaps(rows.values()), _gaps(after.values()), text,
                         {"sem_values": compiled.panel.n_observed, "long_rows": used,
                          "complete_persons": complete.panel.n_persons,
                          "log_likelihood_sem_after": fitted.sem_log_likelihood,
                          "log_likelihood_long_after": fitted.long_log_likelihood})] if keys else []


def _time_binning_note(panel: PanelData) -> list[Finding]:
    timing = panel.timing_summary()
    if timing.get("design") != "individually-varying":
        return []
    shift = timing["displacement"]
    return [Finding("time-binning", None,
                    f"{CAUSES['time-binning'].title}: occasions were placed on their nearest wave of "
                    f"{', '.join(f'{w:g}' for w in panel.waves)} (moved by up to {shift['max']:.3g}, "
                    f"{shift['mean']:.3g} on average). Both forms take lags between consecutive waves, so both "
                    "use the rounded times; the difference from the exact times is not measured here.")]


def _findings(fits: PanelFits, panel: PanelData) -> list[Finding]:
    out = [Finding("library-message", lib, m) for lib, m in fits.messages]
    out += [Finding("fit-note", "semopy", n) for n in fits.notes]
    out += [Finding("certificate", c.library, f"{c.form} form not certified as a maximum: {c.reason}")
            for c in fits.certificates if not c.passed]
    out += [Finding("stopped-short", r.library, f"{r.reason}; log-likelihood {r.before:.6f} -> "
                    f"{r.after:.6f} ({'kept' if r.kept else 'not better; the first solution was kept'})")
            for r in fits.refits]
    out += _time_binning_note(panel)
    if not panel.timing_summary()["equally_spaced"]:
        out.append(Finding("unequal-spacing", None,
                           "the waves are not equally spaced (intervals "
                           + ", ".join(f"{g:g}" for g in panel.timing_summary()["intervals"])
                           + "); a time-invariant path is one effect per step from a wave to the next, whatever "
                             "the time between them"))
    return out


def _non_finite(rows) -> list[Finding]:
    """An estimate or standard error that is not a finite number is a finding (and null in the JSON)."""
    out = []
    for row in rows:
        for library, value in (("semopy", row.sem), ("statsmodels", row.mixed)):
            if not np.isfinite(value.estimate):
                out.append(Finding("non-finite", library, f"{row.key}: the estimate is not a finite number"))
            elif not np.isfinite(value.se) and not np.isnan(value.se):
                out.append(Finding("non-finite", library, f"{row.key}: the standard error is not finite"))
    return out


def _undecided(fits: PanelFits, rows: dict) -> str:
    failed = [c for c in fits.certificates if not c.passed]
    if not failed:
        return ""
    for k in rows:
        rows[k] = replace(rows[k], verdict=Verdict.UNDECIDED, causes=())
    c = failed[0]
    return (f"{c.library} ({c.form} form) could not be certified as a maximum: {c.reason}. Next step: check the "
            "data for outliers or near-constant outcomes, or fit a simpler variant.")


def run_panel(panel: PanelData, progress: Progress = quiet) -> Reconciliation:
    """The main job for a cross-lagged description: both forms, the referee, explanations."""
    compiled = compile_panel(panel)
    dynamic = compiled.variant is Variant.DYNAMIC_PANEL
    restricted = None
    with progress("fitting both forms"):
        if dynamic:   # the restricted wide form first: the mixed models' exact counterpart checks them
            restricted = fit_panel(compiled, compiled.sem)
            base = fit_panel(restricted.compiled, compiled.relaxed, start=restricted.solution.wide, prior=restricted)
        else:
            base = fit_panel(compiled, compiled.sem)
    compiled = base.compiled
    rows = {r.key: r for r in panel_rows(compiled, base.solution)}
    explanations = _optimizer(base, rows)
    if restricted is not None and any(r.verdict is Verdict.UNEXPLAINED for r in rows.values()):
        explanations += _initial_conditions(base, restricted, rows)
    if not np.isfinite(panel.values).all() and any(r.verdict is Verdict.UNEXPLAINED for r in rows.values()):
        with progress("refitting on persons observed at every wave"):
            explanations += _missing(compiled, base, rows)
    reason = _undecided(base, rows)
    if compiled.variant is Variant.RI_CLPM and not reason:
        explanations += _short_panel_note(base, rows)
    ordered = tuple(rows.values())  # insertion order is the rows' order
    findings = _findings(base, panel) + _non_finite(ordered)
    return Reconciliation(
        description=panel.description.label, verdict=overall_verdict(ordered), quantities=ordered,
        timing=panel.timing_summary(), log_likelihood=_log_likelihoods(base),
        referee_checks=tuple({"library": c.library, "criterion": c.criterion, "library_value": c.library_value,
                              "referee_value": c.referee_value, "relative_difference": c.relative_difference}
                             for c in base.checks),
        refits=tuple({"library": r.library, "reason": r.reason, "before": float(r.before), "after": float(r.after),
                      "kept": bool(r.kept)} for r in base.refits),
        findings=tuple(dict.fromkeys(findings)), explanations=tuple(explanations),
        data=_data(panel, compiled), tolerance=DEFAULT_TOLERANCE.describe(),
        specifications={"wide": base.model.text(), "long": long_text(compiled), "legend": legend(compiled),
                        "long_heading": long_heading(compiled)},
        caution=CAUTION, pair=compiled, solution=base.solution, certificates=base.certificates,
        undecided_reason=reason,
        absolute_fit=panel_absolute_fit(compiled, base.model, base.solution.wide,
                                        all(c.passed for c in base.certificates if c.form == "wide")))


def _log_likelihoods(fits: PanelFits) -> dict[str, float]:
    wide = fits.checks[0]
    return {"sem": fits.sem_log_likelihood, "mixed": fits.long_log_likelihood, "referee_at_sem": wide.referee_value,
            "referee_at_mixed": fits.referee_at_long}


def _data(panel: PanelData, compiled: CompiledPanel) -> dict:
    rows = [len(eq.y) for eq in compiled.equations]
    return {"persons_read": panel.persons_read, "persons_used": panel.n_persons,
            "occasions_read": panel.occasions_read or panel.n_occasions, "occasions_used": panel.n_occasions,
            "values_read": panel.values_read or panel.n_observed, "values_used": panel.n_observed,
            "missing": panel.description.estimation.missing.value, "method": "ml", "variant": compiled.variant.value,
            "paths": compiled.paths.value, "outcomes": list(panel.names), "long_rows": dict(zip(panel.names, rows)),
            "predictors": [], "internal_scales": dict(zip(panel.names, compiled.scales)),
            "log_likelihood_note": ("The two log-likelihoods are different quantities: the wide form's is the "
                                    "joint likelihood of every observed value, the first wave included; the long "
                                    "form's is the sum of its lagged regressions' likelihoods, given the first "
                                    "wave and over the rows each regression used.")}
