"""Explain every difference: detect causes, refit without them, and attribute each gap.

The rule: a quantity becomes `explained` only when a certified refit with its cause(s) removed
brings it within tolerance; the explanation records the gap before and after and both fits'
log-likelihoods. Each gap is attributed to the causes whose presence alone (all others removed)
still leaves that quantity apart; a gap that only the removal of several causes together closes
is attributed to them jointly, and says so. A cause no refit can remove is a note, never a verdict.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

from ..data import ShapedData
from ..progress import Progress, quiet
from . import parameter_space
from .compare import compare_adjudicated
from .evaluation import Evaluation, evaluate
from .evidence import EVIDENCE, Context, optimizer_evidence, standard_error_evidence
from .harmonise import HARMONISERS, without
from .result import Estimate, Explanation, QuantityRow, Verdict
from .causes import CATALOGUE


@dataclass(frozen=True)
class Explained:
    rows: tuple[QuantityRow, ...]
    explanations: tuple[Explanation, ...]


def _explanation(cause: str, keys: list[str], before: dict, after: dict, evidence: tuple[str, dict],
                 note: bool = False) -> Explanation:
    text, details = evidence
    return Explanation(cause=cause, title=CATALOGUE[cause].title, quantities=tuple(keys),
                       gap_before={k: before[k] for k in keys}, gap_after={k: after[k] for k in keys},
                       evidence=text, why=CATALOGUE[cause].why, details=details, note=note)


def _optimizer(base: Evaluation, rows: dict[str, QuantityRow]) -> list[Explanation]:
    """Quantities whose first answers disagreed and whose certified refits agree: the refit is the proof."""
    if not base.adjudication.refits or not base.adjudication.certified:
        return []
    first = {r.key: r for r in compare_adjudicated(base.pair, base.adjudication, first=True)}
    keys = [k for k, r in rows.items() if r.verdict is Verdict.AGREE and k in first
            and first[k].verdict is Verdict.UNEXPLAINED]
    if not keys:
        return []
    for k in keys:
        rows[k] = replace(rows[k], verdict=Verdict.EXPLAINED, causes=("optimizer",))
    return [_explanation("optimizer", keys, {k: first[k].difference for k in keys},
                         {k: rows[k].difference for k in keys}, optimizer_evidence(base))]


def _after(base: Evaluation, full: Evaluation, key: str) -> QuantityRow | None:
    """The row of `key` after the refit; a variance the refit fixed at zero in both forms has a zero gap."""
    row = full.row(key)
    if row is not None:
        return row
    kept = {t.value for t in full.plan.random}
    parts = key.split(".")[1:]
    if key.startswith(("var.", "cov.")) and any(p not in kept for p in parts if p not in ("residual",)):
        zero = Estimate(0.0, float("nan"))
        return replace(base.row(key), sem=zero, mixed=zero, verdict=Verdict.AGREE)
    return None


def _refits(shaped: ShapedData, base: Evaluation, detected, space: bool, progress: Progress):
    """The certified refit with every detected cause removed, and for each cause the refit with only it left."""
    causes = [h.cause for h in detected] + ([parameter_space.CAUSE] if space else [])
    with progress(f"refitting without {', '.join(causes)}"):
        unconstrained = evaluate(shaped, without(base.plan, base, detected)) if detected else base
        full = parameter_space.constrained(unconstrained) if space else unconstrained
    alone: dict[str, Evaluation] = {}
    if len(causes) == 1:
        alone[causes[0]] = base
        return full, alone
    for h in detected:
        with progress(f"refitting with only {h.cause} left"):
            others = evaluate(shaped, without(base.plan, base, [g for g in detected if g is not h]))
            alone[h.cause] = parameter_space.constrained(others) if space else others
    if space:
        alone[parameter_space.CAUSE] = unconstrained
    return full, alone


def _causes_of(key: str, alone: dict[str, Evaluation]) -> tuple[list[str], bool]:
    """The causes that alone reopen the gap of `key`; all of them jointly when none does alone."""
    single = [c for c, ev in alone.items() if ev.adjudication.certified
              and (ev.row(key) is None or ev.row(key).verdict is not Verdict.AGREE)]
    return (single, False) if single else (list(alone), True)


def _attribute(shaped: ShapedData, base: Evaluation, detected, space: bool, rows: dict[str, QuantityRow],
               progress: Progress) -> list[Explanation]:
    full, alone = _refits(shaped, base, detected, space, progress)
    if not full.adjudication.certified:
        return []  # a refit that is not a certified maximum proves nothing
    attributed: dict[str, list[str]] = {c: [] for c in alone}
    joint: set[str] = set()
    for key, row in rows.items():
        after = _after(base, full, key)
        if row.verdict is not Verdict.UNEXPLAINED or after is None or after.verdict is not Verdict.AGREE:
            continue
        causes, together = _causes_of(key, alone)
        rows[key] = replace(row, verdict=Verdict.EXPLAINED, causes=tuple(causes))
        for c in causes:
            attributed[c].append(key)
        if together:
            joint.add(key)
    out = []
    for cause, keys in attributed.items():
        if not keys:
            continue
        context = Context(shaped=shaped, base=base, full=full, alone=alone[cause], keys=tuple(keys))
        before = {k: (alone[cause].row(k) or rows[k]).difference for k in keys}
        after = {k: _after(base, full, k).difference for k in keys}
        text, details = EVIDENCE[cause](context)
        details = {**details, "log_likelihood_before": _log_likelihoods(base),
                   "log_likelihood_after": _log_likelihoods(full)}
        if joint & set(keys):
            shared = sorted(joint & set(keys))
            details["jointly"] = shared
            text += (f" No single cause accounts for {', '.join(shared)}: with any one of {', '.join(alone)} "
                     f"left alone the forms agree, so the gap arises from these causes together; the refit "
                     f"without all of them closes it.")
        out.append(_explanation(cause, keys, before, after, (text, details)))
    return out


def _log_likelihoods(evaluation: Evaluation) -> dict[str, float]:
    adj = evaluation.adjudication
    return {"sem": adj.sem.own_log_likelihood, "mixed": adj.mixed.own_log_likelihood}


def _boundary_note(shaped: ShapedData, base: Evaluation, rows: dict[str, QuantityRow],
                   progress: Progress) -> Explanation:
    """A boundary that changed no verdict is still reported, with the likelihood at the boundary."""
    boundary = next(h for h in HARMONISERS if h.cause == "boundary")
    with progress("refitting at the boundary"):
        reduced = evaluate(shaped, boundary.remove(base.plan, base))
    dropped = {t.value for t in base.plan.random if t not in reduced.plan.random}
    keys = [k for k in rows if k.startswith(("var.", "cov.")) and any(p in dropped for p in k.split(".")[1:])]
    context = Context(shaped=shaped, base=base, full=reduced, alone=base, keys=tuple(keys))
    gaps = {k: rows[k].difference for k in keys}
    return _explanation("boundary", keys, gaps, gaps, EVIDENCE["boundary"](context), note=True)


def explain(shaped: ShapedData, base: Evaluation, progress: Progress = quiet) -> Explained:
    """Verdicts and explanations for every quantity of a base evaluation (certified by the referee)."""
    rows = {r.key: r for r in base.rows}
    explanations = _optimizer(base, rows)
    detected = [h for h in HARMONISERS if h.applies(base)]
    space = parameter_space.applies(base)
    if (detected or space) and any(r.verdict is Verdict.UNEXPLAINED for r in rows.values()):
        explanations += _attribute(shaped, base, detected, space, rows, progress)
    if any(h.cause == "boundary" for h in detected) and not any(e.cause == "boundary" for e in explanations):
        explanations.append(_boundary_note(shaped, base, rows, progress))
    se_explanation = standard_error_evidence(base, rows)
    if se_explanation is not None:
        keys, evidence = se_explanation
        se_gaps = {k: rows[k].sem.se - rows[k].mixed.se for k in keys}
        explanations.append(_explanation("standard-errors", keys, se_gaps, se_gaps, evidence, note=True))
    return Explained(rows=tuple(rows[r.key] for r in base.rows), explanations=tuple(explanations))
