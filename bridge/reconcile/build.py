"""Assemble the reconciliation: the one object every renderer reads."""
from __future__ import annotations

from dataclasses import replace

from ..compile.texts import pair_specifications
from ..data import ShapedData
from ..progress import Progress, quiet
from ..referee.absolute_fit import growth_absolute_fit
from .evaluation import Evaluation
from .explain import Explained, explain
from .result import Finding, Reconciliation, Verdict
from .tolerance import DEFAULT_TOLERANCE

CAUTION = ("Agreement between the two frameworks shows that both programs computed the same estimates for the "
           "same model: computational consistency. It does not show that the model is right for these data, "
           "and it supports no causal claim. Decisions about people need substantive and design arguments "
           "beyond this check.")


def _findings(base: Evaluation) -> tuple[Finding, ...]:
    adj, out = base.adjudication, []
    for fit in (adj.first_sem, adj.first_mixed, adj.sem, adj.mixed):
        out += [Finding("library-message", fit.library, m) for m in fit.messages]
        out += [Finding("fit-note", fit.library, n) for n in fit.notes]
    for fit in (adj.sem, adj.mixed):
        if not fit.reported_success:
            out.append(Finding("not-converged", fit.library, f"{fit.library} did not report convergence for its "
                                                             "final solution; the referee's certificate decides"))
    for c in adj.certificates:
        if not c.passed:
            out.append(Finding("certificate-failed", c.library, f"the {c.form} form's solution is not a certified "
                                                                f"maximum: {c.reason}"))
    for refit in adj.refits:
        result = "kept" if refit.kept else "not better; the first solution was kept"
        out.append(Finding("stopped-short", refit.library,
                           f"{refit.library} reported its fit as finished, but {refit.reason}; refitted from that "
                           f"solution: criterion {refit.before:.6f} -> {refit.after:.6f} ({result})"))
    return tuple(dict.fromkeys(out))


def _form_data(compiled) -> dict:
    return {"persons": compiled.shaped.n_persons, "occasions": len(compiled.shaped.outcome),
            "missing": compiled.coding.missing.value, "time_origin": compiled.coding.origin,
            "time_scale": compiled.coding.scale}


def _data_summary(shaped: ShapedData, base: Evaluation) -> dict:
    adj = base.adjudication
    return {"persons_read": shaped.persons_read, "persons_used": base.pair.mixed.shaped.n_persons,
            "occasions_read": shaped.occasions_read, "occasions_used": len(base.pair.mixed.shaped.outcome),
            "missing": base.plan.mixed.missing.value, "method": base.plan.method.value,
            "forms": {"sem": _form_data(base.pair.sem), "mixed": _form_data(base.pair.mixed)},
            "predictors": [{"key": p.key, "column": p.source, "level": p.level, "reference": p.reference}
                           for p in shaped.predictors],
            "seconds": {"sem": adj.sem.seconds, "mixed": adj.mixed.seconds}}


def overall_verdict(rows) -> Verdict:
    """undecided if any row is, else unexplained if any row is, else explained if any row is, else agree."""
    verdicts = {r.verdict for r in rows}
    if Verdict.UNDECIDED in verdicts:
        return Verdict.UNDECIDED
    if Verdict.UNEXPLAINED in verdicts:
        return Verdict.UNEXPLAINED
    return Verdict.EXPLAINED if Verdict.EXPLAINED in verdicts else Verdict.AGREE


UNDECIDED_NEXT_STEP = ("Check the model (too many random terms for the data, a badly scaled time variable) and "
                       "run again with --debug to see the certificates in the JSON; simplifying the random part "
                       "usually helps.")


def undecided_reason(certificates) -> str:
    """One line: which solution failed its certificate, why, and what the user can do next."""
    failed = [c for c in certificates if not c.passed]
    if not failed:
        return ""
    first = failed[0]
    return f"the {first.form} form's solution ({first.library}) is not a certified maximum: {first.reason}. " \
           + UNDECIDED_NEXT_STEP


def _undecided(base: Evaluation) -> Explained:
    rows = tuple(replace(r, verdict=Verdict.UNDECIDED) for r in base.rows)
    return Explained(rows=rows, explanations=())


def reconcile(shaped: ShapedData, base: Evaluation, progress: Progress = quiet) -> Reconciliation:
    """Explain the base evaluation's differences and assemble the reconciliation.

    Nothing is compared or explained unless both solutions are certified maxima: otherwise every
    quantity, and the reconciliation, is `undecided`.
    """
    adj = base.adjudication
    explained = explain(shaped, base, progress) if adj.certified else _undecided(base)
    texts = pair_specifications(base.pair)
    with progress("testing both forms against the saturated model"):
        absolute = growth_absolute_fit(base.pair, adj.sem.params, adj.mixed.params,
                                       tuple(c.passed for c in adj.certificates))
    return Reconciliation(
        description=shaped.description.label, verdict=overall_verdict(explained.rows), quantities=explained.rows,
        timing=shaped.timing.to_dict(), log_likelihood={k: float(v) for k, v in adj.log_likelihood.items()},
        referee_checks=tuple({"library": c.library, "criterion": c.criterion, "library_value": float(c.library_value),
                              "referee_value": float(c.referee_value),
                              "relative_difference": float(c.relative_difference)} for c in adj.checks),
        refits=tuple({"library": r.library, "reason": r.reason, "before": float(r.before), "after": float(r.after),
                      "kept": bool(r.kept)} for r in adj.refits),
        findings=_findings(base), explanations=explained.explanations, data=_data_summary(shaped, base),
        tolerance=DEFAULT_TOLERANCE.describe(), specifications=texts, caution=CAUTION, pair=base.pair,
        certificates=adj.certificates, undecided_reason=undecided_reason(adj.certificates), absolute_fit=absolute)
