"""The cross-lagged family: recovery, wide/long equivalence, the three causes, the referee, bad input, JSON.

Sources beside the checks:
- RI-CLPM: Hamaker, Kuiper & Grasman (2015), Psychological Methods 20(1).
- dynamic panel with the person effect allowed to correlate with the first wave (the relaxed wide form):
  Allison, Williams & Moral-Benito (2017), Socius 3.
- bias of the within estimator of an autoregressive effect in short panels: Nickell (1981),
  Econometrica 49(6), eq. 18.
Everything else (the 3-SE acceptance rule for one simulated replication, ML residual variance = RSS/n,
the normal log-likelihood of a regression) is common practice.

Data are simulated with `bridge.simulate.panel` and fixed seeds, so every check is deterministic. Each
description is reconciled once per module and checked by several tests (those are marked slow). Estimates
near zero are compared with an absolute floor of 1e-5 standard errors beside the 1e-5 relative bound
(see `_close`).
"""
from __future__ import annotations

import json
import math
import re
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pandas as pd
import pytest
import yaml
from scipy.stats import chi2

import bridge
from bridge.reconcile import Verdict
from bridge.families.cross_lagged.nickell import nickell_bias
from bridge.simulate.panel import PanelTruth, simulate_panel
from conftest import write_case

NAMES = ("x", "y")
PATHS = ((0.5, 0.1), (0.2, 0.4))           # PATHS[to][from]: effect of outcome `from` at t-1 on `to` at t
INTERCEPTS = (1.0, -0.5)
UNCORRELATED = ((1.0, 0.0), (0.0, 1.0))    # both dynamic-panel forms assume uncorrelated equations
PERSON = ((0.5, 0.0), (0.0, 0.5))          # person effects: no covariance across the two outcomes
Z_LIMIT = 3.0                              # common practice: a correct estimate lies within 3 SE of the truth
EXACT = 1e-5                               # relative agreement of two forms of the same likelihood
REFEREE = 1e-6                             # relative agreement of a library's log-likelihood with the referee
CLI = [sys.executable, "-c",
       "import sys; from bridge.cli import main; sys.argv[0]='sembridge'; sys.exit(main())", "reconcile"]

TRUTHS = {
    "clpm": PanelTruth(n_persons=500, n_waves=5, paths=PATHS, kind="clpm", intercepts=INTERCEPTS),
    "clpm-wave": PanelTruth(n_persons=500, n_waves=4, paths=PATHS, kind="clpm", intercepts=INTERCEPTS),
    # the person effect also shaped the first wave: the mixed model's assumption is violated
    "dynamic-panel": PanelTruth(n_persons=500, n_waves=5, paths=PATHS, kind="dynamic-panel",
                                intercepts=INTERCEPTS, residual_cov=UNCORRELATED, person_cov=PERSON,
                                initial_from_person=True),
    # the person effect is unrelated to the first wave: the mixed model's assumption holds
    "dynamic-panel-plain": PanelTruth(n_persons=500, n_waves=5, paths=PATHS, kind="dynamic-panel",
                                      intercepts=INTERCEPTS, residual_cov=UNCORRELATED, person_cov=PERSON),
    "ri-clpm": PanelTruth(n_persons=500, n_waves=5, paths=PATHS, kind="ri-clpm", means=INTERCEPTS),
    "missing": PanelTruth(n_persons=300, n_waves=4, paths=PATHS, kind="clpm", intercepts=INTERCEPTS),
}
SEEDS = {"clpm": 1, "clpm-wave": 11, "dynamic-panel": 2, "dynamic-panel-plain": 5, "ri-clpm": 3, "missing": 4}
VARIANT = {"clpm": "clpm", "clpm-wave": "clpm", "dynamic-panel": "dynamic-panel",
           "dynamic-panel-plain": "dynamic-panel", "ri-clpm": "ri-clpm", "missing": "clpm"}
