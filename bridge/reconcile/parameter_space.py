"""The `parameter-space` cause: the SEM reached a person-effect covariance the mixed model cannot represent.

semopy keeps variances non-negative but lets the growth-factor covariance matrix be indefinite; MixedLM
keeps it positive semidefinite. When the SEM's maximum is indefinite, both libraries can be right about
their own spaces and still differ. The proof is the referee's maximum of the SEM's own model (its design,
occasions and residual structure, by ML) constrained to positive semidefinite matrices: when that
constrained maximum equals the mixed solution, the spaces are the whole difference.
"""
from __future__ import annotations

from dataclasses import replace

from ..fit import FitOutcome
from ..referee.likelihood import Referee
from ..compile.parameters import is_psd
from ..referee.spaces import certify_growth, space_of
from .compare import compare
from .evaluation import Evaluation

CAUSE = "parameter-space"


def applies(evaluation: Evaluation) -> bool:
    """Whether the SEM's solution has a person-effect covariance that is not positive semidefinite."""
    return not is_psd(evaluation.adjudication.sem.params.cov)


def constrained(evaluation: Evaluation) -> Evaluation:
    """The evaluation with the SEM's solution replaced by the referee's maximum of the SEM's model over PSD matrices.

    When both forms share one parameter space the mixed solution is tried first: if it is a certified
    maximum of the SEM's model over positive semidefinite matrices, it is that maximum (on a flat ridge
    another search could stop at a different point of equal likelihood). Otherwise the referee searches
    from the SEM's solution moved to the nearest positive semidefinite matrix. The result is certified
    like any library's solution (library "referee").
    """
    if not applies(evaluation):
        return evaluation
    pair, adj = evaluation.pair, evaluation.adjudication
    referee = Referee(pair.sem.wave_design)
    shared = pair.comparable and pair.sem.equal_residuals
    space = space_of(pair.sem, referee, adj.mixed.params if shared else adj.sem.params, reml=False, psd=True)
    form = "wide (positive semidefinite)"
    certificate = None
    if shared:
        params = adj.mixed.params
        value = space.full(params) + space.shift
        certificate, _ = certify_growth(space, pair.sem, params, value, "referee", form)
    if certificate is None or not certificate.passed:
        params, value = space.maximum(adj.sem.params)
        certificate, _ = certify_growth(space, pair.sem, params, value, "referee", form)
    fit = FitOutcome(library="referee", params=params, own_log_likelihood=value, reported_success=certificate.passed,
                     start="the referee's maximum over positive semidefinite matrices")
    sem_se = adj.sem_se  # the spaces differ only on the boundary; the unconstrained SEs are the ones reported
    new_adj = replace(adj, sem=fit, certificates=(certificate,) + tuple(c for c in adj.certificates
                                                                       if c.library != "semopy"))
    rows = compare(pair, params, adj.mixed.params, sem_se, adj.mixed_se)
    return replace(evaluation, adjudication=new_adj, rows=rows)
