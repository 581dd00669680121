"""The model graph and the path figure: structure, golden DOT text, deterministic renderings, escaping.

Nothing here fits a model: the graphs come from compiled descriptions and the estimates are
fixed synthetic numbers, so the golden files do not depend on an optimiser. After a deliberate
change of the figure, rewrite the golden files with SEMBRIDGE_UPDATE_GOLDEN=1 and review the diff.
"""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from conftest import assert_matches_golden

import bridge
from bridge.compile.graph import CONSTANT, EdgeKind, NodeKind, growth_graph, model_graph
from bridge.reconcile import Estimate
from bridge.reconcile.curves import MeanCurve, PersonPath, TrajectoryData
from bridge.render import diagram
from bridge.render.trajectory import trajectory_files

GOLDEN = Path(__file__).parent / "golden"
SCRIPT = "<script>alert(1)</script>"
LONG = {"layout": "long", "person": "student", "time": "months", "outcome": "score"}
CASES = {
    "linear": {"model": {"kind": "growth", "shape": "linear"}},
    "conditional": {"model": {"kind": "growth", "shape": "linear", "predictors": ["format"],
                              "reference_levels": {"format": "group"}}},
    "quadratic": {"model": {"kind": "growth", "shape": "quadratic", "random": ["intercept", "slope"],
                            "residuals": "per-wave"}},
}


def small_frame(predictor: str = "format") -> pd.DataFrame:
    """Eight persons at four waves (0, 6, 12, 18 months), two lesson formats; values are arbitrary."""
    rows = []
    for i in range(8):
        for k, month in enumerate((0, 6, 12, 18)):
            rows.append({"student": f"s{i}", "months": month, "score": 50 + 2 * i + (1 + i % 3) * k + (i * k) % 5,
                         predictor: "private" if i % 2 else "group"})
    return pd.DataFrame(rows)


def compiled(case, name: str, predictor: str = "format"):
    description = {"data": LONG, **CASES[name]}
    if predictor != "format":
        description = {"data": LONG, "model": {"kind": "growth", "predictors": [predictor],
                                               "reference_levels": {predictor: "group"}}}
    return bridge.compile_description(case(small_frame(predictor), description, name)).sem


def synthetic_estimates(graph) -> dict[str, Estimate]:
    """Fixed numbers for every free path, in key order: 1.5, 1.75, ... with SEs 0.1, 0.11, ..."""
    keys = sorted({d["quantity"] for _, _, d in graph.edges(data=True) if d["quantity"]})
    return {key: Estimate(1.5 + 0.25 * i, 0.1 + 0.01 * i) for i, key in enumerate(keys)}


@pytest.mark.parametrize("name", sorted(CASES))
def test_every_quantity_is_one_edge_of_the_graph(case, name):
    model = compiled(case, name)
    graph = growth_graph(model)
    free = [d["quantity"] for _, _, d in graph.edges(data=True) if d["quantity"] is not None]
    shared_residual = model.equal_residuals and model.n_waves > 1
    assert sorted(set(free)) == sorted(model.keys)
    assert len(free) == len(model.keys) + (model.n_waves - 1 if shared_residual else 0)
    for _, _, data in graph.edges(data=True):
        assert (data["quantity"] is None) != (data["fixed"] is None), data


def test_graph_nodes_and_fixed_loadings_follow_the_time_coding(case):
    graph = growth_graph(compiled(case, "quadratic"))
    kinds = {name: data["kind"] for name, data in graph.nodes(data=True)}
    assert kinds == {"y0": NodeKind.OBSERVED, "y1": NodeKind.OBSERVED, "y2": NodeKind.OBSERVED,
                     "y3": NodeKind.OBSERVED, "f0": NodeKind.LATENT, "f1": NodeKind.LATENT, "f2": NodeKind.LATENT,
                     CONSTANT: NodeKind.CONSTANT}
    assert [graph.nodes[f"y{i}"]["column"] for i in range(4)] == [0, 1, 2, 3]
    assert graph.nodes["y2"]["label"] == ("score", "months 12")
    loadings = {(t, h): d["fixed"] for t, h, d in graph.edges(data=True) if d["kind"] is EdgeKind.LOADING}
    assert loadings[("f2", "y3")] == 324.0 and loadings[("f1", "y1")] == 6.0 and loadings[("f0", "y3")] == 1.0
    # the quadratic term is not random: its variance and covariances are fixed at zero
    assert graph.edges["f2", "f2", "variance"]["fixed"] == 0.0
    assert graph.edges["f0", "f2", "covariance"]["fixed"] == 0.0
    assert graph.edges["y3", "y3", "residual"]["quantity"] == "var.residual.18"
    assert model_graph(compiled(case, "linear")).graph["family"] == "growth"


@pytest.mark.parametrize("name", sorted(CASES))
def test_dot_source_matches_the_golden_file(case, name):
    graph = growth_graph(compiled(case, name))
    source = diagram.diagram_source(graph, synthetic_estimates(graph), show_se=True)
    assert_matches_golden(source, GOLDEN / f"{name}.dot")