MISSING_WAVES = 0.12   # share of (person, wave) rows dropped from the long file in the missing-waves case


def description(variant: str, paths: str = "time-invariant") -> dict:
    return {"data": {"layout": "long", "person": "person", "time": "wave", "outcomes": list(NAMES)},
            "model": {"kind": "cross-lagged", "variant": variant, "paths": paths},
            "estimation": {"method": "ml", "missing": "full-information"}}


def simulated(name: str) -> pd.DataFrame:
    frame = simulate_panel(TRUTHS[name], SEEDS[name])
    if name == "missing":  # whole waves missing: each (person, wave) row dropped with probability 12%
        frame = frame[np.random.default_rng(44).random(len(frame)) >= MISSING_WAVES].reset_index(drop=True)
    return frame


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """name -> (frame, reconciliation), each reconciled on first use."""
    cache: dict[str, tuple[pd.DataFrame, object]] = {}

    def get(name: str):
        if name not in cache:
            frame = simulated(name)
            paths = "wave-specific" if name == "clpm-wave" else "time-invariant"
            spec = write_case(tmp_path_factory.mktemp(name), frame, description(VARIANT[name], paths))
            cache[name] = (frame, bridge.run(spec))
        return cache[name]
    return get


def rows_of(rec) -> dict:
    return {r.key: r for r in rec.quantities}


def _close(a: float, b: float, se: float, rel: float = EXACT) -> bool:
    """|a - b| within `rel` of the larger estimate, or within `rel` standard errors (the floor near zero)."""
    floor = rel * se if se is not None and math.isfinite(se) else 0.0
    return abs(a - b) <= max(rel * max(abs(a), abs(b)), floor)


def population(name: str) -> dict[str, float]:
    """Population value of every quantity of the matching wide form."""
    truth = TRUTHS[name]
    values = {}
    for k, to in enumerate(NAMES):
        for j, source in enumerate(NAMES):
            values[f"auto.{to}" if j == k else f"cross.{source}.{to}"] = truth.paths[k][j]
    if truth.kind in ("clpm", "dynamic-panel"):
        for k, to in enumerate(NAMES):
            values[f"intercept.{to}"] = truth.intercepts[k]
            values[f"var.residual.{to}"] = truth.residual_cov[k][k]
    if truth.kind == "clpm":
        values["cov.residual"] = truth.residual_cov[0][1]
    if truth.kind == "dynamic-panel":
        values.update({f"var.trait.{to}": truth.person_cov[k][k] for k, to in enumerate(NAMES)})
    return values


def lagged(frame: pd.DataFrame) -> pd.DataFrame:
    """Rows (person, wave >= 2) with the outcomes and their values at the previous wave (complete data)."""
    frame = frame.sort_values(["person", "wave"])
    lags = frame.groupby("person")[list(NAMES)].shift(1).add_suffix("_lag")
    return pd.concat([frame, lags], axis=1).dropna()


def least_squares(rows: pd.DataFrame) -> dict[str, float]:
    """Our own lagged regressions: numpy least squares; ML residual variance = RSS/n (common practice)."""
    X = np.column_stack([np.ones(len(rows)), rows["x_lag"], rows["y_lag"]])
    out, residuals = {}, {}
    for to in NAMES:
        beta, *_ = np.linalg.lstsq(X, rows[to].to_numpy(), rcond=None)
        e = rows[to].to_numpy() - X @ beta
        other = "y" if to == "x" else "x"
        out.update({f"intercept.{to}": beta[0], f"auto.{to}": beta[1 if to == "x" else 2],
                    f"cross.{other}.{to}": beta[2 if to == "x" else 1], f"var.residual.{to}": e @ e / len(e)})
        residuals[to] = e
    out["cov.residual"] = float(residuals["x"] @ residuals["y"] / len(rows))
    return out


