"""The `parameter-space` cause: an indefinite SEM maximum beside a positive semidefinite mixed maximum.

Simulated with fixed seeds: few persons, no variance in the highest growth term and residual variances
peaking mid-study, so the SEM's unconstrained maximum puts a variance at zero beside a non-zero
covariance (an indefinite matrix; semopy bounds only the variances), while MixedLM keeps the matrix
positive semidefinite (common practice: a covariance matrix of person effects is positive semidefinite).
Linear and quadratic shapes, by ML and by REML: each must be explained, every gap closed.
"""
from __future__ import annotations

import numpy as np
import pytest

import bridge
from bridge.reconcile import Verdict
from conftest import write_case
from test_explanations import _description, _simulated, _table

LINEAR_TRUTH = dict(n_persons=40, random_cov=((4.0, 0.0), (0.0, 0.0)), residual=(1.0, 2.0, 3.0, 2.0, 1.0))
QUADRATIC_TRUTH = dict(n_persons=60, mean={"intercept": 10.0, "slope": 1.0, "quadratic": -0.1},
                       random_cov=((4.0, 0.5, 0.0), (0.5, 1.0, 0.0), (0.0, 0.0, 0.0)),
                       random_terms=("intercept", "slope", "quadratic"), residual=(1.0, 2.0, 3.0, 2.0, 1.0))
CASES = {
    ("linear", "ml"): (7, LINEAR_TRUTH, {}),
    ("linear", "reml"): (7, LINEAR_TRUTH, {}),
    ("quadratic", "ml"): (1, QUADRATIC_TRUTH, {"shape": "quadratic", "random": ["intercept", "slope", "quadratic"]}),
    ("quadratic", "reml"): (1, QUADRATIC_TRUTH, {"shape": "quadratic",
                                                 "random": ["intercept", "slope", "quadratic"]}),
}


def _covariance(rec, form: str) -> np.ndarray:
    terms = [t for t in ("intercept", "slope", "quadratic") if f"var.{t}" in {r.key for r in rec.quantities}]
    cov = np.zeros((len(terms), len(terms)))
    for i, a in enumerate(terms):
        for j, b in enumerate(terms):
            key = f"var.{a}" if i == j else f"cov.{terms[min(i, j)]}.{terms[max(i, j)]}"
            cov[i, j] = getattr(rec.row(key), form).estimate
    return cov


@pytest.mark.parametrize("shape,method", sorted(CASES))
def test_an_indefinite_sem_maximum_is_explained_by_the_parameter_space(tmp_path, shape, method):
    seed, truth, model = CASES[(shape, method)]
    frame = _simulated(seed, **truth)
    rec = bridge.run(write_case(tmp_path, frame, _description(model=model, estimation={"method": method})))
    assert rec.verdict is Verdict.EXPLAINED and rec.exit_code == 0, _table(rec)
    assert all(c.passed for c in rec.certificates)
    assert np.linalg.eigvalsh(_covariance(rec, "sem")).min() < 0          # the SEM's maximum is indefinite
    assert np.linalg.eigvalsh(_covariance(rec, "mixed")).min() > -1e-10   # the mixed model's is not
    explanation = next(e for e in rec.explanations if e.cause == "parameter-space")
    assert not explanation.note
    assert explanation.details["log_likelihood_constrained"] <= explanation.details["log_likelihood_unconstrained"]
    # Every gap closed: after the refits (and the referee's constrained maximum) each quantity agrees.
    for e in (e for e in rec.explanations if not e.note):
        for key in e.quantities:
            assert abs(e.gap_after[key]) <= rec.row(key).allowed_gap, (key, e.cause)
    if method == "reml":
        assert any(e.cause == "estimation-method" for e in rec.explanations)
