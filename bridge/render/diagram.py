"""The path figure: the model's graph and its estimates as DOT source, rendered by Graphviz.

Pure and deterministic: the same graph and estimates give byte-identical DOT (nodes
and edges are written in a fixed, sorted order; nothing varies between runs). The
notation: measured variables are rectangles, latent variables (growth factors; person
effects, traits and within-person parts of a cross-lagged model) ellipses, the constant of
the mean structure a triangle; one-headed arrows are loadings, means and regressions,
two-headed arrows variances, covariances and residual variances. Fixed paths carry
their fixed value, free paths their estimate (and standard error when asked). Paths
fixed at zero are not drawn.

Rendering runs a system `dot` when one is on PATH (then PDF is written too), otherwise
the self-contained `graphviz-pure` program installed with sembridge.
"""
from __future__ import annotations

import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

import graphviz
import networkx as nx

from ..compile.graph import TWO_HEADED, EdgeKind, NodeKind
from ..errors import SembridgeError
from ..reconcile import Estimate, Reconciliation
from .formats import number

FONT = "Helvetica"
_SHAPES = {NodeKind.OBSERVED: "box", NodeKind.LATENT: "ellipse", NodeKind.CONSTANT: "triangle",
           NodeKind.PREDICTOR: "box"}
_FILL = {NodeKind.OBSERVED: "#ffffff", NodeKind.LATENT: "#e8eef4", NodeKind.CONSTANT: "#f4efe4",
         NodeKind.PREDICTOR: "#f2f2f2"}
_NODE_ORDER = {NodeKind.CONSTANT: 0, NodeKind.PREDICTOR: 1, NodeKind.LATENT: 2, NodeKind.OBSERVED: 3}
_EDGE_ORDER = {kind: i for i, kind in enumerate(EdgeKind)}


class RenderError(SembridgeError):
    """A figure could not be drawn (no Graphviz program, or it failed)."""


def dot_text(text: str) -> str:
    """User text made literal inside a quoted DOT string (backslash sequences disarmed)."""
    return text.replace("\\", "\\\\")


def _lines(lines) -> str:
    return graphviz.nohtml("\\n".join(dot_text(line) for line in lines))


def estimates_of(rec: Reconciliation) -> dict[str, Estimate]:
    """The wide form's estimate of every quantity, by key (the figure shows the SEM column)."""
    return {row.key: row.sem for row in rec.quantities}


def _edge_label(data: dict, estimates: Mapping[str, Estimate] | None, show_se: bool) -> str:
    if data["fixed"] is not None:
        return f"{data['fixed']:g}"
    if estimates is None:
        return dot_text(data["quantity"])
    found = estimates.get(data["quantity"])
    if found is None:
        return "n/a"
    return number(found.estimate) + (f" ({number(found.se)})" if show_se else "")


def _node_key(item) -> tuple:
    name, data = item
    return (_NODE_ORDER[data["kind"]], data["row"], data["column"], name)


def _edge_key(item) -> tuple:
    tail, head, data = item
    return (_EDGE_ORDER[data["kind"]], tail, head)


def _drawn(data: dict) -> bool:
    """Every path except those fixed at zero; a loading of zero is drawn (it shows the time coding)."""
    return data["kind"] is EdgeKind.LOADING or not (data["fixed"] is not None and data["fixed"] == 0)


def _waves_across(graph: nx.MultiDiGraph) -> bool:
    """Cross-lagged figures run left to right, one rank per wave; growth figures top to bottom."""
    return graph.graph.get("family") == "cross-lagged"


def _add_nodes(dot: graphviz.Digraph, graph: nx.MultiDiGraph) -> None:
    nodes = sorted(graph.nodes(data=True), key=_node_key)
    for name, data in nodes:
        kind = data["kind"]
        dot.node(name, _lines(data["label"]), shape=_SHAPES[kind], style="filled", fillcolor=_FILL[kind],
                 **({"margin": "0.02"} if kind is NodeKind.CONSTANT else {}))
    if _waves_across(graph):
        _pin_positions(dot, nodes)
        return
    rows: dict[int, list[str]] = {}
    for name, data in nodes:
        rows.setdefault(data["row"], []).append(name)
    for row in sorted(rows):
        with dot.subgraph(name=f"row{row + 2}") as same:
            same.attr(rank="same")
            for name in rows[row]:
                same.node(name)
            for left, right in zip(rows[row], rows[row][1:]):
                same.edge(left, right, style="invis")


#: Spacing of a cross-lagged figure's grid, in inches: waves across, rows down.
COLUMN_STEP, ROW_STEP = 2.9, 1.5


def _pin_positions(dot: graphviz.Digraph, nodes) -> None:
    """Pin every node at its (column, row) place: the constant and person-level variables left, waves across."""
    rows = {row: i for i, row in enumerate(sorted({data["row"] for _, data in nodes}))}
    for name, data in nodes:
        x, y = (data["column"] + 1) * COLUMN_STEP, -rows[data["row"]] * ROW_STEP
        dot.node(name, pos=f"{x:.2f},{y:.2f}!")