# --- 1. recovery of known population values by the matching wide form ---------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("name", ["clpm", "dynamic-panel", "ri-clpm"])
def test_wide_form_recovers_every_path(runs, name):
    """Each path of the matching wide form (relaxed form for the dynamic panel) within 3 SE of the truth."""
    _, rec = runs(name)
    rows = rows_of(rec)
    paths = {k: v for k, v in population(name).items() if k.startswith(("auto.", "cross."))}
    assert set(paths) <= set(rows), f"missing path rows: {set(paths) - set(rows)}"
    for key, value in paths.items():
        est, se = rows[key].sem.estimate, rows[key].sem.se
        assert math.isfinite(se) and se > 0, f"{name} {key}: no standard error"
        assert abs(est - value) <= Z_LIMIT * se, f"{name} {key}: {est:.4f} vs truth {value} (SE {se:.4f})"


@pytest.mark.slow
@pytest.mark.parametrize("name", ["clpm", "dynamic-panel"])
def test_wide_form_recovers_intercepts_and_variances(runs, name):
    """Intercepts, residual (co)variances and person-effect variances also within 3 SE."""
    _, rec = runs(name)
    rows = rows_of(rec)
    others = {k: v for k, v in population(name).items() if not k.startswith(("auto.", "cross."))}
    assert set(others) <= set(rows), f"missing rows: {set(others) - set(rows)}"
    for key, value in others.items():
        est, se = rows[key].sem.estimate, rows[key].sem.se
        assert abs(est - value) <= Z_LIMIT * se, f"{name} {key}: {est:.4f} vs truth {value} (SE {se:.4f})"


# --- 2. CLPM: the wide form and pooled lagged regressions are one model ---------------------------------

CLPM_KEYS = {"intercept.x", "intercept.y", "auto.x", "auto.y", "cross.x.y", "cross.y.x",
             "var.residual.x", "var.residual.y", "cov.residual"}


@pytest.mark.slow
def test_clpm_wide_and_long_agree(runs):
    _, rec = runs("clpm")
    rows = rows_of(rec)
    assert set(rows) == CLPM_KEYS
    for key, row in rows.items():
        se = min(row.sem.se, row.mixed.se)
        assert _close(row.sem.estimate, row.mixed.estimate, se), \
            f"{key}: wide {row.sem.estimate!r} vs long {row.mixed.estimate!r}"
        assert row.verdict is Verdict.AGREE
    assert rec.verdict is Verdict.AGREE


@pytest.mark.slow
def test_clpm_equals_our_own_pooled_least_squares(runs):
    frame, rec = runs("clpm")
    ours = least_squares(lagged(frame))
    for key, row in rows_of(rec).items():
        assert _close(row.mixed.estimate, ours[key], row.mixed.se, rel=1e-8), \
            f"{key}: long form {row.mixed.estimate!r} vs numpy {ours[key]!r}"
        assert _close(row.sem.estimate, ours[key], row.sem.se), \
            f"{key}: wide form {row.sem.estimate!r} vs numpy {ours[key]!r}"
    assert rec.data["long_rows"] == {"x": 2000, "y": 2000}   # 500 persons x 4 lagged waves


@pytest.mark.slow
def test_clpm_log_likelihoods_by_hand(runs):
    """With complete data the CLPM likelihood factors into the first wave times the lagged regressions."""
    frame, rec = runs("clpm")
    rows = lagged(frame)
    ours = least_squares(rows)
    n = len(rows)

    def normal(n_obs: int, cov: np.ndarray) -> float:  # maximised multivariate normal log-likelihood
        return -0.5 * n_obs * (cov.shape[0] * math.log(2 * math.pi) + math.log(np.linalg.det(cov)) + cov.shape[0])

    first = frame[frame["wave"] == 1][list(NAMES)].to_numpy()
    first_cov = np.cov(first, rowvar=False, bias=True)
    sigma = np.array([[ours["var.residual.x"], ours["cov.residual"]], [ours["cov.residual"], ours["var.residual.y"]]])
    wide = normal(len(first), first_cov) + normal(n, sigma)
    assert rec.log_likelihood["sem"] == pytest.approx(wide, rel=REFEREE)
    by_equation = {c["library"]: c["library_value"] for c in rec.referee_checks}
    for to in NAMES:
        own = normal(n, np.array([[ours[f"var.residual.{to}"]]]))
        assert by_equation[f"statsmodels ({to})"] == pytest.approx(own, rel=REFEREE)


