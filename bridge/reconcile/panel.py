"""Reconcile the cross-lagged family: rows, the causes that explain differences, the reconciliation."""
from __future__ import annotations

from dataclasses import replace

import numpy as np
from scipy.stats import chi2

from ..compile.panel import CompiledPanel, compile_panel
from ..data import PanelData
from ..progress import Progress, quiet
from ..spec import Variant
from .build import CAUTION, overall_verdict
from .causes import CATALOGUE
from .nickell import nickell_bias
from .panel_fit import PanelFits, fit_panel
from .result import Estimate, Explanation, Finding, QuantityRow, Reconciliation, Verdict
from .tolerance import DEFAULT_TOLERANCE
from ..compile.panel_texts import legend, long_text

_NOT_COMPARED = {Variant.CLPM: ("var.trait", "cov.trait"), Variant.DYNAMIC_PANEL: ("cov.trait",),
                 Variant.RI_CLPM: ("var.trait", "cov.trait", "intercept", "var.residual", "cov.residual")}


def panel_rows(fits: PanelFits) -> tuple[QuantityRow, ...]:
    compiled = fits.compiled
    long_values = fits.long_values
    long_names = {c.key: c.long for c in compiled.correspondence}
    rows = []
    for label, key in compiled.keys.items():
        if key.startswith(_NOT_COMPARED[compiled.variant]) or label not in fits.sem.values:
            continue
        a = Estimate(compiled.to_user(label, fits.sem.values[label]), _user_se(compiled, label, fits.sem_se))
        b = Estimate(compiled.to_user(label, long_values[label]), _user_se(compiled, label, fits.long_se))
        agree = DEFAULT_TOLERANCE.agree(a.estimate, b.estimate, a.se, b.se)
        rows.append(QuantityRow(key=key, wide_name=f"{key} [{label}]", long_name=long_names[key], sem=a, mixed=b,
                                allowed_gap=DEFAULT_TOLERANCE.allowed_gap(a.estimate, b.estimate, a.se, b.se),
                                verdict=Verdict.AGREE if agree else Verdict.UNEXPLAINED))
    return tuple(rows)


def _user_se(compiled: CompiledPanel, label: str, ses: dict[str, float]) -> float:
    se = ses.get(label, np.nan)
    return abs(compiled.to_user(label, se)) if np.isfinite(se) else float("nan")


def _complete(panel: PanelData) -> PanelData:
    keep = np.isfinite(panel.values).all(axis=(1, 2))
    return replace(panel, persons=tuple(p for p, k in zip(panel.persons, keep) if k), values=panel.values[keep])


def _explanation(cause, keys, before: dict, after: dict, evidence: str, details: dict) -> Explanation:
    return Explanation(cause=cause, title=CATALOGUE[cause].title, quantities=tuple(keys),
                       gap_before={k: before[k] for k in keys}, gap_after={k: after[k] for k in keys},
                       evidence=evidence, why=CATALOGUE[cause].why, details=details)


def _gaps(rows) -> dict[str, float]:
    return {r.key: r.difference for r in rows}


def _mark(rows: dict, keys, cause: str) -> None:
    for k in keys:
        rows[k] = replace(rows[k], verdict=Verdict.EXPLAINED, causes=rows[k].causes + (cause,))


def _optimizer(fits: PanelFits, rows: dict) -> list[Explanation]:
    kept = [r for r in fits.refits if r.kept]
    if not kept:
        return []
    first = replace(fits, sem=fits.first_sem, long=fits.first_long)
    before = {r.key: r for r in panel_rows(first)}
    keys = [k for k, r in rows.items() if r.verdict is Verdict.AGREE and before[k].verdict is Verdict.UNEXPLAINED]
    _mark(rows, keys, "optimizer")
    text = "; ".join(f"{r.library}: {r.reason}, criterion {r.before:.4f} -> {r.after:.4f}" for r in kept)
    return [_explanation("optimizer", keys, _gaps(before.values()), _gaps(rows.values()), text + ".", {})] if keys \
        else []


