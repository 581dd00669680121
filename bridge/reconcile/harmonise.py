"""Detection rules for the causes that a harmonised refit can prove, and the plan without each cause."""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from ..compile import Plan, TimeSource
from ..data import Design
from ..spec import Method, Missing, Residuals, Term
from ..compile.parameters import is_psd
from .evaluation import Evaluation

BOUNDARY_RELATIVE = 1e-3  # a variance below this share of the largest one (internal scale) is at its boundary


@dataclass(frozen=True)
class Harmoniser:
    cause: str
    applies: Callable[[Evaluation], bool]
    remove: Callable[[Plan, Evaluation], Plan]


def boundary_terms(base: Evaluation) -> tuple[Term, ...]:
    """Random terms whose variance is at or near zero in either solution (fixed at zero by the refit).

    An indefinite covariance matrix is not a boundary of the SEM's space: it is the `parameter-space` cause.
    """
    terms = base.pair.sem.random_terms
    if len(terms) < 2:
        return ()
    flagged: set[Term] = set()
    solutions = (base.adjudication.sem.params, base.adjudication.mixed.params)
    for params in (p for p in solutions if is_psd(p.cov)):
        diag = np.diag(params.cov)
        top = max(float(diag.max()), 1e-12)
        flagged |= {t for t, d in zip(terms, diag) if d <= BOUNDARY_RELATIVE * top}
    kept = [t for t in terms if t not in flagged]
    return tuple(t for t in terms if t in flagged) if kept else ()


def _all_available(plan: Plan, _: Evaluation) -> Plan:
    return plan.with_(sem=replace(plan.sem, missing=Missing.FULL_INFORMATION),
                      mixed=replace(plan.mixed, missing=Missing.FULL_INFORMATION))


def _same_coding(plan: Plan, _: Evaluation) -> Plan:
    return plan.with_(sem=replace(plan.sem, origin=plan.mixed.origin, scale=plan.mixed.scale))


def _codings_differ(base: Evaluation) -> bool:
    sem, mixed = base.plan.sem, base.plan.mixed
    return (sem.origin, sem.scale) != (mixed.origin, mixed.scale)


HARMONISERS: tuple[Harmoniser, ...] = (
    Harmoniser("estimation-method", lambda b: b.plan.method is Method.REML,
               lambda p, _: p.with_(method=Method.ML)),
    Harmoniser("residual-structure", lambda b: b.plan.sem_residuals is Residuals.PER_WAVE,
               lambda p, _: p.with_(sem_residuals=Residuals.EQUAL)),
    Harmoniser("missing-data", lambda b: b.plan.sem.missing is not b.plan.mixed.missing, _all_available),
    Harmoniser("time-binning", lambda b: (b.pair.mixed.shaped.timing.design is Design.INDIVIDUALLY_VARYING
                                          and b.plan.mixed_times is TimeSource.EXACT),
               lambda p, _: p.with_(mixed_times=TimeSource.WAVES)),
    Harmoniser("time-coding", _codings_differ, _same_coding),
    Harmoniser("boundary", lambda b: bool(boundary_terms(b)),
               lambda p, b: p.with_(random=tuple(t for t in p.random if t not in boundary_terms(b)))),
)


def without(plan: Plan, base: Evaluation, harmonisers) -> Plan:
    """The plan with every listed cause removed."""
    for h in harmonisers:
        plan = h.remove(plan, base)
    return plan