@pytest.mark.slow
def test_clpm_wave_specific_equals_per_wave_regressions(runs):
    frame, rec = runs("clpm-wave")
    rows = rows_of(rec)
    all_rows = lagged(frame)
    waves = sorted(all_rows["wave"].unique())
    assert [float(w) for w in waves] == [2.0, 3.0, 4.0]
    expected = {f"{key}.wave{w:g}" for key in CLPM_KEYS for w in waves}
    assert set(rows) == expected
    for wave in waves:
        ours = least_squares(all_rows[all_rows["wave"] == wave])
        for key, value in ours.items():
            row = rows[f"{key}.wave{wave:g}"]
            assert _close(row.sem.estimate, value, row.sem.se), \
                f"{key} at wave {wave:g}: wide {row.sem.estimate!r} vs numpy {value!r}"
            assert _close(row.mixed.estimate, value, row.mixed.se, rel=1e-8)
    assert rec.verdict is Verdict.AGREE


# --- 3. dynamic panel: restricted wide form = MixedLM; relaxed form and initial conditions ---------------

def _explanation(rec, cause: str):
    found = [e for e in rec.explanations if e.cause == cause]
    assert found, f"no {cause!r} explanation; causes named: {[e.cause for e in rec.explanations]}"
    return found[0]


@pytest.mark.slow
@pytest.mark.parametrize("name", ["dynamic-panel", "dynamic-panel-plain"])
def test_dynamic_panel_restricted_form_equals_mixed_model(runs, name):
    """gap_after compares the restricted wide form with MixedLM (after any referee refit): the same likelihood."""
    _, rec = runs(name)
    rows = rows_of(rec)
    explanation = _explanation(rec, "initial-conditions")
    if name == "dynamic-panel":
        assert {k for k in rows if k.startswith(("auto.", "cross."))} <= set(explanation.quantities)
    for key in explanation.quantities:
        gap, mixed = explanation.gap_after[key], rows[key].mixed
        se = mixed.se if math.isfinite(mixed.se) else rows[key].sem.se   # MixedLM at the boundary has no SE
        assert abs(gap) <= max(EXACT * abs(mixed.estimate), EXACT * se), \
            f"{key}: restricted wide form and MixedLM differ by {gap!r} (mixed {mixed.estimate!r})"


@pytest.mark.slow
@pytest.mark.parametrize("name", ["dynamic-panel", "dynamic-panel-plain"])
def test_dynamic_panel_restricted_maximum_is_the_mixed_solution(runs, name):
    """The restricted wide maximum equals the wide likelihood of the MixedLM solution (user scale)."""
    _, rec = runs(name)
    details = _explanation(rec, "initial-conditions").details
    restricted = details["log_likelihood_restricted"]   # both on the user's scale
    assert restricted == pytest.approx(rec.log_likelihood["referee_at_mixed"], rel=REFEREE)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["dynamic-panel", "dynamic-panel-plain"])
