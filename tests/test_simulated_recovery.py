"""Simulated growth data with known population values: both forms must recover them.

"Within 3 standard errors of the population value" is the usual acceptance rule for a single
simulated replication (a z-statistic beyond 3 is rare, about 0.3% per quantity, for a correct
estimator with a correct SE). The seeds are fixed, so every check here is deterministic.
"""
from __future__ import annotations

import math

import pytest

import bridge
from bridge.simulate import GrowthTruth, simulate_growth

WAVES = (0.0, 1.0, 2.0, 3.0, 4.0)
Z_LIMIT = 3.0  # common practice: a correct estimate lies within 3 SE of the truth

LINEAR = dict(mean={"intercept": 50.0, "slope": 2.0},
              random_terms=("intercept", "slope"),
              random_cov=((25.0, 1.5), (1.5, 1.0)),
              residual=9.0)
QUADRATIC = dict(mean={"intercept": 50.0, "slope": 2.0, "quadratic": -0.3},
                 random_terms=("intercept", "slope", "quadratic"),
                 random_cov=((25.0, 1.0, -0.2), (1.0, 2.0, -0.15), (-0.2, -0.15, 0.09)),
                 residual=4.0)
# one standard-normal predictor and one 50/50 binary predictor (reference level "control")
PREDICTORS = {"x": "normal", "group": "binary:control,treated"}
EFFECTS = {"linear": {"x": {"intercept": 3.0, "slope": 0.5}, "group": {"intercept": -4.0, "slope": 1.0}},
           "quadratic": {"x": {"intercept": 3.0, "slope": 0.5, "quadratic": 0.1},
                         "group": {"intercept": -4.0, "slope": 1.0, "quadratic": -0.2}}}
PREDICTOR_KEYS = {"x": "x", "group": "group[treated]"}  # quantity-key names of the predictor columns


def make_truth(shape: str, with_predictors: bool, n_persons: int = 500, **changes) -> GrowthTruth:
    base = dict(LINEAR if shape == "linear" else QUADRATIC)
    if with_predictors:
        base.update(predictors=PREDICTORS, effects=EFFECTS[shape])
    base.update(changes)
    return GrowthTruth(n_persons=n_persons, waves=WAVES, **base)


def expected_values(truth: GrowthTruth) -> dict[str, float]:
    """Population value of every quantity the tool reports for a model matching `truth`."""
    values = {f"mean.{term}": value for term, value in truth.mean.items()}
    for name, shifts in truth.effects.items():
        for term in truth.mean:
            values[f"effect.{PREDICTOR_KEYS[name]}.{term}"] = shifts.get(term, 0.0)
    terms = truth.random_terms
    for i, first in enumerate(terms):
        for j, second in enumerate(terms[: i + 1]):
            key = f"var.{first}" if i == j else f"cov.{second}.{first}"
            values[key] = truth.random_cov[i][j]
    values["var.residual"] = float(truth.residual)
    return values


def description(truth: GrowthTruth, method: str = "ml", missing: str = "full-information", **model) -> dict:
    return {"data": {"layout": "long", "person": "person", "time": "time", "outcome": "outcome"},
            "model": {"kind": "growth", "shape": "quadratic" if "quadratic" in truth.mean else "linear",
                      "random": list(truth.random_terms), "predictors": list(truth.predictors),
                      "residuals": "equal", **model},
            "estimation": {"method": method, "missing": missing}}


def misses(rec: bridge.Reconciliation, truth: GrowthTruth) -> list[str]:
    """Every (form, quantity) whose estimate lies more than Z_LIMIT standard errors from the truth."""
    truth_values, out = expected_values(truth), []
    for row in rec.quantities:
        for form in ("sem", "mixed"):
            est = getattr(row, form)
            usable = math.isfinite(est.se) and est.se > 0
            z = (est.estimate - truth_values[row.key]) / est.se if usable else math.nan
            if not abs(z) <= Z_LIMIT:  # also catches a NaN estimate or an unusable SE
                out.append(f"{form} {row.key}: {est.estimate:.5g} (SE {est.se:.3g}), truth "
                           f"{truth_values[row.key]:g}, z = {z:.2f}")
    return out


def assert_recovered(rec: bridge.Reconciliation, truth: GrowthTruth) -> None:
    assert {row.key for row in rec.quantities} == set(expected_values(truth))
    assert misses(rec, truth) == []


# --- recovery on balanced data ----------------------------------------------------------------

@pytest.mark.parametrize("shape, with_predictors, seed", [
    ("linear", False, 101),
    ("linear", True, 102),
    pytest.param("quadratic", False, 103, marks=pytest.mark.slow),
    pytest.param("quadratic", True, 104, marks=pytest.mark.slow),
])
def test_both_forms_recover_population_values_and_agree(case, shape, with_predictors, seed):
    truth = make_truth(shape, with_predictors, n_persons=500 if shape == "linear" else 400)
    frame = simulate_growth(truth, seed)
    rec = bridge.run(case(frame, description(truth)))
    assert rec.data["persons_used"] == truth.n_persons
    assert rec.data["occasions_used"] == truth.n_persons * len(WAVES)
    assert_recovered(rec, truth)
    # Balanced data, ML, one residual variance: the two likelihoods are the same function.
    assert rec.verdict.value == "agree"
    assert rec.log_likelihood["sem"] == pytest.approx(rec.log_likelihood["mixed"], rel=1e-7)


