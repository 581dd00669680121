"""Stage 6: line the two solutions up quantity by quantity and give each a verdict."""
from __future__ import annotations

from ..compile import CompiledGrowth
from ..compile.texts import specifications
from ..referee.adjudicate import Adjudication
from ..spec import Method
from .result import Estimate, Finding, QuantityRow, Reconciliation, Verdict
from .tolerance import DEFAULT_TOLERANCE, Tolerance

CAUTION = ("Agreement between the two frameworks shows that both programs computed the same estimates for the "
           "same model: computational consistency. It does not show that the model is right for these data, "
           "and it supports no causal claim. Decisions about people need substantive and design arguments "
           "beyond this check.")


def _rows(compiled: CompiledGrowth, adj: Adjudication, tolerance: Tolerance) -> tuple[QuantityRow, ...]:
    sem_values = compiled.to_quantities(adj.sem.params)
    mixed_values = compiled.to_quantities(adj.mixed.params)
    rows = []
    for corr in compiled.correspondence:
        sem = Estimate(float(sem_values[corr.key]), float(adj.sem_se[corr.key]))
        mixed = Estimate(float(mixed_values[corr.key]), float(adj.mixed_se[corr.key]))
        agree = tolerance.agree(sem.estimate, mixed.estimate, sem.se, mixed.se)
        rows.append(QuantityRow(key=corr.key, wide_name=corr.wide, long_name=corr.long, sem=sem, mixed=mixed,
                                allowed_gap=tolerance.allowed_gap(sem.estimate, mixed.estimate, sem.se, mixed.se),
                                verdict=Verdict.AGREE if agree else Verdict.UNEXPLAINED))
    return tuple(rows)


def _findings(adj: Adjudication) -> tuple[Finding, ...]:
    out = []
    for fit in (adj.sem, adj.mixed):
        out += [Finding("library-message", fit.library, m) for m in fit.messages]
        out += [Finding("fit-note", fit.library, n) for n in fit.notes]
    for refit in adj.refits:
        result = "kept" if refit.kept else "not better; the first solution was kept"
        out.append(Finding("stopped-short", refit.library,
                           f"{refit.library} reported its fit as finished, but {refit.reason}; refitted from that "
                           f"solution: criterion {refit.before:.6f} -> {refit.after:.6f} ({result})"))
    return tuple(out)


def _data_summary(compiled: CompiledGrowth, adj: Adjudication) -> dict:
    shaped = compiled.shaped
    desc = shaped.description
    return {"persons_read": shaped.persons_read, "persons_used": shaped.n_persons,
            "occasions_read": shaped.occasions_read, "occasions_used": len(shaped.outcome),
            "missing": desc.estimation.missing.value, "method": desc.estimation.method.value,
            "predictors": [{"key": p.key, "column": p.source, "level": p.level, "reference": p.reference}
                           for p in shaped.predictors],
            "seconds": {"sem": adj.sem.seconds, "mixed": adj.mixed.seconds}}


def reconcile(compiled: CompiledGrowth, adj: Adjudication, tolerance: Tolerance = DEFAULT_TOLERANCE) -> Reconciliation:
    """Build the reconciliation of two adjudicated fits."""
    rows = _rows(compiled, adj, tolerance)
    verdicts = {r.verdict for r in rows}
    overall = (Verdict.UNEXPLAINED if Verdict.UNEXPLAINED in verdicts
               else Verdict.EXPLAINED if Verdict.EXPLAINED in verdicts else Verdict.AGREE)
    reml = compiled.shaped.description.estimation.method is Method.REML
    return Reconciliation(
        description=compiled.shaped.description.label, verdict=overall, quantities=rows,
        timing=compiled.shaped.timing.to_dict(),
        log_likelihood={k: float(v) for k, v in adj.log_likelihood.items()},
        referee_checks=tuple({"library": c.library, "criterion": c.criterion, "library_value": float(c.library_value),
                              "referee_value": float(c.referee_value),
                              "relative_difference": float(c.relative_difference)} for c in adj.checks),
        refits=tuple({"library": r.library, "reason": r.reason, "before": float(r.before), "after": float(r.after),
                      "kept": bool(r.kept)} for r in adj.refits),
        findings=_findings(adj), data=_data_summary(compiled, adj), tolerance=tolerance.describe(),
        specifications=specifications(compiled, reml), caution=CAUTION)