def test_restricted_maximum_at_least_semopy_own_fit(runs, name):
    """Independent of any warm start: semopy's own fit of the restricted form does not beat the reported maximum."""
    from bridge.families.cross_lagged.model import compile_panel
    from bridge.fit.sem import run_semopy
    from bridge.referee.path import PathReferee

    _, rec = runs(name)
    compiled = compile_panel(rec.pair.panel)
    own = run_semopy(compiled.sem.text(), compiled.frame)
    own_ll = PathReferee(compiled.sem, compiled.frame.to_numpy()).log_likelihood(own.values)
    shift = compiled.log_shift(compiled.panel.observed_by_outcome())   # internal -> user scale
    reported = _explanation(rec, "initial-conditions").details["log_likelihood_restricted"] - shift
    assert reported >= own_ll - 1e-9 * abs(own_ll), (reported, own_ll)
    rows = rows_of(rec)
    for label, key in compiled.keys.items():   # semopy stops close to the mixed solution (1e-4: it stops short)
        if key.startswith(("auto.", "cross.")):
            assert compiled.to_user(label, own.values[label]) == pytest.approx(rows[key].mixed.estimate, rel=1e-4)


@pytest.mark.slow
def test_relaxed_form_recovers_autoregression_and_mixed_model_is_biased_upward(runs):
    """The person effect drives the first wave (Allison, Williams & Moral-Benito 2017)."""
    _, rec = runs("dynamic-panel")
    rows = rows_of(rec)
    for k, name in enumerate(NAMES):
        truth, row = TRUTHS["dynamic-panel"].paths[k][k], rows[f"auto.{name}"]
        assert abs(row.sem.estimate - truth) <= Z_LIMIT * row.sem.se, \
            f"relaxed auto.{name}: {row.sem.estimate:.4f} vs truth {truth} (SE {row.sem.se:.4f})"
        assert row.mixed.estimate - truth > Z_LIMIT * row.mixed.se, \
            f"mixed auto.{name}: {row.mixed.estimate:.4f} not biased upward from {truth} (SE {row.mixed.se:.4f})"
        assert "initial-conditions" in row.causes
    assert rec.verdict is not Verdict.UNEXPLAINED


@pytest.mark.slow
def test_initial_conditions_carries_the_likelihood_ratio_test(runs):
    _, rec = runs("dynamic-panel")
    details = _explanation(rec, "initial-conditions").details
    relaxed, restricted = details["log_likelihood_relaxed"], details["log_likelihood_restricted"]
    assert relaxed >= restricted
    assert details["statistic"] == pytest.approx(2.0 * (relaxed - restricted), rel=1e-9)
    # each person effect with each first-wave outcome, the two person effects, the two residuals within a wave
    assert details["df"] == len(NAMES) ** 2 + 2
    assert details["p_value"] == pytest.approx(chi2.sf(details["statistic"], details["df"]), rel=1e-9)
    assert details["p_value"] < 1e-3         # the data were built to violate the assumption
    assert relaxed == pytest.approx(rec.log_likelihood["sem"], rel=1e-12)   # both on the user's scale


# --- 4. RI-CLPM and Nickell's short-panel bias --------------------------------------------------------

@pytest.mark.slow
def test_short_panel_bias_is_a_note_beside_nickell(runs):
    """No refit can remove the RI-CLPM's difference from its long counterpart: a note, never a verdict change."""
    _, rec = runs("ri-clpm")
    rows = rows_of(rec)
    explanation = _explanation(rec, "short-panel-bias")
    periods = TRUTHS["ri-clpm"].n_waves - 1   # lagged occasions per person (Nickell's T)
    assert explanation.gap_after == {} and explanation.details["note"] is True
    for name in NAMES:
        key = f"auto.{name}"
        d, row = explanation.details[key], rows[key]
        assert d["predicted_bias"] == pytest.approx(nickell_bias(row.sem.estimate, periods), rel=1e-12)
        assert d["observed_gap"] == pytest.approx(row.mixed.estimate - row.sem.estimate, rel=1e-12)
        assert np.sign(d["predicted_bias"]) == np.sign(d["observed_gap"]) != 0   # downward, as predicted
    for row in rec.quantities:
        assert "short-panel-bias" not in row.causes
        assert row.verdict in (Verdict.AGREE, Verdict.UNEXPLAINED)
    assert rec.verdict is Verdict.UNEXPLAINED   # the two are different models: a frank result
    assert rec.exit_code == 3


