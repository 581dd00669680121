"""Explain every difference: detect causes, refit without them, and attribute each gap.

A quantity becomes `explained` only when the plan with every detected cause
removed brings it within tolerance. Each gap is attributed to the causes whose
presence alone (all others removed) still leaves that quantity apart.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

from ..data import ShapedData
from .compare import compare_adjudicated
from ..progress import Progress, quiet
from .evaluation import Evaluation, evaluate
from .evidence import EVIDENCE, Context, optimizer_evidence, standard_error_evidence
from .harmonise import HARMONISERS, without
from .result import Explanation, QuantityRow, Verdict
from .causes import CATALOGUE


@dataclass(frozen=True)
class Explained:
    rows: tuple[QuantityRow, ...]
    explanations: tuple[Explanation, ...]


def _explanation(cause: str, keys: list[str], before: dict, after: dict, evidence: tuple[str, dict]) -> Explanation:
    text, details = evidence
    return Explanation(cause=cause, title=CATALOGUE[cause].title, quantities=tuple(keys),
                       gap_before={k: before[k] for k in keys}, gap_after={k: after[k] for k in keys},
                       evidence=text, why=CATALOGUE[cause].why, details=details)


def _optimizer(base: Evaluation, rows: dict[str, QuantityRow]) -> list[Explanation]:
    first = {r.key: r for r in compare_adjudicated(base.pair, base.adjudication, first=True)}
    keys = [k for k, r in rows.items() if r.verdict is Verdict.AGREE and k in first
            and first[k].verdict is Verdict.UNEXPLAINED]
    if not keys or not base.adjudication.refits:
        return []
    for k in keys:
        rows[k] = replace(rows[k], verdict=Verdict.EXPLAINED, causes=("optimizer",))
    return [_explanation("optimizer", keys, {k: first[k].difference for k in keys},
                         {k: rows[k].difference for k in keys}, optimizer_evidence(base))]


def _attribute(shaped: ShapedData, base: Evaluation, detected, rows: dict[str, QuantityRow],
               progress: Progress) -> list[Explanation]:
    with progress(f"refitting without {', '.join(h.cause for h in detected)}"):
        full = evaluate(shaped, without(base.plan, base, detected))
    alone = {detected[0].cause: base} if len(detected) == 1 else {}
    for h in detected if len(detected) > 1 else ():
        with progress(f"refitting with only {h.cause} left"):
            alone[h.cause] = evaluate(shaped, without(base.plan, base, [g for g in detected if g is not h]))
    attributed: dict[str, list[str]] = {h.cause: [] for h in detected}
    for key, row in rows.items():
        if row.verdict is not Verdict.UNEXPLAINED:
            continue
        after = full.row(key)
        if after is None:
            causes = ["boundary"] if "boundary" in attributed and _consistent_with_zero(row) else []
        elif after.verdict is Verdict.AGREE:
            causes = [c for c, ev in alone.items() if ev.row(key) is None
                      or ev.row(key).verdict is Verdict.UNEXPLAINED] or list(attributed)
        else:
            causes = []
        if causes:
            rows[key] = replace(row, verdict=Verdict.EXPLAINED, causes=tuple(causes))
            for c in causes:
                attributed[c].append(key)
    out = []
    for cause, keys in attributed.items():
        if not keys:
            continue
        context = Context(shaped=shaped, base=base, full=full, alone=alone[cause], keys=tuple(keys))
        before = {k: (alone[cause].row(k) or rows[k]).difference for k in keys}
        after = {k: full.row(k).difference if full.row(k) else 0.0 for k in keys}
        out.append(_explanation(cause, keys, before, after, EVIDENCE[cause](context)))
    return out


def _boundary_note(shaped: ShapedData, base: Evaluation, rows: dict[str, QuantityRow],
                   progress: Progress) -> Explanation:
    """A boundary that changed no verdict is still reported, with the likelihood at the boundary."""
    boundary = next(h for h in HARMONISERS if h.cause == "boundary")
    with progress("refitting at the boundary"):
        reduced = evaluate(shaped, boundary.remove(base.plan, base))
    dropped = {t.value for t in base.plan.random if t not in reduced.plan.random}
    keys = [k for k in rows if any(part in dropped for part in k.split(".")[1:]) and k.startswith(("var.", "cov."))]
    context = Context(shaped=shaped, base=base, full=reduced, alone=base, keys=tuple(keys))
    gaps = {k: rows[k].difference for k in keys}
    return _explanation("boundary", keys, gaps, gaps, EVIDENCE["boundary"](context))


def _consistent_with_zero(row: QuantityRow) -> bool:
    return all(abs(e.estimate) <= 2 * e.se for e in (row.sem, row.mixed))


def explain(shaped: ShapedData, base: Evaluation, progress: Progress = quiet) -> Explained:
    """Verdicts and explanations for every quantity of a base evaluation."""
    rows = {r.key: r for r in base.rows}
    explanations = _optimizer(base, rows)
    detected = [h for h in HARMONISERS if h.applies(base)]
    if detected and any(r.verdict is Verdict.UNEXPLAINED for r in rows.values()):
        explanations += _attribute(shaped, base, detected, rows, progress)
    if any(h.cause == "boundary" for h in detected) and not any(e.cause == "boundary" for e in explanations):
        explanations.append(_boundary_note(shaped, base, rows, progress))
    se_explanation = standard_error_evidence(base, rows)
    if se_explanation is not None:
        keys, evidence = se_explanation
        se_gaps = {k: rows[k].sem.se - rows[k].mixed.se for k in keys}
        explanations.append(_explanation("standard-errors", keys, se_gaps, se_gaps, evidence))
    return Explained(rows=tuple(rows[r.key] for r in base.rows), explanations=tuple(explanations))