def test_dot_source_is_the_same_whatever_the_order_of_the_estimates(case):
    graph = growth_graph(compiled(case, "conditional"))
    estimates = synthetic_estimates(graph)
    backwards = dict(reversed(list(estimates.items())))
    assert diagram.diagram_source(graph, estimates) == diagram.diagram_source(graph, backwards)
    assert "(0.1" not in diagram.diagram_source(graph, estimates, show_se=False)


def test_structure_only_labels_free_paths_with_their_keys(case):
    source = diagram.diagram_source(growth_graph(compiled(case, "conditional")))
    assert 'label="effect.format[private].slope"' in source
    assert 'label="mean.intercept"' in source


def test_user_text_stays_text_in_dot_and_svg(case):
    graph = growth_graph(compiled(case, "conditional", predictor=SCRIPT))
    source = diagram.diagram_source(graph, synthetic_estimates(graph))
    assert f'label="{SCRIPT}[private]"' in source   # a quoted string, not an HTML-like label
    svg = diagram.render(source, "svg").decode("utf-8")
    assert "<script" not in svg and "&lt;script&gt;alert(1)&lt;/script&gt;[private]" in svg
    assert diagram.dot_text("a\\N") == "a\\\\N"   # a backslash cannot become a Graphviz escape


def test_svg_and_png_are_identical_across_two_renders(case):
    graph = growth_graph(compiled(case, "conditional"))
    source = diagram.diagram_source(graph, synthetic_estimates(graph), show_se=True)
    first, second = diagram.figure_files(source, "fig"), diagram.figure_files(source, "fig")
    assert first == second
    assert first["fig.dot"] == source.encode("utf-8")
    assert first["fig.svg"].lstrip().startswith(b"<?xml") and b"<svg" in first["fig.svg"]
    assert first["fig.png"].startswith(b"\x89PNG\r\n\x1a\n")


def test_graphviz_pure_draws_when_no_system_dot(monkeypatch):
    real_which = shutil.which
    monkeypatch.setattr(shutil, "which", lambda name, *a, **k: None if name == "dot" else real_which(name, *a, **k))
    renderer = diagram.find_renderer()
    assert renderer.program.name.startswith("graphviz-pure") and not renderer.pdf
    files = diagram.figure_files("digraph { a -> b }", "tiny", renderer)
    assert sorted(files) == ["tiny.dot", "tiny.png", "tiny.svg"]


def test_a_system_dot_is_preferred_and_writes_pdf(monkeypatch):
    monkeypatch.setattr(shutil, "which", lambda name, *a, **k: "/opt/graphviz/bin/dot" if name == "dot" else None)
    assert diagram.find_renderer() == diagram.Renderer(Path("/opt/graphviz/bin/dot"), pdf=True)


def test_no_renderer_is_a_one_line_error(monkeypatch, tmp_path):
    monkeypatch.setattr(shutil, "which", lambda *a, **k: None)
    monkeypatch.setattr(sys, "executable", str(tmp_path / "python"))
    with pytest.raises(diagram.RenderError, match=r"^no Graphviz program found: reinstall sembridge"):
        diagram.find_renderer()


def test_a_failing_renderer_is_reported():
    with pytest.raises(diagram.RenderError, match="failed"):
        diagram.render("digraph { a -> }", "svg")


def test_trajectory_svg_is_identical_across_two_renders():
    data = TrajectoryData(
        outcome="score $x$", time="months", persons_total=3,
        persons=tuple(PersonPath(f"p{i}", "format = group" if i % 2 else "format = private", (0.0, 6.0, 12.0),
                                 (50.0 + i, 53.0 + i, 57.0 - i)) for i in range(3)),
        groups=("format = group", "format = private"),
        curves=tuple(MeanCurve(form, group, (0.0, 12.0), (50.0 + shift, 56.0 + shift))
                     for shift, group in ((0.0, "format = group"), (1.0, "format = private"))
                     for form in ("sem", "mixed")),
        note="numeric predictors at zero: age")
    first, second = trajectory_files(data), trajectory_files(data)
    assert first == second
    assert b"<dc:date>" not in first["trajectories.svg"]
    assert first["trajectories.png"].startswith(b"\x89PNG")


def test_draw_structure_only_writes_the_figure_without_fitting(case, tmp_path):
    spec = case(small_frame(), {"data": LONG, **CASES["conditional"]}, "draw")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    done = subprocess.run([sys.executable, "-m", "bridge.cli", "draw", str(spec), "--structure-only", "--out",
                           str(tmp_path / "fig")], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    written = sorted(p.name for p in (tmp_path / "fig").iterdir())
    assert {"path-diagram.dot", "path-diagram.svg", "path-diagram.png"} <= set(written)
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()} == \
        {k: v for k, v in before.items() if (tmp_path / k).is_file()}
    bad = subprocess.run([sys.executable, "-m", "bridge.cli", "draw", str(tmp_path / "missing.yaml"),
                          "--structure-only"], capture_output=True, text=True, timeout=120)
    assert bad.returncode == 2 and len(bad.stderr.strip().splitlines()) == 1