def _initial_conditions(base: PanelFits, restricted: PanelFits, rows: dict) -> list[Explanation]:
    after = {r.key: r for r in panel_rows(restricted)}
    keys = [k for k, r in rows.items() if r.verdict is Verdict.UNEXPLAINED and after[k].verdict is Verdict.AGREE]
    _mark(rows, keys, "initial-conditions")
    statistic = max(0.0, 2.0 * (base.sem_log_likelihood - restricted.sem_log_likelihood))
    df = len(base.model.labels) - len(restricted.model.labels)
    p = float(chi2.sf(statistic, df))
    text = (f"The mixed model assumes the stable person differences are unrelated to the first wave; the wide form "
            f"that lets them correlate differs, and with that correlation fixed at zero it matches the mixed model. "
            f"Likelihood-ratio test of the assumption: chi-square {statistic:.3f} on {df} df, p = {p:.3g}.")
    details = {"statistic": statistic, "df": df, "p_value": p, "log_likelihood_relaxed": base.sem_log_likelihood,
               "log_likelihood_restricted": restricted.sem_log_likelihood}
    return [_explanation("initial-conditions", keys, _gaps(rows.values()), _gaps(after.values()), text, details)] \
        if keys else []


def _short_panel(fits: PanelFits, rows: dict) -> list[Explanation]:
    panel = fits.compiled.panel
    periods = len(panel.waves) - 1
    details, keys = {}, []
    for name in panel.names:
        row = rows.get(f"auto.{name}")
        if row is None:
            continue
        predicted = nickell_bias(row.sem.estimate, periods)
        observed = row.mixed.estimate - row.sem.estimate
        band = max(0.5 * abs(predicted), 2.0 * float(np.hypot(row.sem.se, row.mixed.se)))
        details[row.key] = {"predicted_bias": predicted, "observed_gap": observed, "band": band}
        if np.sign(predicted) == np.sign(observed) and abs(observed - predicted) <= band:
            keys.append(row.key)
    if keys:
        keys += [k for k in rows if k.startswith("cross.") and rows[k].verdict is Verdict.UNEXPLAINED]
    keys = [k for k in keys if rows[k].verdict is Verdict.UNEXPLAINED]
    _mark(rows, keys, "short-panel-bias")
    shown = "; ".join(f"{k}: predicted {d['predicted_bias']:.3f}, observed {d['observed_gap']:.3f}"
                      for k, d in details.items())
    text = (f"Centring the lagged outcomes on each person's mean biases the within estimates in short panels "
            f"({periods} lagged occasions per person here). Nickell's predicted bias of the autoregressive "
            f"effects beside the observed gap (mixed minus RI-CLPM): {shown}. The cross-lagged paths are biased "
            f"by the same mechanism; there is no closed form for them.")
    gaps = _gaps(rows.values())
    return [_explanation("short-panel-bias", keys, gaps, gaps, text, details)] if keys else []


def _missing(compiled: CompiledPanel, base: PanelFits, rows: dict) -> list[Explanation]:
    complete = compile_panel(_complete(compiled.panel))
    fitted = fit_panel(complete, complete.relaxed if base.model is compiled.relaxed else complete.sem,
                       start=base.sem.values)
    after = {r.key: r for r in panel_rows(fitted)}
    keys = [k for k, r in rows.items() if r.verdict is Verdict.UNEXPLAINED and after[k].verdict is Verdict.AGREE]
    _mark(rows, keys, "missing-data")
    used = {compiled.panel.names[eq.outcome]: len(eq.y) for eq in compiled.equations}
    text = (f"The wide form used every observed value of all {compiled.panel.n_persons} persons "
            f"({compiled.panel.n_observed} values); the lagged regressions lose a row whenever the outcome or a "
            f"lag is missing ({', '.join(f'{k}: {v} rows' for k, v in used.items())}). On the "
            f"{complete.panel.n_persons} persons observed at every wave the two forms agree.")
    return [_explanation("missing-data", keys, _gaps(rows.values()), _gaps(after.values()), text,
                         {"sem_values": compiled.panel.n_observed, "long_rows": used,
                          "complete_persons": complete.panel.n_persons})] if keys else []


