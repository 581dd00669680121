"""A real growth data set whose wide (SEM) maximum has an indefinite growth-factor covariance matrix.

Loblolly (Kung 1986, recalled from memory; 14 seed sources x 6 ages, balanced): the heights grow almost
in parallel, so the maximum over variances >= 0 with a free covariance puts both variances (linear; the
intercept variance for quadratic) at 0 beside a non-zero covariance, about 0.57 (linear) and 1.83
(quadratic) log-likelihood units above the maximum over positive semidefinite matrices, which is singular.
Both maxima come from reference_mle (independent of the tool). The wide form must reach the first and the
long form the second (each within 1e-5 relative or 1e-3 SE, issue 9), by ML and REML (the wide form is
always ML), and the difference must be explained by the parameter-space cause.
"""
from __future__ import annotations

import numpy as np
import pytest

from bridge.reconcile import Verdict
from test_exact_maxima import misses, reconciled, reference

# Before the certificates (2 December 2026) the long form stopped short on the singular boundary (variance
# components 3e-5 to 1.7e-3 relative off) and the quadratic wide form 4e-5 to 1.9e-4 relative off; now
# both are polished from the referee's maximum (the long form on the boundary face it found).


def _cases():
    return [pytest.param(degree, method, id=f"{shape}-{method}")
            for degree, shape in ((1, "linear"), (2, "quadratic")) for method in ("ml", "reml")]


def _matrix(ref: dict, degree: int) -> np.ndarray:
    terms = ("intercept", "slope", "quadratic")[:degree + 1]
    G = np.zeros((degree + 1, degree + 1))
    for j in range(degree + 1):
        for k in range(j + 1):
            G[j, k] = G[k, j] = ref[f"var.{terms[j]}" if j == k else f"cov.{terms[k]}.{terms[j]}"][0]
    return G


def test_the_reference_maxima_differ_as_published_in_issue_9():
    # Issue 9 reports for this data (linear, ML): variances 0, covariance 0.459, about 0.57 log-likelihood
    # units above the semidefinite maximum. Recomputed here independently.
    wide, long = reference("Loblolly", "ml", 1, False), reference("Loblolly", "ml", 1, True)
    assert wide["var.intercept"][0] == 0.0 and wide["var.slope"][0] == 0.0
    assert wide["cov.intercept.slope"][0] == pytest.approx(0.45873, abs=1e-5)
    assert wide["loglik"][0] - long["loglik"][0] == pytest.approx(0.5744, abs=1e-4)
    for degree in (1, 2):
        for method in ("ml", "reml"):
            assert np.linalg.eigvalsh(_matrix(reference("Loblolly", method, degree, False), degree)).min() < -1e-3
            assert np.linalg.eigvalsh(_matrix(reference("Loblolly", method, degree, True), degree)).min() > -1e-10


@pytest.mark.parametrize("degree, method", _cases())
def test_each_form_reaches_the_maximum_of_its_own_space(degree, method):
    rec = reconciled("Loblolly", method, degree)
    assert misses(rec, "sem", reference("Loblolly", "ml", degree, False), "Loblolly") == {}
    assert misses(rec, "mixed", reference("Loblolly", method, degree, True), "Loblolly") == {}


@pytest.mark.parametrize("degree, method", _cases())
def test_the_difference_is_explained_by_the_parameter_space(degree, method):
    rec = reconciled("Loblolly", method, degree)
    assert rec.verdict is Verdict.EXPLAINED
    explanation = next(e for e in rec.explanations if e.cause == "parameter-space")
    assert not explanation.note
    wide, long = reference("Loblolly", "ml", degree, False), reference("Loblolly", "ml", degree, True)
    details = explanation.details
    # the tool's two maxima in the wide model's ML likelihood are the independent ones (1e-7 units: rounding)
    assert details["log_likelihood_unconstrained"] == pytest.approx(wide["loglik"][0], abs=1e-6)
    assert details["log_likelihood_constrained"] == pytest.approx(long["loglik"][0], abs=1e-6)