def _loop_side(graph: nx.MultiDiGraph, name: str) -> str:
    """Where a factor's variance loop goes: outside the row for the first and last factor, else on top."""
    row = graph.nodes[name]["row"]
    columns = [d["column"] for _, d in graph.nodes(data=True) if d["row"] == row]
    column = graph.nodes[name]["column"]
    return "w" if column == min(columns) else "e" if column == max(columns) else "n"


def _residual_side(graph: nx.MultiDiGraph, name: str) -> str:
    """Where a residual loop goes: under the wave; in a cross-lagged figure away from the middle rows."""
    if not _waves_across(graph):
        return "s"
    rows = sorted({d["row"] for _, d in graph.nodes(data=True)})
    return "n" if graph.nodes[name]["row"] <= (rows[0] + rows[-1]) / 2 else "s"


def _add_edges(dot: graphviz.Digraph, graph: nx.MultiDiGraph, estimates, show_se: bool) -> None:
    for tail, head, data in sorted(graph.edges(data=True), key=_edge_key):
        if not _drawn(data):
            continue
        label = _edge_label(data, estimates, show_se)
        kind = data["kind"]
        if kind is EdgeKind.RESIDUAL or (kind is EdgeKind.VARIANCE and _waves_across(graph)):
            side = _residual_side(graph, tail)
            dot.edge(tail, head, label=label, dir="both", headport=side, tailport=side)
        elif kind is EdgeKind.VARIANCE:
            side = _loop_side(graph, tail)
            dot.edge(tail, head, label=label, dir="both", headport=side, tailport=side)
        elif kind is EdgeKind.LOADING:
            dot.edge(tail, head, headlabel=label, labeldistance="2.2", labelangle="25")
        elif kind in TWO_HEADED:
            dot.edge(tail, head, label=label, dir="both", constraint="false")
        elif kind is EdgeKind.REGRESSION and _waves_across(graph):   # near the tail: crossing paths keep apart
            dot.edge(tail, head, taillabel=label, labeldistance="6", labelangle="0")
        else:
            dot.edge(tail, head, label=label)


def diagram_source(graph: nx.MultiDiGraph, estimates: Mapping[str, Estimate] | None = None,
                   show_se: bool = False, title: str | None = None) -> str:
    """DOT source of the path figure: the graph with its estimates (None: parameter keys instead)."""
    dot = graphviz.Digraph(name="model")
    if _waves_across(graph):   # a fixed grid: every node pinned at its place, edges routed around them
        dot.attr(layout="neato", splines="true", overlap="true")
    dot.attr(rankdir="TB", nodesep="0.45", ranksep="0.9", fontname=FONT, fontsize="12", labelloc="t")
    if title:
        dot.attr(label=_lines([title]))
    dot.attr("node", fontname=FONT, fontsize="12")
    dot.attr("edge", fontname=FONT, fontsize="10", arrowsize="0.7")
    _add_nodes(dot, graph)
    _add_edges(dot, graph, estimates, show_se)
    return dot.source


@dataclass(frozen=True)
class Renderer:
    """A dot-compatible program and whether it can write PDF."""

    program: Path
    pdf: bool


def find_renderer() -> Renderer:
    """A system `dot` when on PATH, otherwise the `graphviz-pure` program installed beside Python."""
    system = shutil.which("dot")
    if system:
        return Renderer(Path(system), pdf=True)
    name = "graphviz-pure.exe" if sys.platform == "win32" else "graphviz-pure"
    beside = Path(sys.executable).parent / name
    if beside.exists():
        return Renderer(beside, pdf=False)
    on_path = shutil.which("graphviz-pure")
    if on_path:
        return Renderer(Path(on_path), pdf=False)
    raise RenderError("no Graphviz program found: reinstall sembridge (it brings graphviz-pure) or install "
                      "Graphviz so that `dot` is on PATH")


def render(source: str, fmt: str, renderer: Renderer | None = None) -> bytes:
    """Lay out and render DOT source in one format (`svg`, `png`, `pdf`) and return the bytes."""
    renderer = renderer or find_renderer()
    try:
        done = subprocess.run([str(renderer.program), f"-T{fmt}"], input=source.encode("utf-8"),
                              capture_output=True, timeout=120, check=False)
    except (OSError, subprocess.TimeoutExpired) as exc:
        raise RenderError(f"{renderer.program.name} could not be run ({exc})") from exc
    if done.returncode != 0:
        message = done.stderr.decode("utf-8", "replace").strip().splitlines()
        raise RenderError(f"{renderer.program.name} failed: {message[0] if message else 'no message'}")
    return done.stdout


def figure_files(source: str, stem: str, renderer: Renderer | None = None) -> dict[str, bytes]:
    """The DOT source and its renderings, by file name: SVG and PNG always, PDF with a system Graphviz."""
    renderer = renderer or find_renderer()
    formats = ("svg", "png", "pdf") if renderer.pdf else ("svg", "png")
    files = {f"{stem}.dot": source.encode("utf-8")}
    files.update({f"{stem}.{fmt}": render(source, fmt, renderer) for fmt in formats})
    return files
