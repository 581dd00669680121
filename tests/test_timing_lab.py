"""The timing lab: timing summary, rounding experiment, Monte Carlo study, their commands.

All data are simulated with fixed seeds (bridge.simulate.simulate_growth); the seeds and
population values are stated beside each check.
"""
from __future__ import annotations

import hashlib
import importlib.util
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml
from typer.testing import CliRunner

import bridge.data.shaping
from bridge.cli import app
from bridge.data.timing import Design
from bridge.demo import make_demo
from bridge.demo.files import GROWTH_POPULATION
from bridge.errors import DescriptionError
from bridge.reconcile.tolerance import DEFAULT_TOLERANCE
from bridge.simulate.growth import GrowthTruth, simulate_growth
from bridge.spec import load
from bridge.timing import inspect_file
from bridge.timing.experiment import Limits, run_experiment
from bridge.timing.montecarlo import replication_seeds, run_replications
from bridge.timing.population import load_population
from bridge.timing.summary import coverage_band, replications_frame, summarise

ROOT = Path(__file__).resolve().parents[1]
DESCRIPTION = {"data": {"path": "simulated.csv", "layout": "long", "person": "person", "time": "time",
                        "outcome": "outcome"},
               "model": {"random": ["intercept", "slope"]},
               "estimation": {"waves": [0, 1, 2, 3, 4]}}
runner = CliRunner()


def spec_file(folder: Path, description: dict = DESCRIPTION, name: str = "model.yaml") -> Path:
    path = folder / name
    path.write_text(yaml.safe_dump(description, sort_keys=False), encoding="utf-8")
    return path


def population_file(folder: Path, design: dict, truth: dict, name: str = "population.yaml") -> Path:
    path = folder / name
    path.write_text(yaml.safe_dump({"design": design, "truth": truth}, sort_keys=False), encoding="utf-8")
    return path


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# --- the rounding experiment -------------------------------------------------------------------------------

# Steep, diverse slopes and a small residual variance, so rounding error in time is large against the residual.
STEEP = dict(n_persons=100, waves=(0, 1, 2, 3, 4), mean={"intercept": 20.0, "slope": 5.0},
             random_cov=((9.0, 0.5), (0.5, 4.0)), residual=1.0, missing_rate=0.1)


def test_zero_jitter_gives_zero_deviation_at_every_resolution(tmp_path):
    # Times exactly on the waves (jitter 0, seed 31): no grid moves any occasion, so the wide form equals the
    # exact-time mixed model at every level, to optimiser tolerance.
    frame = simulate_growth(GrowthTruth(**STEEP, jitter=0.0), 31)
    experiment = run_experiment(load(spec_file(tmp_path)), Limits(max_levels=2), frame=frame)
    assert [f.grid.level for f in experiment.fits] == [0, 1, 2]
    for fit in experiment.fits:
        assert fit.grid.columns == 5 and fit.grid.displacement_max == 0
        for key, deviation in fit.deviation.items():
            se = experiment.exact_se[key]
            allowed = DEFAULT_TOLERANCE.allowed_gap(fit.sem[key], experiment.exact[key], se, se)
            assert abs(deviation) <= allowed, (fit.grid.level, key, deviation, allowed)


def test_jitter_inflates_the_residual_variance_less_on_finer_grids(tmp_path):
    # Times up to 0.24 either side of waves 0..4 (uniform jitter, seed 7, 100 persons, 10% missing occasions).
    # Rounding onto the waves adds the time error times the slope to the residual, so the wide form's residual
    # variance exceeds the exact-time value at the design grid, and the excess shrinks as the grid gets finer.
    frame = simulate_growth(GrowthTruth(**STEEP, jitter=0.24), 7)
    experiment = run_experiment(load(spec_file(tmp_path)), Limits(max_levels=3), frame=frame)
    assert [f.grid.level for f in experiment.fits] == [0, 1, 2, 3]
    assert experiment.fits[1].same_as == 0  # jitter below a quarter gap: the half-spacing grid moves nothing
    refitted = [f for f in experiment.fits if f.same_as is None]
    excess = [f.deviation["var.residual"] for f in refitted]
    moved = [f.grid.displacement_mean for f in refitted]
    assert excess[0] > 0.1
    assert all(b < a for a, b in zip(excess, excess[1:])), excess
    assert all(b < a for a, b in zip(moved, moved[1:])), moved
    assert [f.grid.columns for f in refitted] == sorted(f.grid.columns for f in refitted)
    assert "reached the last level (3)" in experiment.stopped


