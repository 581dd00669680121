"""Figures and tables of the cross-lagged family: the graph from the path model's statements, golden DOT,
the standardised paths, the long lagged-regression table, and one small report end to end.

The graphs, golden files, standardised paths and tables use fixed synthetic estimates (no optimiser);
only the last tests fit a small CLPM (120 persons, 4 waves, a few seconds). Rewrite the golden files
after a deliberate change with SEMBRIDGE_UPDATE_GOLDEN=1 and review the diff.
"""
from __future__ import annotations

import csv
import io
import json
import math
import subprocess
import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from conftest import assert_matches_golden
from scipy.stats import norm

import bridge
from bridge.compile.graph import CONSTANT, EdgeKind, NodeKind, model_graph
from bridge.pipeline import compile_cross_lagged
from bridge.reconcile import Estimate
from bridge.families.cross_lagged.lagged_summary import lagged_summary
from bridge.families.cross_lagged.fit import PanelSolution
from bridge.families.cross_lagged.standardised import standardised_paths
from bridge.reconcile.summary import report_content
from bridge.render import diagram, tables
from bridge.render.report import report_files
from bridge.render.standardised import standardised_files
from bridge.simulate.panel import PanelTruth, simulate_panel

GOLDEN = Path(__file__).parent / "golden"
NAMES = ("practice", "confidence")


def weekly_frame() -> pd.DataFrame:
    """Six students at four weeks; values are arbitrary but fixed (one confidence report missing)."""
    rows = []
    for i in range(6):
        for week in (1, 2, 3, 4):
            rows.append({"student": f"s{i}", "week": week, "practice": 30 + 5 * i + 3 * week + (i * week) % 4,
                         "confidence": 4 + 0.5 * i + 0.25 * week + ((i + week) % 3) * 0.5})
    frame = pd.DataFrame(rows)
    frame.loc[5, "confidence"] = np.nan
    return frame


def description(variant: str, paths: str = "time-invariant", outcomes=NAMES) -> dict:
    return {"data": {"layout": "long", "person": "student", "time": "week", "outcomes": list(outcomes)},
            "model": {"kind": "cross-lagged", "variant": variant, "paths": paths},
            "estimation": {"method": "ml", "missing": "full-information"}}


def compiled(case, variant: str, paths: str = "time-invariant", frame=None, outcomes=NAMES):
    frame = weekly_frame() if frame is None else frame
    return compile_cross_lagged(case(frame, description(variant, paths, outcomes), f"{variant}-{paths}"))


def synthetic_estimates(graph) -> dict[str, Estimate]:
    """Fixed numbers for every free path, in key order: 0.5, 0.55, ... with SEs 0.05, 0.051, ..."""
    keys = sorted({d["quantity"] for _, _, d in graph.edges(data=True) if d["quantity"]})
    return {key: Estimate(0.5 + 0.05 * i, 0.05 + 0.001 * i) for i, key in enumerate(keys)}


def synthetic_solution(model, labels) -> PanelSolution:
    """A fitted-looking solution with fixed numbers: label i gets 0.1 * (i + 1) (wide) and 0.9 times it (long)."""
    wide = {label: 0.1 * (i + 1) for i, label in enumerate(labels)}
    return PanelSolution(model=model, wide=wide, wide_se={k: 0.02 for k in wide},
                         long={k: 0.9 * v for k, v in wide.items()}, long_se={k: 0.03 for k in wide},
                         rows=(17, 18), log_likelihood=(-41.5, -12.25), person_intercept=False)


# ------------------------------------------------------------------------------------------ the graph

@pytest.mark.parametrize("variant,paths", [("clpm", "time-invariant"), ("clpm", "wave-specific"),
                                           ("dynamic-panel", "time-invariant"), ("ri-clpm", "time-invariant")])
def test_every_statement_is_one_edge_and_every_key_is_drawn(case, variant, paths):
    model = compiled(case, variant, paths)
    fitted = model.relaxed or model.sem
    graph = model_graph(model, fitted)
    assert graph.graph["family"] == "cross-lagged" and graph.number_of_edges() == len(fitted.statements)
    free = {d["quantity"] for _, _, d in graph.edges(data=True) if d["quantity"]}
    assert set(model.keys.values()) <= free
    for tail, head, data in graph.edges(data=True):
        assert (data["quantity"] is None) != (data["fixed"] is None), (tail, head, data)
        if data["kind"] is EdgeKind.REGRESSION:
            assert data["quantity"].startswith(("auto.", "cross."))
            assert graph.nodes[head]["column"] == graph.nodes[tail]["column"] + 1   # lag of one wave
        if data["kind"] is EdgeKind.LOADING:
            assert data["fixed"] == 1.0


