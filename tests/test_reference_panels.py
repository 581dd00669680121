"""Cross-lagged estimates of both forms against independent maxima written in the tests (reference_panel).

- CLPM on a real panel with two outcomes on very different scales: Cornwell & Rupert (1988), Journal of
  Applied Econometrics 3(2): 595 heads of household observed 1976-1982, log wage (SD 0.46) and weeks
  worked (SD 5.1). With complete data and time-invariant paths the ML solution is pooled least squares
  (common practice), computed here with numpy.linalg.lstsq. Also with log wage x 1000 (issue 10).
- Dynamic panel, long form: each outcome's lagged regression with a random person intercept is a linear
  mixed model given the lags (common practice); its maximum comes from reference_mle.growth_mle with Z = 1.
  Simulated (seed 1, 500 persons, 4 waves) where the maximum keeps a small person variance (0.0028).
- Dynamic panel, relaxed wide form with correlated equations (Allison, Williams & Moral-Benito 2017,
  Socius 3; issue 10) on the same data: reference_panel.dynamic_panel_mle (2 starts, about 4-7 s).
- RI-CLPM (Hamaker, Kuiper & Grasman 2015, Psychological Methods 20(1)) on a simulated 3-wave panel of 300
  persons (seed 3) whose likelihood has several local maxima: a first wide fit stops at an
  autoregression near 1 (log-likelihood -2587.71, measured with semopy on 2 December 2026) while the
  global maximum (reference_panel.ri_clpm_mle) lies at 0.456 (-2563.74).

Agreement rule (issue 9, `test_exact_maxima.allowed_gap`): within 1e-5 relative, or 1e-3 of the reference
standard error for estimates within one SE of zero.
"""
from __future__ import annotations

import functools
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import bridge
from bridge.reconcile import Verdict
from conftest import write_case
from reference_mle import growth_mle
from reference_panel import clpm_ols, dynamic_panel_mle, ri_clpm_mle
from test_exact_maxima import allowed_gap, open_data

_FOLDER = Path(tempfile.mkdtemp(prefix="reference_panels_"))
WAVES = 7
FIRST_YEAR = 1976


# --- the wage panel -----------------------------------------------------------------------------

@functools.lru_cache(maxsize=None)
def wages() -> pd.DataFrame:
    """Long panel: person, year, lwage, wks. The file has one row per person-year, persons in blocks of
    seven consecutive years (Cornwell & Rupert 1988) but no identifiers; they are rebuilt from the order."""
    data = open_data("Wages").reset_index(drop=True)
    assert len(data) == 595 * WAVES
    data["person"] = data.index // WAVES + 1
    data["year"] = data.index % WAVES + FIRST_YEAR
    return data[["person", "year", "lwage", "wks", "exp"]]


def test_rebuilt_persons_are_consistent():
    # Years of full-time work experience rise by exactly one from each year to the next within every
    # rebuilt person, and never across a block boundary by construction: the blocks are persons.
    data = wages()
    assert (data.groupby("person")["exp"].diff().dropna() == 1).all()


def _wide(frame: pd.DataFrame, column: str) -> np.ndarray:
    return frame.pivot(index="person", columns="year", values=column).to_numpy(float)


CLPM_KEYS = {"intercept.lwage": "intercept_x", "auto.lwage": "a_x", "cross.wks.lwage": "c_yx",
             "intercept.wks": "intercept_y", "cross.lwage.wks": "c_xy", "auto.wks": "a_y",
             "var.residual.lwage": "var_res_x", "var.residual.wks": "var_res_y", "cov.residual": "cov_res"}


@functools.lru_cache(maxsize=None)
def wage_case(multiplier: float):
    frame = wages().assign(lwage=lambda d: d["lwage"] * multiplier)[["person", "year", "lwage", "wks"]]
    reference = clpm_ols(_wide(frame, "lwage"), _wide(frame, "wks"))
    description = {"data": {"layout": "long", "person": "person", "time": "year", "outcomes": ["lwage", "wks"]},
                   "model": {"kind": "cross-lagged", "variant": "clpm", "paths": "time-invariant"},
                   "estimation": {"method": "ml", "missing": "full-information"}}
    rec = bridge.run(write_case(_FOLDER, frame, description, name=f"wages_{multiplier:g}"))
    return rec, reference