@pytest.mark.parametrize("jitter,limits,levels,stopped", [
    (0.2, Limits(max_columns=10), [0, 1], "level 2 would need 15 wide columns (more than 10)"),
    (0.2, Limits(max_patterns=20), [0, 1], "level 2 would have 36 missing-data patterns (more than 20)"),
    (0.3, Limits(), [0], "level 1 would put two occasions of 1 person(s) on one wide column"),
])
def test_experiment_stops_before_an_impractical_grid(tmp_path, jitter, limits, levels, stopped):
    # 40 persons, seed 5. Jitter 0.3 exceeds a quarter of the gap: the half-spacing grid's midpoints collect
    # occasions from both neighbouring waves, and one person has two occasions on one midpoint.
    frame = simulate_growth(GrowthTruth(**{**STEEP, "n_persons": 40}, jitter=jitter), 5)
    experiment = run_experiment(load(spec_file(tmp_path)), limits, frame=frame)
    assert [f.grid.level for f in experiment.fits] == levels
    assert experiment.stopped == stopped


# --- the timing summary ------------------------------------------------------------------------------------

def intensive_file(folder: Path) -> Path:
    """200 persons x 150 occasions at random times in [0, 100) (seed 3)."""
    rng = np.random.default_rng(3)
    times = np.sort(rng.uniform(0, 100, size=(200, 150)), axis=1)
    frame = pd.DataFrame({"id": np.repeat([f"s{i:03d}" for i in range(200)], 150), "day": times.ravel(),
                          "mood": rng.normal(size=30000)})
    path = folder / "diary.csv"
    frame.to_csv(path, index=False)
    return path


def test_intensive_design_is_summarised_without_a_wide_matrix(tmp_path, monkeypatch):
    path = intensive_file(tmp_path)

    def refuse(*args, **kwargs):
        raise AssertionError("a person-by-time matrix was built")
    monkeypatch.setattr(bridge.data.shaping, "long_to_wide", refuse)
    for name in ("pivot", "pivot_table", "unstack"):
        monkeypatch.setattr(pd.DataFrame, name, refuse)
    monkeypatch.setattr(pd.Series, "unstack", refuse)
    report = inspect_file(path, "id", "day")
    assert report.timing.design is Design.INDIVIDUALLY_VARYING
    assert (report.timing.n_persons, report.timing.n_occasions) == (200, 30000)
    assert report.exact_columns == report.timing.n_distinct_times > 29000
    assert report.occasions_per_person == (150, 150.0, 150)
    assert report.recommendation.framework == "mixed model"
    assert report.recommendation.reason.startswith("An intensive design")
    result = runner.invoke(app, ["timing", str(path), "--person", "id", "--time", "day"])
    assert result.exit_code == 0, result.output
    assert "Design: individually-varying" in result.output


def test_balanced_design_is_either_framework(tmp_path):
    frame = simulate_growth(GrowthTruth(**{**STEEP, "missing_rate": 0.0}), 2)
    frame.to_csv(tmp_path / "b.csv", index=False)
    report = inspect_file(tmp_path / "b.csv", "person", "time", (0, 1, 2, 3, 4))
    assert report.timing.design is Design.BALANCED and report.recommendation.framework == "either"
    assert report.grid_patterns == 1 and report.timing.displacement_max == 0
    assert [s.n for s in report.spread] == [100] * 5


def test_timing_json_is_the_python_report(tmp_path):
    frame = simulate_growth(GrowthTruth(**STEEP, jitter=0.2), 4)
    frame.to_csv(tmp_path / "j.csv", index=False)
    result = runner.invoke(app, ["timing", str(tmp_path / "j.csv"), "--person", "person", "--time", "time",
                                 "--waves", "0,1,2,3,4", "--json", "-"])
    assert result.exit_code == 0, result.output
    expected = inspect_file(tmp_path / "j.csv", "person", "time", (0, 1, 2, 3, 4)).to_dict()
    assert json.loads(result.output) == json.loads(json.dumps(expected))
    assert expected["design"] == "individually-varying" and expected["displacement"]["max"] <= 0.2