def test_clpm_draws_one_row_of_waves_per_outcome_in_time_order(case):
    graph = model_graph(compiled(case, "clpm"))
    rows = {}
    for name, data in graph.nodes(data=True):
        if data["kind"] is NodeKind.OBSERVED:
            rows.setdefault(data["row"], []).append((data["column"], data["time"], data["label"][0]))
    assert len(rows) == 2
    for row in rows.values():
        assert [c for c, _, _ in sorted(row)] == [0, 1, 2, 3] and [t for _, t, _ in sorted(row)] == [1, 2, 3, 4]
    assert [sorted(row)[0][2] for _, row in sorted(rows.items())] == list(NAMES)
    assert graph.edges["v0_0", "v0_1", "regression"]["quantity"] == "auto.practice"
    assert graph.edges["v1_2", "v0_3", "regression"]["quantity"] == "cross.confidence.practice"
    assert graph.edges["v0_2", "v1_2", "covariance"]["quantity"] == "cov.residual"
    assert graph.edges[CONSTANT, "v1_3", "mean"]["quantity"] == "intercept.confidence"
    assert graph.edges[CONSTANT, "v0_0", "mean"]["quantity"] == "mean.practice.wave1"
    assert graph.edges["v1_0", "v1_0", "variance"]["quantity"] == "var.confidence.wave1"
    assert graph.edges["v1_3", "v1_3", "residual"]["quantity"] == "var.residual.confidence"


def test_ri_clpm_within_rows_lie_between_the_observed_rows_and_traits_outside(case):
    graph = model_graph(compiled(case, "ri-clpm"))
    row = {name: data["row"] for name, data in graph.nodes(data=True)}
    assert row["k0"] < row["v0_0"] < row["w0_0"] < row["w1_0"] < row["v1_0"] < row["k1"]
    assert graph.nodes["w1_2"]["kind"] is NodeKind.LATENT and graph.nodes["w1_2"]["label"] == \
        ("confidence, within", "week 3")
    assert graph.edges["w0_1", "w1_2", "regression"]["quantity"] == "cross.practice.confidence"
    assert graph.edges["k1", "v1_3", "loading"]["fixed"] == 1.0
    assert graph.edges["k0", "k1", "covariance"]["quantity"] == "cov.trait"
    assert graph.edges["k0", "w1_0", "covariance"]["fixed"] == 0.0    # traits unrelated to the first wave
    assert graph.edges[CONSTANT, "v1_2", "mean"]["quantity"] == "mean.confidence.wave3"


@pytest.mark.parametrize("name,variant", [("clpm", "clpm"), ("ri-clpm", "ri-clpm")])
def test_dot_source_matches_the_golden_file(case, name, variant):
    graph = model_graph(compiled(case, variant))
    source = diagram.diagram_source(graph, synthetic_estimates(graph), show_se=True)
    assert_matches_golden(source, GOLDEN / f"{name}.dot")
    files = diagram.figure_files(source, "fig")
    assert files == diagram.figure_files(source, "fig") and b"<svg" in files["fig.svg"]


def test_user_text_stays_text_in_the_cross_lagged_figure(case):
    frame = weekly_frame().rename(columns={"practice": "<b>mins</b>", "confidence": "conf\\N"})
    graph = model_graph(compiled(case, "clpm", frame=frame, outcomes=("<b>mins</b>", "conf\\N")))
    source = diagram.diagram_source(graph)
    assert 'label="<b>mins</b>\\nweek 1"' in source and "conf\\\\N" in source
    svg = diagram.render(source, "svg").decode("utf-8")
    assert "<b>" not in svg and "&lt;b&gt;mins&lt;/b&gt;" in svg


# ------------------------------------------------------------------------ standardised paths and tables

def _fake(case, variant, paths):
    model = compiled(case, variant, paths)
    labels = [s.label for s in model.sem.statements if s.label] + \
        [label for eq in model.equations for t in range(1, model.n_waves) for label in eq.labels[t]]
    return SimpleNamespace(pair=model, solution=synthetic_solution(model.sem, list(dict.fromkeys(labels))),
                           quantities=())


def test_standardised_paths_use_the_sds_at_the_waves_involved(case):
    rec = _fake(case, "clpm", "wave-specific")
    data = standardised_paths(rec)
    values = rec.pair.panel.values
    sd = lambda a: float(np.std(a[np.isfinite(a)], ddof=1))  # noqa: E731
    # cross-lagged practice (wave 2) -> confidence (wave 3): label c0_1_w2
    path = next(p for p in data.paths if p.key == "cross.practice.confidence" and p.form == "mixed")
    assert path.waves == (2.0, 3.0, 4.0) and not data.time_invariant
    expected = rec.solution.long["c0_1_w2"] * sd(values[:, 1, 0]) / sd(values[:, 2, 1])
    assert math.isclose(path.values[1], expected, rel_tol=1e-12)
    invariant = standardised_paths(_fake(case, "clpm", "time-invariant"))
    auto = next(p for p in invariant.paths if p.key == "auto.confidence" and p.form == "sem")
    pooled = invariant_ratio = sd(values[:, :-1, 1]) / sd(values[:, 1:, 1])
    assert auto.waves == (2.0, 4.0) and auto.values[0] == auto.values[1]   # one horizontal line
    assert math.isclose(auto.values[0], _fake(case, "clpm", "time-invariant").solution.wide["a1"] * pooled)
    assert invariant_ratio > 0 and len(invariant.paths) == 8              # 4 paths x 2 forms
    files = standardised_files(data)
    assert files == standardised_files(data) and b"<dc:date>" not in files["standardised-paths.svg"]