def test_pooled_least_squares_reference():
    # The reference itself: 595 x 6 lagged rows, and log wage's own lag dominating its equation (wages
    # are persistent; common practice), with the residual variances of the two outcomes far apart in scale.
    ref = wage_case(1.0)[1]
    assert ref["n"] == 595 * (WAVES - 1)
    assert 0.85 < ref["a_x"] < 1.0 and ref["var_res_y"] / ref["var_res_x"] > 100


def _clpm_params():
    for multiplier in (1.0, 1000.0):
        for form in ("sem", "mixed"):
            yield pytest.param(multiplier, form, id=f"lwage_x{multiplier:g}-{form}")


@pytest.mark.parametrize("multiplier, form", list(_clpm_params()))
def test_clpm_on_the_wage_panel_equals_pooled_least_squares(multiplier, form):
    rec, ref = wage_case(multiplier)
    assert {row.key for row in rec.quantities} == set(CLPM_KEYS)
    for key, name in CLPM_KEYS.items():
        value = ref[name]
        allowed = allowed_gap(value, ref[f"se_{name}"]) if f"se_{name}" in ref else allowed_gap(value, float("nan"))
        assert getattr(rec.row(key), form).estimate == pytest.approx(value, abs=allowed), key


# --- RI-CLPM with local maxima ------------------------------------------------------------------

RI_SEED = 3
RI_PERSONS, RI_WAVES = 300, 3
RI_TRUTH = {"a_x": 0.4, "a_y": 0.4, "c_xy": 0.1, "c_yx": 0.1, "var_trait_x": 1.0, "var_trait_y": 1.0,
            "cov_trait": 0.3, "var_first_x": 1.0, "var_first_y": 1.0, "cov_first": 0.2,
            "var_res_x": 0.6, "var_res_y": 0.6, "cov_res": 0.1}
RI_MEANS = (1.0, -0.5)


def simulate_ri_clpm(seed: int) -> np.ndarray:
    """(persons, waves, 2) from the RI-CLPM with RI_TRUTH: trait + within part, within parts lagged."""
    t, rng = RI_TRUTH, np.random.default_rng(seed)
    trait = rng.multivariate_normal([0, 0], [[t["var_trait_x"], t["cov_trait"]], [t["cov_trait"], t["var_trait_y"]]],
                                    RI_PERSONS)
    within = [rng.multivariate_normal([0, 0], [[t["var_first_x"], t["cov_first"]], [t["cov_first"], t["var_first_y"]]],
                                      RI_PERSONS)]
    B = np.array([[t["a_x"], t["c_yx"]], [t["c_xy"], t["a_y"]]])
    residual = [[t["var_res_x"], t["cov_res"]], [t["cov_res"], t["var_res_y"]]]
    for _ in range(1, RI_WAVES):
        within.append(within[-1] @ B.T + rng.multivariate_normal([0, 0], residual, RI_PERSONS))
    return np.stack([trait + w + np.array(RI_MEANS) for w in within], axis=1)


@functools.lru_cache(maxsize=None)
def ri_case():
    values = simulate_ri_clpm(RI_SEED)
    reference = ri_clpm_mle(values[:, :, 0], values[:, :, 1], n_starts=12)
    frame = pd.DataFrame([(i + 1, t + 1, values[i, t, 0], values[i, t, 1]) for i in range(RI_PERSONS)
                          for t in range(RI_WAVES)], columns=["person", "wave", "x", "y"])
    description = {"data": {"layout": "long", "person": "person", "time": "wave", "outcomes": ["x", "y"]},
                   "model": {"kind": "cross-lagged", "variant": "ri-clpm", "paths": "time-invariant"},
                   "estimation": {"method": "ml", "missing": "full-information"}}
    return bridge.run(write_case(_FOLDER, frame, description, name="ri_clpm_local")), reference


RI_KEYS = {"auto.x": "a_x", "auto.y": "a_y", "cross.x.y": "c_xy", "cross.y.x": "c_yx"}
RI_MORE_KEYS = {"var.residual.x": "var_res_x", "var.residual.y": "var_res_y", "var.trait.x": "var_trait_x",
                "var.trait.y": "var_trait_y", "cov.trait": "cov_trait"}   # docs/cross-lagged.md