@pytest.mark.parametrize("args,message", [
    (["--person", "pupil", "--time", "time"], "unknown column 'pupil' named by --person"),
    (["--person", "person", "--time", "when"], "unknown column 'when' named by --time"),
    (["--person", "person", "--time", "label"], "time column 'label' is not numeric"),
    (["--person", "person", "--time", "time", "--waves", "0,2,1"], "strictly increasing"),
    (["--person", "person", "--time", "time", "--waves", "0,x,2"], "'x' is not a number"),
])
def test_timing_bad_input_is_one_line_and_exit_2(tmp_path, args, message):
    frame = simulate_growth(GrowthTruth(**{**STEEP, "n_persons": 10}), 1).assign(label="a")
    path = tmp_path / "bad.csv"
    frame.to_csv(path, index=False)
    before = digest(path)
    result = runner.invoke(app, ["timing", str(path), *args])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and message in lines[0]
    assert digest(path) == before


def test_timing_refuses_to_write_over_its_input(tmp_path):
    path = tmp_path / "d.csv"
    simulate_growth(GrowthTruth(**{**STEEP, "n_persons": 10}), 1).to_csv(path, index=False)
    before = digest(path)
    result = runner.invoke(app, ["timing", str(path), "--person", "person", "--time", "time", "--json", str(path)])
    assert result.exit_code == 2 and "is an input file" in result.stderr
    assert digest(path) == before


# --- the Monte Carlo study ---------------------------------------------------------------------------------

SMALL_DESIGN = {"persons": 60, "waves": [0, 1, 2, 3, 4], "missing_rate": 0.1, "jitter": 0.2}
TRUTH = {"mean.intercept": 50, "mean.slope": 2, "var.intercept": 25, "var.slope": 1, "cov.intercept.slope": 1.5,
         "var.residual": 4}


def test_seeds_come_from_a_seed_sequence():
    assert replication_seeds(9, 3) == [int(c.generate_state(1, np.uint32)[0])
                                       for c in np.random.SeedSequence(9).spawn(3)]
    assert replication_seeds(9, 5)[:3] == replication_seeds(9, 3)


def test_same_seed_same_results_with_1_and_2_workers_and_dask(tmp_path):
    from dask.distributed import LocalCluster

    desc = load(spec_file(tmp_path))
    population = load_population(population_file(tmp_path, SMALL_DESIGN, TRUTH), desc)
    one = replications_frame(run_replications(desc, population, 4, seed=123, workers=1)).drop(columns="seconds")
    two = replications_frame(run_replications(desc, population, 4, seed=123, workers=2)).drop(columns="seconds")
    with LocalCluster(n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None) as cluster:
        on_dask = run_replications(desc, population, 4, seed=123, scheduler=cluster.scheduler_address)
    on_dask = replications_frame(on_dask).drop(columns="seconds")
    assert len(one) == 4 * 6 * 2 and (one["error"].isna() | (one["error"] == "")).all()
    pd.testing.assert_frame_equal(one, two, check_exact=True)
    pd.testing.assert_frame_equal(one, on_dask, check_exact=True)
    other = replications_frame(run_replications(desc, population, 1, seed=124)).drop(columns="seconds")
    assert other["estimate"].iloc[0] != one["estimate"].iloc[0]


def test_reduced_coverage_on_a_balanced_design(tmp_path):
    # The CI-sized version of the heavy run below: balanced design (no jitter, no missing occasions),
    # 100 persons, 40 replications, seed 2024. Coverage must fall in the exact binomial band for 40 intervals.
    design = {"persons": 100, "waves": [0, 1, 2, 3, 4], "missing_rate": 0.0, "jitter": 0.0}
    desc = load(spec_file(tmp_path))
    population = load_population(population_file(tmp_path, design, TRUTH), desc)
    reps = run_replications(desc, population, 40, seed=2024, workers=2)
    summary = summarise(reps, "model.yaml", "population.yaml", 2024)
    band = coverage_band(40)
    assert (band.low, band.high) == (0.875, 1.0)
    for framework in ("sem", "mixed"):
        row = summary.row("mean.slope", framework)
        assert row.used == 40 and row.convergence == 1.0
        assert band.low <= row.coverage <= band.high
        assert abs(row.bias) <= 3 * row.bias_mcse
    assert summary.verdicts["agree"] == 40  # balanced: the two frameworks are the same model


def test_coverage_band_is_the_binomial_range():
    band = coverage_band(200)
    assert (band.low, band.high) == (0.92, 0.98)