def _timing(panel: PanelData) -> dict:
    complete = bool(np.isfinite(panel.values).all())
    return {"design": "balanced" if complete else "balanced-missing", "waves": list(panel.waves),
            "grid_source": "observed", "persons": panel.n_persons, "occasions": panel.n_observed,
            "distinct_times": len(panel.waves), "displacement": {"max": 0.0, "mean": 0.0},
            "persons_with_shared_wave": 0}


def _checks(fits: PanelFits, scale_log: float, rows_per_equation: list[int]) -> tuple[dict, ...]:
    out = []
    for i, check in enumerate(fits.checks):
        n = fits.compiled.panel.n_observed if i == 0 else rows_per_equation[i - 1]
        lib, ref = check.library_value + n * scale_log, check.referee_value + n * scale_log
        out.append({"library": check.library if i == 0 else f"{check.library} ({fits.compiled.panel.names[i - 1]})",
                    "criterion": check.criterion, "library_value": lib, "referee_value": ref,
                    "relative_difference": abs(lib - ref) / max(1.0, abs(lib))})
    return tuple(out)


def run_panel(panel: PanelData, progress: Progress = quiet) -> Reconciliation:
    """The main job for a cross-lagged description: both forms, the referee, explanations."""
    compiled = compile_panel(panel)
    dynamic = compiled.variant is Variant.DYNAMIC_PANEL
    with progress("fitting both forms"):
        base = fit_panel(compiled, compiled.relaxed if dynamic else compiled.sem)
    rows = {r.key: r for r in panel_rows(base)}
    explanations = _optimizer(base, rows)
    if dynamic:
        with progress("refitting with the person effect unrelated to the first wave"):
            explanations += _initial_conditions(base, fit_panel(compiled, compiled.sem, start=base.sem.values), rows)
    if compiled.variant is Variant.RI_CLPM:
        explanations += _short_panel(base, rows)
    if not np.isfinite(panel.values).all() and any(r.verdict is Verdict.UNEXPLAINED for r in rows.values()):
        with progress("refitting on persons observed at every wave"):
            explanations += _missing(compiled, base, rows)
    scale_log = float(np.log(compiled.scale))
    n_rows = [len(eq.y) for eq in compiled.equations]
    log_likelihood = {"sem": base.sem_log_likelihood + panel.n_observed * scale_log,
                      "mixed": sum(f.log_likelihood for f in base.long) + sum(n_rows) * scale_log,
                      "referee_at_sem": base.checks[0].referee_value + panel.n_observed * scale_log,
                      "referee_at_mixed": base.referee_at_long + panel.n_observed * scale_log}
    findings = [Finding("library-message", "semopy", m) for m in base.sem.messages]
    findings += [Finding("library-message", "statsmodels", m) for f in base.long for m in f.messages]
    ordered = tuple(rows.values())  # insertion order is the rows' order
    return Reconciliation(
        description=panel.description.label, verdict=overall_verdict(ordered), quantities=ordered, timing=_timing(panel),
        log_likelihood=log_likelihood, referee_checks=_checks(base, scale_log, n_rows),
        refits=tuple({"library": r.library, "reason": r.reason, "before": float(r.before), "after": float(r.after),
                      "kept": bool(r.kept)} for r in base.refits),
        findings=tuple(dict.fromkeys(findings)), explanations=tuple(explanations),
        data={"persons_read": panel.persons_read, "persons_used": panel.n_persons, "occasions_read": panel.n_observed,
              "occasions_used": panel.n_observed, "missing": panel.description.estimation.missing.value,
              "method": "ml", "variant": compiled.variant.value, "paths": compiled.paths.value,
              "outcomes": list(panel.names), "long_rows": dict(zip(panel.names, n_rows)), "predictors": []},
        tolerance=DEFAULT_TOLERANCE.describe(),
        specifications={"wide": base.model.text(), "long": long_text(compiled), "legend": legend(compiled)},
        caution=CAUTION, pair=compiled, solution=base.solution())