def test_lagged_table_statistics_and_escaping(case):
    frame = weekly_frame().rename(columns={"confidence": "conf_%&"})
    model = compiled(case, "clpm", frame=frame, outcomes=("practice", "conf_%&"))
    labels = list(dict.fromkeys(s.label for s in model.sem.statements if s.label))
    rec = SimpleNamespace(pair=model, solution=synthetic_solution(model.sem, labels))
    summary = lagged_summary(rec)
    first = summary.coefficients[1].effect              # practice lag in the practice equation: label a0
    assert first.key == "auto.practice" and first.name == "practice lag"
    assert math.isclose(first.estimate, rec.solution.long["a0"]) and first.se == 0.03
    assert math.isclose(first.p, 2 * norm.sf(first.estimate / 0.03))
    assert math.isclose(first.upper - first.estimate, norm.ppf(0.975) * 0.03)
    assert [(f.outcome, f.rows, f.log_likelihood) for f in summary.fits] == [("practice", 17, -41.5),
                                                                              ("conf_%&", 18, -12.25)]
    grids = tables.lagged_grids(summary)
    assert r"conf\_\%\&" in tables.latex(grids) and "conf_%&" not in tables.latex(grids)
    assert r"conf\_%&amp;" in tables.markdown(grids)
    rows = list(csv.DictReader(io.StringIO(tables.csv_text(grids[0]))))
    assert float(rows[1]["estimate"]) == first.estimate and rows[1]["wave"] == "all"


# ------------------------------------------------------------------------------- one small fitted report

@pytest.fixture(scope="module")
def small_report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("clpm")
    frame = simulate_panel(PanelTruth(n_persons=120, n_waves=4, paths=((0.5, 0.1), (0.2, 0.4)),
                                      names=("practice", "<i>conf</i>")), 7).rename(columns={"wave": "week"})
    desc = description("clpm", outcomes=("practice", "<i>conf</i>"))
    desc["data"]["person"] = "person"
    from conftest import write_case
    spec = write_case(folder, frame, desc, "small")
    rec = bridge.run(spec)
    return spec, rec, report_files(report_content(rec))


def test_report_shows_the_figures_and_the_lagged_table(small_report):
    _, rec, files = small_report
    assert {"path-diagram.dot", "path-diagram.svg", "path-diagram.png", "standardised-paths.svg",
            "standardised-paths.png", "lagged-regressions.md", "lagged-regressions.tex", "lagged-coefficients.csv",
            "lagged-variances.csv", "lagged-fit.csv"} <= set(files)
    page = files["report.html"].decode("utf-8")
    assert "path figure and lagged regressions" in page and 'id="lagged-coefficients"' in page
    assert "Standardised paths over the waves" in page and "<i>conf" not in page and "&lt;i&gt;conf" in page
    assert "n/a" not in files["path-diagram.dot"].decode("utf-8")


def test_lagged_csv_carries_the_json_numbers(small_report):
    _, rec, files = small_report
    result = json.loads(files["result.json"])
    mixed = {q["key"]: q["mixed"] for q in result["quantities"]}
    rows = list(csv.DictReader(io.StringIO(files["lagged-coefficients.csv"].decode("utf-8"))))
    keyed = {("intercept" if r["term"] == "constant" else "auto" if r["term"].split(" lag")[0] == r["outcome"]
              else "cross"): r for r in rows if r["outcome"] == "practice"}
    assert float(keyed["auto"]["estimate"]) == mixed["auto.practice"]["estimate"]
    assert float(keyed["cross"]["SE"]) == mixed["cross.<i>conf</i>.practice"]["se"]
    assert float(keyed["intercept"]["estimate"]) == mixed["intercept.practice"]["estimate"]
    variances = list(csv.DictReader(io.StringIO(files["lagged-variances.csv"].decode("utf-8"))))
    assert float(variances[0]["estimate"]) == mixed["var.residual.practice"]["estimate"]
    fit = list(csv.DictReader(io.StringIO(files["lagged-fit.csv"].decode("utf-8"))))
    assert [int(f["rows used"]) for f in fit] == list(result["data"]["long_rows"].values())


def test_draw_writes_both_cross_lagged_figures(small_report, tmp_path):
    spec, _, _ = small_report
    done = subprocess.run([sys.executable, "-m", "bridge.cli", "draw", str(spec), "--structure-only", "--out",
                           str(tmp_path / "structure")], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    source = (tmp_path / "structure" / "path-diagram.dot").read_text(encoding="utf-8")
    assert 'label="cross.<i>conf</i>.practice"' in source and 'label="auto.practice"' in source
    done = subprocess.run([sys.executable, "-m", "bridge.cli", "draw", str(spec), "--quiet", "--no-se", "--out",
                           str(tmp_path / "fitted")], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    written = {p.name for p in (tmp_path / "fitted").iterdir()}
    assert {"path-diagram.dot", "path-diagram.svg", "standardised-paths.svg", "standardised-paths.png"} <= written
    assert "(0." not in (tmp_path / "fitted" / "path-diagram.dot").read_text(encoding="utf-8")