@pytest.mark.slow
def test_corrupted_long_coefficients_are_never_explained(runs):
    """Issue 9: a long form pushed off by +0.5 on the cross-lagged paths stays unexplained (no fallback)."""
    from dataclasses import replace

    from bridge.families.cross_lagged.reconcile import panel_rows

    _, rec = runs("ri-clpm")
    solution = rec.solution
    labels = {key: label for label, key in rec.pair.keys.items()}
    bad = {**solution.long, **{labels[k]: solution.long[labels[k]] + 0.5 for k in ("cross.x.y", "cross.y.x")}}
    rows = {r.key: r for r in panel_rows(rec.pair, replace(solution, long=bad))}
    assert rows["cross.x.y"].verdict is Verdict.UNEXPLAINED and rows["cross.y.x"].verdict is Verdict.UNEXPLAINED


# Values worked by hand from Nickell (1981), Econometrica 49(6), eq. 18:
#   bias = -[(1 + r)/(T - 1)] A / [1 - 2 r A / ((1 - r)(T - 1))],  A = 1 - (1/T)(1 - r^T)/(1 - r).
# r = 0.5, T = 4:  A = 1 - (1/4)(15/16)/(1/2) = 17/32 = 0.53125;
#                  bias = -(1/2)(17/32) / (1 - (17/32)/(3/2)) = -(17/64)/(31/48) = -51/124 = -0.41129...
# r = -0.5, T = 3: A = 1 - (1/3)(9/8)/(3/2) = 3/4;  bias = -(1/4)(3/4) / (1 + (3/4)/3) = -3/20 = -0.15
# r = 0:           A = 1 - 1/T;  bias = -(1/(T - 1))(1 - 1/T) = -1/T
# T = 2, any r:    A = (1 - r)/2;  bias = -(1 + r)/2, so r = 0.5 gives -0.75
@pytest.mark.parametrize("r, periods, expected", [
    (0.5, 4, -51 / 124), (-0.5, 3, -3 / 20), (0.5, 2, -0.75), (0.0, 2, -1 / 2), (0.0, 4, -1 / 4),
    (0.0, 10, -1 / 10)])
def test_nickell_formula_against_hand_values(r, periods, expected):
    assert nickell_bias(r, periods) == pytest.approx(expected, rel=1e-12)


# Near a unit root both A and 1 - 2rA/((1 - r)(T - 1)) vanish; the ratio tends to -3/(T + 1) (the limit of
# eq. 18 as r -> 1, worked by hand; T = 4 gives -0.6). Exact rational arithmetic at r = 0.999999, T = 4 gives
# -0.5999996, so 1e-5 relative to the limit is a fair bound there.
@pytest.mark.parametrize("r", [0.999999, 1.0])
def test_nickell_formula_is_stable_near_a_unit_root(r):
    assert nickell_bias(r, 4) == pytest.approx(-3 / 5, rel=1e-5)


@pytest.mark.parametrize("periods", [1, 0])
def test_nickell_needs_two_periods(periods):
    with pytest.raises(ValueError):
        nickell_bias(0.5, periods)


# --- 5. missing waves ---------------------------------------------------------------------------------

