"""Tests for the growth-data simulator and the bundled sight-reading demo."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml

from bridge.simulate import GrowthTruth, simulate_growth

N_LARGE = 20_000


def _truth(**changes) -> GrowthTruth:
    base = dict(n_persons=50, waves=(0.0, 1.0, 2.0, 3.0), mean={"intercept": 10.0, "slope": 2.0},
                random_cov=((4.0, 0.5), (0.5, 1.0)))
    base.update(changes)
    return GrowthTruth(**base)


def _wide(frame: pd.DataFrame) -> np.ndarray:
    """Persons x waves outcome matrix for frames drawn without jitter or missingness."""
    return frame.pivot(index="person", columns="time", values="outcome").to_numpy()


# --- population moments -------------------------------------------------------------------

MOMENT_CASES = {
    # linear random part, a fixed (non-random) quadratic term, one residual variance per wave
    "fixed-quadratic": dict(
        waves=(0.0, 1.0, 2.0, 3.0, 4.0), mean={"intercept": 10.0, "slope": 2.0, "quadratic": -0.25},
        random_cov=((4.0, 0.6), (0.6, 1.0)), residual=(1.0, 1.5, 2.0, 2.5, 3.0)),
    # all three terms random, unequal spacing, one residual variance
    "random-quadratic": dict(
        waves=(0.0, 1.0, 2.0, 4.0, 6.0), mean={"intercept": 5.0, "slope": 1.0, "quadratic": 0.2},
        random_terms=("intercept", "slope", "quadratic"),
        random_cov=((3.0, 0.3, -0.1), (0.3, 0.8, 0.05), (-0.1, 0.05, 0.04)), residual=2.0),
    # predictors: a standard normal and a 50/50 binary, both shifting growth terms
    "predictors": dict(
        waves=(0.0, 2.0, 4.0, 6.0), mean={"intercept": 20.0, "slope": -1.0},
        random_cov=((2.0, -0.3), (-0.3, 0.5)), residual=1.5,
        predictors={"x": "normal", "grp": "binary:low,high"},
        effects={"x": {"intercept": 1.5, "slope": -0.5}, "grp": {"slope": 0.8}}),
}


def _implied(truth: GrowthTruth) -> tuple[np.ndarray, np.ndarray]:
    """Marginal mean and covariance of the wave outcomes, worked out independently here.

    y = Z (m + B' x + u) + e, with Z[t, k] = wave_t ** k. Predictors are independent of u
    and of each other: a standard normal has mean 0, variance 1; a 50/50 indicator has
    mean 0.5, variance 0.25. Hence E y = Z (m + B' E x) and
    Cov y = Z G Z' + Z B' Cov(x) B Z' + diag(residual).
    """
    terms = ["intercept", "slope", "quadratic"]
    waves = np.asarray(truth.waves)
    z = np.column_stack([waves ** k for k in range(3)])
    m = np.array([truth.mean.get(t, 0.0) for t in terms])
    g = np.zeros((3, 3))
    idx = [terms.index(t) for t in truth.random_terms]
    g[np.ix_(idx, idx)] = np.asarray(truth.random_cov)
    names = list(truth.predictors)
    b = np.array([[truth.effects.get(p, {}).get(t, 0.0) for t in terms] for p in names]).reshape(len(names), 3)
    ex = np.array([0.0 if truth.predictors[p] == "normal" else 0.5 for p in names])
    vx = np.diag([1.0 if truth.predictors[p] == "normal" else 0.25 for p in names])
    resid = np.broadcast_to(np.asarray(truth.residual, dtype=float), waves.shape)
    mean = z @ (m + ex @ b)
    cov = z @ (g + b.T @ vx @ b) @ z.T + np.diag(resid)
    return mean, cov


@pytest.mark.parametrize("case", MOMENT_CASES)
def test_mean_trajectory_within_four_standard_errors(case):
    truth = GrowthTruth(n_persons=N_LARGE, **MOMENT_CASES[case])
    y = _wide(simulate_growth(truth, seed=11))
    mean, cov = _implied(truth)
    # common practice: a sample mean has standard error sqrt(variance / N); 4 SE is a wide band
    se = np.sqrt(np.diag(cov) / N_LARGE)
    assert np.all(np.abs(y.mean(axis=0) - mean) <= 4 * se), (y.mean(axis=0), mean)


@pytest.mark.parametrize("case", MOMENT_CASES)
def test_sample_covariance_matches_implied_within_four_standard_errors(case):
    truth = GrowthTruth(n_persons=N_LARGE, **MOMENT_CASES[case])
    y = _wide(simulate_growth(truth, seed=12))
    _, cov = _implied(truth)
    dev = y - y.mean(axis=0)
    products = dev[:, :, None] * dev[:, None, :]  # persons x waves x waves
    sample = products.sum(axis=0) / (N_LARGE - 1)
    # Tolerance, stated: each covariance element must lie within 4 standard errors of the
    # implied value, the SE being the spread of the per-person cross-products over sqrt(N).
    # common practice: a covariance is a mean of iid cross-products, so this SE holds
    # without assuming normality (needed here, since a binary predictor makes a mixture).
    se = products.std(axis=0, ddof=1) / np.sqrt(N_LARGE)
    assert np.all(np.abs(sample - cov) <= 4 * se), np.round(sample - cov, 3)
    # and, more coarsely, no element is off by more than 5% of the largest variance
    assert np.abs(sample - cov).max() <= 0.05 * np.diag(cov).max()


def test_outcome_formula_is_exact_without_random_parts():
    truth = _truth(n_persons=300, waves=(0.0, 1.0, 2.0, 3.0), mean={"intercept": 3.0, "slope": -1.0,
                   "quadratic": 0.5}, random_cov=((0.0, 0.0), (0.0, 0.0)), residual=0.0, jitter=0.3,
                   predictors={"x": "normal", "g": "binary:a,b"},
                   effects={"x": {"intercept": 2.0, "quadratic": -0.1}, "g": {"slope": 4.0}})
    d = simulate_growth(truth, seed=3)
    t, x, g = d["time"], d["x"], (d["g"] == "b").astype(float)
    expected = (3.0 + 2.0 * x) + (-1.0 + 4.0 * g) * t + (0.5 - 0.1 * x) * t ** 2
    np.testing.assert_allclose(d["outcome"], expected, rtol=0, atol=1e-10)


def test_singular_covariance_is_allowed_and_respected():
    # intercept and slope perfectly correlated with equal variances: u_slope == u_intercept
    truth = _truth(n_persons=500, waves=(0.0, 1.0), random_cov=((1.0, 1.0), (1.0, 1.0)), residual=0.0)
    y = _wide(simulate_growth(truth, seed=5))
    u_int, u_slope = y[:, 0] - 10.0, (y[:, 1] - y[:, 0]) - 2.0
    np.testing.assert_allclose(u_slope, u_int, atol=1e-9)
    assert u_int.std() > 0.5


# --- layout and reproducibility -----------------------------------------------------------

def test_columns_ids_and_predictor_types():
    truth = _truth(n_persons=N_LARGE, predictors={"x": "normal", "grp": "binary:low,high"})
    d = simulate_growth(truth, seed=1)
    assert list(d.columns) == ["person", "time", "outcome", "x", "grp"]
    assert d["person"].iloc[0] == "p00001" and d["person"].iloc[-1] == "p20000"
    assert len(d) == N_LARGE * 4 and d["person"].nunique() == N_LARGE
    assert d["x"].dtype == float and set(d["grp"]) == {"low", "high"}
    assert (d.groupby("person")[["x", "grp"]].nunique() == 1).all().all()  # person-level
    assert list(d["time"].iloc[:4]) == [0.0, 1.0, 2.0, 3.0]
    # common practice: a binomial share has SE sqrt(p(1-p)/N); 50/50 must hold within 4 SE
    share = (d.groupby("person")["grp"].first() == "high").mean()
    assert abs(share - 0.5) <= 4 * np.sqrt(0.25 / N_LARGE)


def test_small_sample_ids_have_four_digits():
    assert simulate_growth(_truth(n_persons=7), seed=0)["person"].iloc[0] == "p0001"


def test_same_seed_same_frame_other_seed_differs():
    truth = _truth(n_persons=200, jitter=0.2, missing_rate=0.3, predictors={"g": "binary:a,b"},
                   effects={"g": {"intercept": 1.0}})
    first, again = simulate_growth(truth, seed=42), simulate_growth(truth, seed=42)
    pd.testing.assert_frame_equal(first, again)
    other = simulate_growth(truth, seed=43)
    assert not first.equals(other)
    assert not np.array_equal(first["outcome"].to_numpy()[:50], other["outcome"].to_numpy()[:50])


# --- jitter ---------------------------------------------------------------------------------

def test_jitter_bounds_and_spread():
    jitter, waves = 0.4, np.array([0.0, 1.0, 2.0, 3.0])
    d = simulate_growth(_truth(n_persons=5000, waves=tuple(waves), jitter=jitter), seed=8)
    offsets = d["time"].to_numpy() - np.tile(waves, 5000)
    assert np.all(np.abs(offsets) <= jitter)
    # common practice: uniform(-j, j) has variance j^2/3 and fourth central moment j^4/5, so the
    # sample variance has SE sqrt((j^4/5 - j^4/9) / n); require 4 SE
    n = offsets.size
    assert abs(offsets.var() - jitter ** 2 / 3) <= 4 * np.sqrt((jitter ** 4 / 5 - jitter ** 4 / 9) / n)
    # offsets are drawn per person: persons do not share the same times at a wave
    assert d.loc[np.isclose(d["time"].round(), 1.0), "time"].nunique() > 4000


# --- missingness ----------------------------------------------------------------------------

def test_missing_rate_within_binomial_band():
    rate, n_waves = 0.2, 5
    truth = _truth(n_persons=N_LARGE, waves=(0.0, 1.0, 2.0, 3.0, 4.0), missing_rate=rate)
    d = simulate_growth(truth, seed=21)
    cells = N_LARGE * n_waves
    # Each occasion is dropped with probability r; a person who lost all T occasions gets one
    # back, so the expected missing share is p = r - r^T / T. common practice: the count of
    # missing cells is (close to) binomial(N*T, p), so the share has SE sqrt(p(1-p)/(N*T)).
    p = rate - rate ** n_waves / n_waves
    share = 1 - len(d) / cells
    assert abs(share - p) <= 4 * np.sqrt(p * (1 - p) / cells)
    # missing completely at random: the same band holds wave by wave (each with N cells)
    per_wave = 1 - d.groupby("time").size().reindex(truth.waves).to_numpy() / N_LARGE
    assert np.all(np.abs(per_wave - rate) <= 4 * np.sqrt(rate * (1 - rate) / N_LARGE) + rate ** n_waves)


def test_every_person_keeps_an_occasion_even_at_high_rate():
    truth = _truth(n_persons=3000, waves=(0.0, 1.0, 2.0), missing_rate=0.95, jitter=0.1)
    d = simulate_growth(truth, seed=4)
    counts = d.groupby("person").size()
    assert len(counts) == 3000 and counts.min() >= 1
    assert (counts == 1).mean() > 0.8  # P(all three lost) = 0.857, so most keep just one


def test_missing_rows_are_a_subset_of_the_complete_draw():
    # missingness is drawn last, so it cannot depend on any value in the data (MCAR)
    full = simulate_growth(_truth(n_persons=400, jitter=0.2), seed=9)
    holed = simulate_growth(_truth(n_persons=400, jitter=0.2, missing_rate=0.3), seed=9)
    merged = holed.merge(full, on=["person", "time"], how="left", suffixes=("", "_full"))
    assert merged["outcome_full"].notna().all()
    np.testing.assert_array_equal(merged["outcome"], merged["outcome_full"])


# --- validation -----------------------------------------------------------------------------

@pytest.mark.parametrize("changes, message", [
    (dict(n_persons=0), r"n_persons must be a positive integer, got 0"),
    (dict(waves=()), r"waves must contain at least one planned time"),
    (dict(waves=(0.0, 2.0, 1.0)), r"waves must be finite and strictly increasing"),
    (dict(mean={"intercept": 1.0}), r"mean must give a value for 'slope'"),
    (dict(mean={"intercept": 1.0, "slope": 1.0, "cubic": 1.0}), r"mean has unknown term 'cubic'"),
    (dict(random_terms=("intercept", "quadratic")), r"random term 'quadratic' has no entry in mean"),
    (dict(random_terms=("slope", "slope")), r"random_terms has repeated names"),
    (dict(random_cov=((1.0,),)), r"random_cov must be 2x2 to match random_terms"),
    (dict(random_cov=((1.0, 0.5), (0.2, 1.0))), r"random_cov must be symmetric"),
    (dict(random_cov=((1.0, 2.0), (2.0, 1.0))), r"random_cov must be positive semi-definite"),
    (dict(residual=(1.0, 1.0)), r"residual must be one variance or one per wave \(4\), got 2"),
    (dict(residual=-1.0), r"residual variances must be finite and non-negative"),
    (dict(predictors={"x": "poisson"}), r"predictor 'x' has unknown distribution 'poisson'"),
    (dict(predictors={"x": "binary:a,a"}), r"predictor 'x' needs two distinct non-empty binary levels"),
    (dict(predictors={"x": "binary:a"}), r"predictor 'x' needs two distinct non-empty binary levels"),
    (dict(predictors={"time": "normal"}), r"predictor name 'time' clashes with an output column"),
    (dict(effects={"z": {"slope": 1.0}}), r"effects name predictor 'z', which is not declared"),
    (dict(predictors={"x": "normal"}, effects={"x": {"quadratic": 1.0}}),
     r"effect of 'x' on 'quadratic': that term has no entry in mean"),
    (dict(jitter=-0.1), r"jitter must be a finite non-negative number"),
    (dict(jitter=0.5), r"jitter must be smaller than half the smallest gap between waves \(0.5\)"),
    (dict(missing_rate=1.0), r"missing_rate must be in \[0, 1\), got 1.0"),
    (dict(missing_rate=-0.1), r"missing_rate must be in \[0, 1\)"),
])
def test_invalid_truth_raises_one_line_value_error(changes, message):
    with pytest.raises(ValueError, match=message) as info:
        _truth(**changes)
    assert "\n" not in str(info.value)


def test_invalid_seed_raises():
    with pytest.raises(ValueError, match=r"seed must be a non-negative integer"):
        simulate_growth(_truth(), seed=-1)


# --- bundled demo ---------------------------------------------------------------------------

DEMO_DIR = Path(__file__).resolve().parents[1] / "bridge" / "demo"


def test_make_demo_regenerates_identical_files(tmp_path):
    from bridge.demo import make_demo

    csv_path, yaml_path = make_demo.main(tmp_path)
    assert csv_path.read_bytes() == (DEMO_DIR / "sight_reading.csv").read_bytes()
    assert yaml_path.read_bytes() == (DEMO_DIR / "sight_reading.yaml").read_bytes()


def test_demo_data_matches_its_description():
    d = pd.read_csv(DEMO_DIR / "sight_reading.csv")
    spec = yaml.safe_load((DEMO_DIR / "sight_reading.yaml").read_text(encoding="utf-8"))
    assert list(d.columns) == ["student", "months", "score", "format"]
    assert (spec["data"]["person"], spec["data"]["time"], spec["data"]["outcome"]) == ("student", "months", "score")
    assert spec["model"]["reference_levels"] == {"format": "group"}
    assert d["student"].nunique() == 240 and set(d["format"]) == {"group", "private"}
    planned = np.array(spec["estimation"]["waves"], dtype=float)
    nearest = planned[np.abs(d["months"].to_numpy()[:, None] - planned).argmin(axis=1)]
    assert np.all(np.abs(d["months"] - nearest) <= 1.5)
    assert 0.04 <= 1 - len(d) / (240 * 5) <= 0.12
    assert 40 <= d["score"].quantile(0.01) and d["score"].quantile(0.99) <= 90
    early, late = d[d["months"] < 3], d[d["months"] > 21]
    assert late["score"].mean() > early["score"].mean() + 10
    gain = late.groupby("format")["score"].mean() - early.groupby("format")["score"].mean()
    assert gain["private"] > gain["group"]