# --- missing occasions ------------------------------------------------------------------------

MISSING_RATE = 0.15


def _missing_truth() -> GrowthTruth:
    return make_truth("linear", True, n_persons=500, missing_rate=MISSING_RATE)


def test_full_information_sem_equals_all_available_data_mixed_model(case):
    truth = _missing_truth()
    frame = simulate_growth(truth, 202)
    rec = bridge.run(case(frame, description(truth, missing="full-information")))
    # Every person and every observed occasion is used.
    assert rec.data["persons_read"] == rec.data["persons_used"] == truth.n_persons
    assert rec.data["occasions_used"] == len(frame)
    assert 0.10 < 1 - len(frame) / (truth.n_persons * len(WAVES)) < 0.20  # the design really has holes
    # Full-information ML (wide) and all-rows ML (long) maximise one observed-data likelihood.
    assert rec.verdict.value == "agree"
    ll = rec.log_likelihood
    assert ll["referee_at_sem"] == pytest.approx(ll["referee_at_mixed"], rel=1e-6)
    assert ll["sem"] == pytest.approx(ll["mixed"], rel=1e-6)
    assert_recovered(rec, truth)  # missing completely at random: still consistent


def test_complete_cases_drop_incomplete_persons_and_both_forms_agree(case):
    truth = _missing_truth()
    frame = simulate_growth(truth, 202)
    complete_persons = int((frame.groupby("person").size() == len(WAVES)).sum())
    rec = bridge.run(case(frame, description(truth, missing="complete-cases")))
    data = rec.data
    assert data["missing"] == "complete-cases"
    assert data["persons_read"] == truth.n_persons
    assert data["persons_used"] < data["persons_read"]
    assert data["persons_used"] == complete_persons
    assert data["occasions_used"] == data["persons_used"] * len(WAVES)
    assert rec.verdict.value == "agree"
    assert rec.log_likelihood["referee_at_sem"] == pytest.approx(rec.log_likelihood["referee_at_mixed"], rel=1e-6)
    assert_recovered(rec, truth)


# --- time origin ------------------------------------------------------------------------------

def test_shifting_the_time_origin_reparameterises_without_changing_the_fit(case):
    # Biesanz et al. (2004), Psychological Methods 9(1): with time t' = t - c the intercept becomes the
    # expected outcome at t = c, i.e. b0 + c*b1 (also for each predictor's intercept effect); the
    # slope, its variance and the residual are untouched; var0' = var0 + 2c*cov + c^2*var1 and
    # cov' = cov + c*var1; and the maximised log-likelihood is the same number.
    shift = 2.0
    truth = make_truth("linear", True, n_persons=400)
    frame = simulate_growth(truth, 301)
    base = bridge.run(case(frame, description(truth), name="origin_0"))
    moved = bridge.run(case(frame, description(truth, time_origin=shift), name="origin_2"))
    assert base.verdict.value == moved.verdict.value == "agree"
    for form in ("sem", "mixed"):
        old = {row.key: getattr(row, form).estimate for row in base.quantities}
        new = {row.key: getattr(row, form).estimate for row in moved.quantities}
        ses = {row.key: getattr(row, form).se for row in base.quantities}
        predicted = dict(old)
        predicted["mean.intercept"] = old["mean.intercept"] + shift * old["mean.slope"]
        for name in ("x", "group[treated]"):
            predicted[f"effect.{name}.intercept"] = old[f"effect.{name}.intercept"] + shift * old[f"effect.{name}.slope"]
        predicted["var.intercept"] = (old["var.intercept"] + 2 * shift * old["cov.intercept.slope"]
                                      + shift ** 2 * old["var.slope"])
        predicted["cov.intercept.slope"] = old["cov.intercept.slope"] + shift * old["var.slope"]
        assert set(new) == set(predicted)
        for key, value in predicted.items():
            # Two separate optimisations: exact up to optimiser noise, far below 1% of an SE.
            assert new[key] == pytest.approx(value, rel=1e-6, abs=0.01 * ses[key]), (form, key)
        # The mean intercept specifically: within 1e-3 of its SE (fixed effects are sharply determined).
        assert new["mean.intercept"] - old["mean.intercept"] == pytest.approx(
            shift * old["mean.slope"], abs=1e-3 * ses["mean.intercept"])
        assert moved.log_likelihood[form] == pytest.approx(base.log_likelihood[form], rel=1e-8)
    assert moved.row("mean.intercept").mixed.estimate != pytest.approx(base.row("mean.intercept").mixed.estimate,
                                                                       abs=1.0)  # the shift did happen