@pytest.mark.slow
def test_missing_waves_cost_the_long_form_rows_not_the_wide_form(runs):
    frame, rec = runs("missing")
    truth = TRUTHS["missing"]
    observed = int(frame[list(NAMES)].notna().to_numpy().sum())
    assert 0.10 <= 1 - observed / (truth.n_persons * truth.n_waves * len(NAMES)) <= 0.15
    # our own count of lagged rows: the outcome now and both outcomes at the previous wave observed
    grid = frame.set_index(["person", "wave"])[list(NAMES)].unstack("wave")
    waves = [float(w) for w in range(1, truth.n_waves + 1)]
    seen = {name: grid[name].reindex(columns=waves).notna().to_numpy() for name in NAMES}
    both = seen["x"] & seen["y"]
    ours = {name: int((seen[name][:, 1:] & both[:, :-1]).sum()) for name in NAMES}
    complete = int(both.all(axis=1).sum())
    assert rec.data["long_rows"] == ours
    assert all(v < truth.n_persons * (truth.n_waves - 1) for v in ours.values())
    assert rec.data["values_used"] == rec.data["values_read"] == observed   # the wide form keeps them all
    assert rec.data["occasions_used"] == int(frame[list(NAMES)].notna().any(axis=1).sum())
    assert rec.data["persons_used"] == truth.n_persons
    explanation = _explanation(rec, "missing-data")
    assert explanation.details["sem_values"] == observed
    assert explanation.details["long_rows"] == ours
    assert explanation.details["complete_persons"] == complete
    rows = rows_of(rec)
    for key in explanation.quantities:  # on persons observed at every wave the two forms agree (CLPM is exact)
        assert abs(explanation.gap_after[key]) <= 0.05 * min(rows[key].sem.se, rows[key].mixed.se)
    for row in rec.quantities:
        assert row.verdict is Verdict.AGREE or "missing-data" in row.causes, row.key
    assert rec.verdict is not Verdict.UNEXPLAINED


# --- 6. the referee ----------------------------------------------------------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("name", list(TRUTHS))
def test_referee_reproduces_library_log_likelihoods(runs, name):
    _, rec = runs(name)
    libraries = [c["library"] for c in rec.referee_checks]
    assert libraries == ["semopy", "statsmodels (x)", "statsmodels (y)"]
    for check in rec.referee_checks:
        lib, ref = check["library_value"], check["referee_value"]
        assert math.isfinite(lib) and math.isfinite(ref)
        assert abs(lib - ref) / max(1.0, abs(lib)) <= REFEREE, check
        assert check["relative_difference"] <= REFEREE
    assert rec.log_likelihood["referee_at_sem"] == pytest.approx(rec.log_likelihood["sem"], rel=REFEREE)


# --- 7. bad input through the command line -----------------------------------------------------------

def _small(n_waves: int = 4, n_persons: int = 20) -> pd.DataFrame:
    rng = np.random.default_rng(0)
    return pd.DataFrame({"person": np.repeat([f"p{i}" for i in range(n_persons)], n_waves),
                         "wave": np.tile(np.arange(1, n_waves + 1), n_persons),
                         "x": rng.normal(size=n_persons * n_waves).round(3),
                         "y": rng.normal(size=n_persons * n_waves).round(3)})


def _interleaved() -> pd.DataFrame:
    frame = _small(n_waves=6)
    frame.loc[frame["wave"] % 2 == 0, "x"] = np.nan   # x only at odd waves
    frame.loc[frame["wave"] % 2 == 1, "y"] = np.nan   # y only at even waves
    return frame


def _split_persons() -> pd.DataFrame:
    frame = _small()
    first_half = frame["person"].str[1:].astype(int) < 10
    frame.loc[first_half, "y"] = np.nan              # half the persons have only x, the others only y
    frame.loc[~first_half, "x"] = np.nan
    return frame


def _text_outcome() -> pd.DataFrame:
    frame = _small().astype({"y": object})
    frame.loc[5, "y"] = "high"
    return frame


def _wide_single() -> tuple[pd.DataFrame, dict]:
    wide = _small().pivot(index="person", columns="wave", values="x")
    wide.columns = [f"x{w}" for w in wide.columns]
    desc = {"data": {"layout": "wide", "person": "person", "columns": {"x": {c: int(c[1:]) for c in wide.columns}}},
            "model": {"kind": "cross-lagged", "variant": "clpm"}}
    return wide.reset_index(), desc


def _single_outcome() -> tuple[pd.DataFrame, dict]:
    desc = description("clpm")
    desc["data"]["outcomes"] = ["x"]
    return _small(), desc


