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
from ..referee.spaces import certify_growth, is_psd, space_of
from .compare import compare
from .evaluation import Evaluation

CAUSE = "parameter-space"


def applies(evaluation: Evaluation) -> bool:
    """Whether the SEM's solution has a person-effect covariance that is not positive semidefinite."""
    return not is_psd(evaluation.adjudication.sem.params.cov)


def constrained(evaluation: Evaluation) -> Evaluation:
    """The evaluation with the SEM's solution replaced by the referee's maximum of the SEM's model over PSD matrices.

    The search starts from the mixed solution when both forms share one parameter space, else from the
    SEM's solution moved to the nearest positive semidefinite matrix; the result is certified like any
    library's solution (library "referee").
    """
    if not applies(evaluation):
        return evaluation
    pair, adj = evaluation.pair, evaluation.adjudication
    referee = Referee(pair.sem.wave_design)
    start = adj.mixed.params if pair.comparable and pair.sem.equal_residuals else adj.sem.params
    space = space_of(pair.sem, referee, start, reml=False, psd=True)
    params, value = space.maximum(start)
    certificate, _ = certify_growth(space, pair.sem, params, value, "referee", "wide (positive semidefinite)")
    fit = FitOutcome(library="referee", params=params, own_log_likelihood=value, reported_success=certificate.passed,
                     start="the referee's maximum over positive semidefinite matrices")
    sem_se = adj.sem_se  # the spaces differ only on the boundary; the unconstrained SEs are the ones reported
    new_adj = replace(adj, sem=fit, certificates=(certificate,) + tuple(c for c in adj.certificates
                                                                       if c.library != "semopy"))
    rows = compare(pair, params, adj.mixed.params, sem_se, adj.mixed_se)
    return replace(evaluation, adjudication=new_adj, rows=rows)