def test_ri_clpm_reference_is_the_global_maximum_of_a_surface_with_local_maxima():
    ref = ri_case()[1]
    # Measured here (independent code; 12 starts, Newton-polished to a score below 1e-9; 30 starts find
    # the same highest point among four): the surface has several maxima.
    assert len(ref.local_maxima) >= 2 and ref.score_norm < 1e-6
    assert ref.loglik == pytest.approx(-2563.7363, abs=1e-3)
    assert ref.params["a_x"] == pytest.approx(0.4563, abs=1e-3)
    # Common practice: the ML estimate of a correct model lies within 3 SE of the truth.
    for name, truth in RI_TRUTH.items():
        assert abs(ref.params[name] - truth) < 3 * ref.se[name], name


def _close(rec, ref, keys: dict[str, str]) -> dict[str, float]:
    out = {}
    for key, name in keys.items():
        value = ref.params[name]
        allowed = allowed_gap(value, ref.se[name])
        gap = abs(rec.row(key).sem.estimate - value)
        if gap > allowed:
            out[key] = gap / allowed
    return out


def test_ri_clpm_wide_solution_reaches_the_global_maximum_or_is_undecided():
    rec, ref = ri_case()
    if rec.verdict.value == "undecided":
        return
    assert rec.log_likelihood["sem"] == pytest.approx(ref.loglik, abs=1e-6 * abs(ref.loglik))
    assert _close(rec, ref, RI_KEYS) == {}


def test_ri_clpm_documented_keys_match_the_reference():
    rec, ref = ri_case()
    assert _close(rec, ref, {**RI_KEYS, **RI_MORE_KEYS}) == {}


# Measured on 2 December 2026 before the long form was refitted from the referee's maximum: its person
# variances stopped 1.28e-5 (x) and 1.35e-5 (y) relative short.
def test_ri_clpm_long_form_is_the_random_intercept_maximum():
    # The long form: lags centred on the person's mean, a random person intercept (docs/cross-lagged.md);
    # a linear mixed model given the centred lags (common practice), maximised by reference_mle.
    rec, _ = ri_case()
    values = simulate_ri_clpm(RI_SEED)
    ref = _random_intercept_maxima(values, ["x", "y"], centred=True)
    keys = [key for key in ref if not key.startswith("intercept") and key in {r.key for r in rec.quantities}]
    assert set(RI_KEYS) <= set(keys)
    assert _long_misses(rec, {key: ref[key] for key in keys}, floor=1e-7) == {}


def test_ri_clpm_verdict_never_explains_an_uncertified_local_maximum():
    # Issue 9: a solution 24 log-likelihood units below the maximum must not be "explained".
    rec, ref = ri_case()
    if rec.log_likelihood["sem"] < ref.loglik - 1e-3:
        assert rec.verdict is not Verdict.EXPLAINED and rec.verdict is not Verdict.AGREE


# --- dynamic panel: the long form is one random-intercept model per outcome -----------------------

def _dynamic_panel_run(frame: pd.DataFrame, time: str, outcomes: list[str], name: str) -> bridge.Reconciliation:
    description = {"data": {"layout": "long", "person": "person", "time": time, "outcomes": outcomes},
                   "model": {"kind": "cross-lagged", "variant": "dynamic-panel", "paths": "time-invariant"},
                   "estimation": {"method": "ml", "missing": "full-information"}}
    return bridge.run(write_case(_FOLDER, frame, description, name=name))


def _random_intercept_maxima(values: np.ndarray, names: list[str], centred: bool = False) -> dict:
    """Each outcome at waves 2..T on a constant and both lagged outcomes (centred on the person's mean of
    the lags for the RI-CLPM's long form), with a random person intercept, maximised by
    reference_mle.growth_mle (Z = 1): quantity key -> (estimate, SE)."""
    N, T, _ = values.shape
    person = np.repeat(np.arange(N), T - 1)
    lags = values[:, :-1, :] - (values[:, :-1, :].mean(axis=1, keepdims=True) if centred else 0.0)
    X = np.column_stack([np.ones(N * (T - 1)), lags.reshape(-1, 2)])
    out = {}
    for k, name in enumerate(names):
        best = growth_mle(values[:, 1:, k].reshape(-1), X, np.ones((N * (T - 1), 1)), person, psd=True)
        other = names[1 - k]
        lag_keys = [f"auto.{name}", f"cross.{other}.{name}"] if k == 0 else [f"cross.{other}.{name}", f"auto.{name}"]
        for key, b, s in zip([f"intercept.{name}", *lag_keys], best.fixed, best.se_fixed):
            out[key] = (float(b), float(s))
        out[f"var.residual.{name}"] = (best.s2, best.se_s2)
        out[f"var.trait.{name}"] = (float(best.G[0, 0]), float(best.se_G[0, 0]))
    return out