BAD = {
    "single-outcome": (_single_outcome,
                       r"data\.outcomes \(line \d+\): expected a list of at least two different outcome columns "
                       r"for a cross-lagged model, found \['x'\]"),
    "single-outcome-wide": (_wide_single, r"data\.columns.*at least two outcomes"),
    "two-waves": (lambda: (_small(n_waves=2), description("clpm")), r"needs at least 3 waves, found 2"),
    "interleaved-waves": (lambda: (_interleaved(), description("clpm")), r"do not overlap"),
    "no-person-with-both": (lambda: (_split_persons(), description("clpm")),
                            r"no person has all outcomes observed; the waves of the outcomes do not overlap"),
    "text-outcome": (lambda: (_text_outcome(), description("clpm")),
                     r"outcome column 'y' is not numeric \(found 'high'\)"),
}


@pytest.fixture(scope="module")
def bad_runs(tmp_path_factory):
    """Every bad-input case through the real entry point, started at once on a small thread pool."""
    def launch(name: str) -> subprocess.CompletedProcess:
        frame, desc = BAD[name][0]()
        spec = write_case(tmp_path_factory.mktemp(name), frame, desc)
        return subprocess.run([*CLI, spec.name], cwd=spec.parent, capture_output=True, text=True, timeout=240)
    with ThreadPoolExecutor(max_workers=3) as pool:
        return dict(zip(BAD, pool.map(launch, BAD)))


@pytest.mark.parametrize("name", list(BAD))
def test_bad_input_is_one_line_and_exit_code_2(bad_runs, name):
    done = bad_runs[name]
    lines = done.stderr.strip().splitlines()
    assert done.returncode == 2, (done.returncode, done.stderr)
    assert "Traceback" not in done.stderr
    assert len(lines) == 1, done.stderr
    assert re.search(BAD[name][1], lines[0]), lines[0]
    assert lines[0].startswith("sembridge: ")


# --- 8. JSON ------------------------------------------------------------------------------------------

@pytest.mark.slow
def test_json_keys_and_round_trip_for_clpm(runs):
    _, rec = runs("clpm")
    out = bridge.to_dict(rec)
    assert {q["key"] for q in out["quantities"]} == CLPM_KEYS
    text = json.dumps(out, allow_nan=False)
    assert json.loads(text) == out
    for q in out["quantities"]:
        for side in ("sem", "mixed"):
            assert isinstance(q[side]["estimate"], float) and isinstance(q[side]["se"], float)


@pytest.mark.slow
@pytest.mark.parametrize("name, expected", [
    ("clpm-wave", {f"{k}.wave{w}" for k in CLPM_KEYS for w in (2, 3, 4)}),
    ("dynamic-panel", CLPM_KEYS | {"var.trait.x", "var.trait.y", "cov.trait"}),
    ("ri-clpm", (CLPM_KEYS - {"intercept.x", "intercept.y"}) | {"var.trait.x", "var.trait.y", "cov.trait"}),
])
def test_json_keys_and_round_trip_other_variants(runs, name, expected):
    _, rec = runs(name)
    out = bridge.to_dict(rec)
    assert {q["key"] for q in out["quantities"]} == expected
    assert json.loads(json.dumps(out, allow_nan=False)) == out


@pytest.mark.parametrize("variant", ["dynamic-panel", "ri-clpm"])
def test_wave_specific_paths_are_refused_where_the_long_form_has_no_counterpart(tmp_path, variant):
    spec = tmp_path / "model.yaml"
    spec.write_text(yaml.safe_dump({"data": {"path": "weekly.csv", "person": "person", "time": "wave",
                                             "outcomes": ["x", "y"]},
                                    "model": {"kind": "cross-lagged", "variant": variant, "paths": "wave-specific"}}),
                    encoding="utf-8")
    with pytest.raises(bridge.DescriptionError, match=rf"model.paths \(line \d+\): expected time-invariant for the "
                                                      rf"{variant} variant"):
        bridge.load(spec)