@pytest.mark.heavy
def test_full_coverage_run():
    """N = 300, 200 replications, balanced design: mean-slope coverage in [0.91, 0.98] in both frameworks."""
    spec = importlib.util.spec_from_file_location("coverage_run", ROOT / "benchmarks" / "coverage_run.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    summary, _ = module.coverage_study(persons=300, replications=200)
    assert module.passes(summary), [(f, summary.row("mean.slope", f).coverage) for f in ("sem", "mixed")]


@pytest.mark.parametrize("truth,design,message", [
    ({**TRUTH, "var.quadratic": 1}, SMALL_DESIGN, "'truth.var.quadratic': not a quantity of this description"),
    ({k: v for k, v in TRUTH.items() if k != "var.residual"}, SMALL_DESIGN, "'truth.var.residual': required"),
    ({**TRUTH, "mean.slope": "fast"}, SMALL_DESIGN, "'truth.mean.slope': expected a finite number"),
    (TRUTH, {**SMALL_DESIGN, "cohorts": 2}, "'design.cohorts': unknown key"),
    (TRUTH, {**SMALL_DESIGN, "jitter": 0.6}, "jitter must be smaller than half the smallest gap"),
])
def test_population_problems_are_reported(tmp_path, truth, design, message):
    desc = load(spec_file(tmp_path))
    with pytest.raises(DescriptionError, match=message):
        load_population(population_file(tmp_path, design, truth), desc)


def test_binary_predictor_effects_use_the_reconciler_keys(tmp_path):
    description = {**DESCRIPTION, "model": {"random": ["intercept", "slope"], "predictors": ["format"]}}
    desc = load(spec_file(tmp_path, description))
    design = {**SMALL_DESIGN, "predictors": {"format": "binary:group,private"}}
    population = load_population(population_file(tmp_path, design, {**TRUTH, "effect.format.slope": 0.5}), desc)
    assert population.values["effect.format[private].slope"] == 0.5
    assert population.values["effect.format[private].intercept"] == 0.0
    flipped = {**design, "predictors": {"format": "binary:private,group"}}
    with pytest.raises(DescriptionError, match="reference level of 'format' is 'group'; list it first"):
        load_population(population_file(tmp_path, flipped, TRUTH), desc)


def test_demo_population_is_the_demo_truth(tmp_path):
    desc = load(ROOT / "bridge" / "demo" / "sight_reading.yaml")
    population = load_population(GROWTH_POPULATION, desc)
    assert population.truth == make_demo.TRUTH


def test_simulate_command_writes_results_and_keeps_inputs(tmp_path):
    spec = spec_file(tmp_path)
    population = population_file(tmp_path, {**SMALL_DESIGN, "persons": 40}, TRUTH)
    before = (digest(spec), digest(population))
    out = tmp_path / "study"
    result = runner.invoke(app, ["simulate", str(spec), "--population", str(population), "--replications", "2",
                                 "--seed", "5", "--out", str(out), "--csv"])
    assert result.exit_code == 0, result.output
    assert {p.name for p in out.iterdir()} == {"replications.csv", "summary.md", "summary.csv", "summary.json",
                                               "summary.png", ".sembridge-manifest.json"}   # bridge/outputs.py
    raw = pd.read_csv(out / "replications.csv")
    assert sorted(raw["replication"].unique()) == [0, 1] and set(raw["framework"]) == {"sem", "mixed"}
    saved = json.loads((out / "summary.json").read_text())
    assert saved["replications"] == 2 and saved["seed"] == 5
    assert "| mean.slope | wide (SEM) |" in (out / "summary.md").read_text()
    assert (digest(spec), digest(population)) == before


def test_simulate_bad_population_is_one_line(tmp_path):
    spec = spec_file(tmp_path)
    population = population_file(tmp_path, SMALL_DESIGN, {**TRUTH, "var.residual": -1})
    result = runner.invoke(app, ["simulate", str(spec), "--population", str(population), "--replications", "2",
                                 "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1 and "residual variances must be finite and non-negative" \
        in result.stderr


def test_simulate_unreachable_scheduler_is_bad_input(tmp_path, monkeypatch):
    import bridge.timing.montecarlo as montecarlo

    monkeypatch.setattr(montecarlo, "SCHEDULER_TIMEOUT", "2s")
    spec, population = spec_file(tmp_path), population_file(tmp_path, SMALL_DESIGN, TRUTH)
    result = runner.invoke(app, ["simulate", str(spec), "--population", str(population), "--replications", "1",
                                 "--scheduler", "tcp://127.0.0.1:9", "--out", str(tmp_path / "o")])
    assert result.exit_code == 2 and "cannot reach the Dask scheduler at tcp://127.0.0.1:9" in result.stderr


def test_tutorial_shows_the_demo_population_file():
    page = (ROOT / "docs" / "timing-lab.md").read_text(encoding="utf-8")
    assert GROWTH_POPULATION.read_text(encoding="utf-8").rstrip() in page


@pytest.mark.parametrize("spec,message", [
    (ROOT / "bridge" / "demo" / "weekly_practice.yaml", "the rounding experiment is for growth models"),
    (Path("missing.yaml"), "missing.yaml"),
])
def test_rounding_bad_input_is_one_line_and_exit_2(spec, message):
    result = runner.invoke(app, ["rounding", str(spec), "--quiet"])
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1 and message in result.stderr


def test_simulate_shows_a_progress_bar_on_a_terminal(tmp_path):
    import os
    import pty
    import select
    import subprocess
    import sys

    spec = spec_file(tmp_path)
    population = population_file(tmp_path, {**SMALL_DESIGN, "persons": 30, "jitter": 0.0}, TRUTH)
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "bridge.cli", "simulate", str(spec), "--population",
                             str(population), "--replications", "2", "--out", str(tmp_path / "o")],
                            stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=slave, cwd=tmp_path,
                            env={**os.environ, "PYTHONPATH": str(ROOT), "COLUMNS": "120"})
    os.close(slave)
    chunks = []
    while True:
        ready, _, _ = select.select([master], [], [], 0.5)
        if ready:
            try:
                data = os.read(master, 4096)
            except OSError:
                break
            if not data:
                break
            chunks.append(data)
        elif proc.poll() is not None:
            break
    stdout, _ = proc.communicate(timeout=300)
    os.close(master)
    shown = b"".join(chunks).decode("utf-8", "replace")
    assert proc.returncode == 0
    assert "replications" in shown and "2/2" in shown and "left" in shown
    assert "2/2" not in stdout.decode()  # results on standard output, progress on the terminal's stderr


def test_experiment_uses_one_residual_variance(tmp_path):
    frame = simulate_growth(GrowthTruth(**{**STEEP, "n_persons": 40}, jitter=0.2), 5)
    description = {**DESCRIPTION, "model": {"random": ["intercept", "slope"], "residuals": "per-wave"}}
    experiment = run_experiment(load(spec_file(tmp_path, description)), Limits(max_levels=0), frame=frame)
    assert "var.residual" in experiment.exact and not any(k.startswith("var.residual.") for k in experiment.keys)


@pytest.mark.parametrize("n,covered,position", [(40, 36, "inside"), (40, 34, "below"), (40, 40, "inside"),
                                                (200, 199, "above"), (200, 183, "below")])
def test_coverage_band_is_said_in_words(n, covered, position):
    # The central 95% of Binomial(n, 0.95) / n (Morris, White & Crowther 2019): [0.875, 1.000] for 40
    # intervals and [0.920, 0.980] for 200 (exact binomial quantiles, scipy.stats.binom.ppf)
    from bridge.render.simulation import markdown_table, terminal_table
    from bridge.timing.summary import QuantitySummary, SimulationSummary
    from rich.console import Console

    band = coverage_band(n)
    rows = tuple(QuantitySummary("mean.slope", form, 1.0, n, 1.0, 0.0, 0.01, 0.1, 0.1, 0.1, covered / n, band,
                                 1.0, 1.0) for form in ("sem", "mixed"))
    summary = SimulationSummary("d", "p", n, 1, rows, {"agree": n, "explained": 0, "unexplained": 0, "failed": 0},
                                {"sem": 1.0, "mixed": 1.0}, 1.0)
    assert rows[0].band_position == position
    shown = {40: "[0.875, 1.000]", 200: "[0.920, 0.980]"}[n]
    assert f"| {covered / n:.3f} | {shown} | {position} |" in markdown_table(summary)
    for width in (200, 80):
        console = Console(width=width, record=True)
        console.print(terminal_table(summary))
        text = console.export_text()
        assert position in text and "*" not in text