def _long_misses(rec: bridge.Reconciliation, ref: dict, floor: float) -> dict[str, float]:
    out = {}
    for key, (value, se) in ref.items():
        allowed = allowed_gap(value, se, floor)
        gap = abs(rec.row(key).mixed.estimate - value)
        if gap > allowed:
            out[key] = gap / allowed
    return out


DP_SEED = 1


def simulate_dynamic_panel(seed: int, persons: int = 500, waves: int = 4) -> np.ndarray:
    """Person effects (correlation 0.5) that also shaped the first wave; residual correlation 0.4."""
    rng = np.random.default_rng(seed)
    person = rng.multivariate_normal([0, 0], [[0.5, 0.25], [0.25, 0.5]], persons)
    values = [person + rng.multivariate_normal([0, 0], [[1.0, 0.3], [0.3, 1.0]], persons)]
    B, intercept = np.array([[0.4, 0.1], [0.2, 0.3]]), np.array([1.0, -0.5])
    for _ in range(1, waves):
        values.append(intercept + values[-1] @ B.T + person
                      + rng.multivariate_normal([0, 0], [[1.0, 0.4], [0.4, 1.0]], persons))
    return np.stack(values, axis=1)


@functools.lru_cache(maxsize=None)
def dynamic_case():
    values = simulate_dynamic_panel(DP_SEED)
    frame = pd.DataFrame([(i + 1, t + 1, *values[i, t]) for i in range(values.shape[0])
                          for t in range(values.shape[1])], columns=["person", "wave", "x", "y"])
    return _dynamic_panel_run(frame, "wave", ["x", "y"], "dynamic_simulated"), values


def test_dynamic_panel_long_form_leaves_no_small_person_variance_at_zero():
    # Measured on 2 December 2026 before the long form was refitted from the referee's maximum: for
    # outcome x the maximum has person variance 0.00279 (log-likelihood -2297.30045); the long form
    # returned the boundary 0 (pooled least squares, -2297.30178), autoregression 0.63997 against 0.63874.
    rec, values = dynamic_case()
    ref = _random_intercept_maxima(values, ["x", "y"])
    assert ref["var.trait.x"][0] == pytest.approx(0.00279, abs=1e-5)
    assert _long_misses(rec, ref, floor=1e-7) == {}


DP_WIDE_KEYS = {"intercept.x": "intercept_x", "intercept.y": "intercept_y", "auto.x": "a_x", "auto.y": "a_y",
                "cross.x.y": "c_xy", "cross.y.x": "c_yx", "var.residual.x": "var_res_x",
                "var.residual.y": "var_res_y", "cov.residual": "cov_res", "var.trait.x": "var_trait_x",
                "var.trait.y": "var_trait_y", "cov.trait": "cov_trait"}


def test_dynamic_panel_relaxed_wide_form_is_the_full_information_maximum():
    # The relaxed wide form (Allison, Williams & Moral-Benito 2017, Socius 3) with correlated equations
    # (issue 10): person effects free to correlate with the first wave and with each other, residuals of
    # the two equations correlated. Independent maximum: reference_panel.dynamic_panel_mle (measured on
    # 2 December 2026: every estimate within 1e-8 relative, log-likelihood -6078.24347 on both sides).
    rec, values = dynamic_case()
    ref = dynamic_panel_mle(values[:, :, 0], values[:, :, 1], relaxed=True, n_starts=2)  # 4 starts: the same
    assert ref.loglik == pytest.approx(-6078.24347, abs=1e-4)
    assert rec.log_likelihood["sem"] == pytest.approx(ref.loglik, abs=1e-6 * abs(ref.loglik))
    assert _close(rec, ref, DP_WIDE_KEYS) == {}
