"""The displacement split and the predicted cost of rounding, checked by simulation.

Data are drawn here (fixed seeds) from linear growth y = a_i + b_i t + e at times t = wave + d,
with d either a person's own offset (time = wave + c_i: persons displaced as a whole, as when
they enter at different ages) or independent occasion jitter. The "wide form" is the linear
growth model fitted by ML at the rounded times (the wave grid), the "mixed model" the same model
at the exact times; both are maximised by a small likelihood written in this file (an independent
computation, itself checked against statsmodels MixedLM once). The prediction under test is
bridge.timing.predict.predicted_change; its algebra follows Mehta & West (2000, Psychological
Methods 5(1)) and is worked out in that module's docstring.
"""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import minimize

from bridge.data.timing import classify, split_displacement
from bridge.timing.predict import predicted_change

WAVES = np.arange(4.0)
MEAN = np.array([10.0, 2.0])
G = np.array([[4.0, 0.3], [0.3, 1.0]])
REPLICATIONS = 50


def draw(seed: int, kind: str, n: int = 100, half_width: float = 0.45) -> tuple[np.ndarray, np.ndarray]:
    """Times (n x waves) and outcomes; displacement uniform within +-half_width, per person or per occasion."""
    rng = np.random.default_rng(seed)
    effects = rng.multivariate_normal(MEAN, G, size=n)
    if kind == "between":
        shift = np.repeat(rng.uniform(-half_width, half_width, n)[:, None], len(WAVES), axis=1)
    else:
        shift = rng.uniform(-half_width, half_width, (n, len(WAVES)))
    times = WAVES[None, :] + shift
    y = effects[:, [0]] + effects[:, [1]] * times + rng.normal(0.0, 1.0, times.shape)
    return times, y


def ml_fit(times: np.ndarray, y: np.ndarray) -> dict[str, float]:
    """ML of linear growth with random intercept and slope (every person seen at every wave)."""
    Z = np.stack([np.ones_like(times), times], axis=-1)            # (n, T, 2)

    def profile(theta):
        L = np.array([[theta[0], 0.0], [theta[1], theta[2]]])
        V = Z @ (L @ L.T) @ np.swapaxes(Z, 1, 2) + np.exp(theta[3]) * np.eye(times.shape[1])
        C = np.linalg.cholesky(V)
        wx, wy = np.linalg.solve(C, Z), np.linalg.solve(C, y[..., None])[..., 0]
        xvx, xvy = np.einsum("ntp,ntr->pr", wx, wx), np.einsum("ntp,nt->p", wx, wy)
        beta = np.linalg.solve(xvx, xvy)
        r = wy - wx @ beta
        logdet = 2 * np.log(np.diagonal(C, axis1=1, axis2=2)).sum()
        return 0.5 * (logdet + (r * r).sum()), beta, L @ L.T

    found = minimize(lambda th: profile(th)[0], np.array([2.0, 0.1, 1.0, 0.0]), method="BFGS",
                     options={"gtol": 1e-8})
    _, beta, cov = profile(found.x)
    return {"mean.intercept": beta[0], "mean.slope": beta[1], "var.intercept": cov[0, 0],
            "cov.intercept.slope": cov[0, 1], "var.slope": cov[1, 1], "var.residual": float(np.exp(found.x[3]))}


def split_of(times: np.ndarray):
    n, T = times.shape
    timing, _ = classify(np.repeat(np.arange(n), T), times.ravel(), tuple(WAVES))
    return timing.split


def test_the_test_likelihood_matches_statsmodels():
    # The independent ML above against statsmodels MixedLM (ML, lbfgs) on one draw.
    import statsmodels.api as sm

    times, y = draw(0, "within")
    ours = ml_fit(times, y)
    X = np.column_stack([np.ones(times.size), times.ravel()])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        theirs = sm.MixedLM(y.ravel(), X, groups=np.repeat(np.arange(len(y)), 4), exog_re=X).fit(reml=False)
    assert ours["var.residual"] == pytest.approx(theirs.scale, rel=1e-4)
    assert ours["var.intercept"] == pytest.approx(theirs.cov_re[0, 0], rel=1e-4)
    assert ours["mean.slope"] == pytest.approx(theirs.fe_params[1], rel=1e-5)


@pytest.mark.parametrize("kind,part", [("between", "between_share"), ("within", "within_share")])
def test_split_puts_the_variance_in_the_right_part(kind, part):
    split = split_of(draw(3, kind)[0])
    assert getattr(split, part) >= 0.9
    # uniform on +-0.45 has variance 0.45^2 / 3 = 0.0675 (common practice)
    assert split.variance == pytest.approx(0.0675, rel=0.25)


def test_split_of_a_known_small_example():
    # Two persons with offsets +1 and -1 and no jitter: all between; and an even jitter with equal means: all within.
    assert split_displacement(np.array([0, 0, 1, 1]), np.array([1.0, 1.0, -1.0, -1.0])).within == 0.0
    jitter = split_displacement(np.array([0, 0, 1, 1]), np.array([0.5, -0.5, 0.5, -0.5]))
    assert jitter.between == 0.0 and jitter.within == pytest.approx(0.5)   # SSW 1 on n - a = 2 df


@pytest.mark.parametrize("kind,affected,untouched", [("between", "var.intercept", "var.residual"),
                                                     ("within", "var.residual", "var.intercept")])
def test_predicted_change_matches_the_rounding_gap_over_50_replications(kind, affected, untouched):
    misses = {affected: [], untouched: []}
    predicted_affected = []
    for seed in range(REPLICATIONS):
        times, y = draw(1000 + seed, kind)
        exact = ml_fit(times, y)
        rounded = ml_fit(np.broadcast_to(WAVES, times.shape), y)
        change, _ = predicted_change(split_of(times), exact, np.full(len(y), exact["mean.slope"]))
        for key in misses:
            misses[key].append((rounded[key] - exact[key]) - change.get(key, 0.0))
        predicted_affected.append(change[affected])
    for key, values in misses.items():
        values = np.asarray(values)
        mcse = values.std(ddof=1) / np.sqrt(REPLICATIONS)
        assert abs(values.mean()) <= 2 * mcse, (key, values.mean(), mcse)
    # the prediction is not trivially zero: E[b^2] Var(d) = (2^2 + 1) x 0.0675 = 0.34 (common practice algebra)
    assert np.mean(predicted_affected) == pytest.approx(0.34, rel=0.15)
