"""Cross-lagged estimates of both forms against independent maxima written in the tests (reference_panel).

- CLPM on a real panel with two outcomes on very different scales: Cornwell & Rupert (1988), Journal of
  Applied Econometrics 3(2): 595 heads of household observed 1976-1982, log wage (SD 0.46) and weeks
  worked (SD 5.1). With complete data and time-invariant paths the ML solution is pooled least squares
  (common practice), computed here with numpy.linalg.lstsq. Also with log wage x 1000 (issue 10).
- RI-CLPM (Hamaker, Kuiper & Grasman 2015, Psychological Methods 20(1)) on a simulated 3-wave panel of 300
  persons (seed 3) whose likelihood has several local maxima: a first wide fit stops at an
  autoregression near 1 (log-likelihood -2587.71, measured with semopy on 2 December 2026) while the
  global maximum (reference_panel.ri_clpm_mle) lies at 0.456 (-2563.74).

Agreement rule (issue 9): within 1e-5 relative, or 1e-3 of the reference standard error.
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
from reference_panel import clpm_ols, ri_clpm_mle
from test_exact_maxima import REL, SE_SHARE, open_data

FAMILY = pytest.mark.xfail(strict=False, reason="awaits issue 10 (outcomes on any scale, full RI-CLPM keys)")
CERTIFY = pytest.mark.xfail(strict=False, reason="awaits issue 9 (certificates and several starts for the RI-CLPM)")
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
            marks = [FAMILY] if form == "sem" and multiplier == 1.0 else []   # today: the wide fit gives -inf
            yield pytest.param(multiplier, form, marks=marks, id=f"lwage_x{multiplier:g}-{form}")


@pytest.mark.parametrize("multiplier, form", list(_clpm_params()))
def test_clpm_on_the_wage_panel_equals_pooled_least_squares(multiplier, form):
    rec, ref = wage_case(multiplier)
    assert {row.key for row in rec.quantities} == set(CLPM_KEYS)
    for key, name in CLPM_KEYS.items():
        value = ref[name]
        allowed = max(REL * abs(value), SE_SHARE * ref.get(f"se_{name}", 0.0))
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
        allowed = max(REL * abs(value), SE_SHARE * ref.se[name])
        gap = abs(rec.row(key).sem.estimate - value)
        if gap > allowed:
            out[key] = gap / allowed
    return out


@CERTIFY
def test_ri_clpm_wide_solution_reaches_the_global_maximum_or_is_undecided():
    rec, ref = ri_case()
    if rec.verdict.value == "undecided":
        return
    assert rec.log_likelihood["sem"] == pytest.approx(ref.loglik, abs=1e-6 * abs(ref.loglik))
    assert _close(rec, ref, RI_KEYS) == {}


@FAMILY
def test_ri_clpm_documented_keys_match_the_reference():
    rec, ref = ri_case()
    if rec.verdict.value == "undecided":
        pytest.skip("the wide solution was not certified")
    assert _close(rec, ref, {**RI_KEYS, **RI_MORE_KEYS}) == {}


@CERTIFY
def test_ri_clpm_verdict_never_explains_an_uncertified_local_maximum():
    # Issue 9: a solution 24 log-likelihood units below the maximum must not be "explained".
    rec, ref = ri_case()
    if rec.log_likelihood["sem"] < ref.loglik - 1e-3:
        assert rec.verdict is not Verdict.EXPLAINED and rec.verdict is not Verdict.AGREE
