"""The graph of a cross-lagged family's wide path model, built from its statements.

The statements of the `PathModel` are the single source: every statement becomes one
edge (regressions and loadings one-headed, covariances two-headed, means from the
constant), every variable one node. Nodes and edges carry the attributes documented in
`bridge.compile.graph`; edges also carry `label`, the generated parameter name (None
when fixed), so a figure can show the estimate of a parameter the reconciliation does not
compare (the first wave's moments, for example).

Layout: one row of waves per outcome, waves left to right in time order. A dynamic panel's
person effect sits in a row of its own outside its outcome's row; an RI-CLPM has, per
outcome, the trait outermost, then the observed row, then the within-person row, so the
within-person rows of two outcomes lie next to each other with the cross-lagged paths
between them. The constant of the mean structure is in the top row.
"""
from __future__ import annotations

import networkx as nx

from ...compile.path import PathModel, Statement
from ...compile.quantities import Key
from .model import CompiledPanel

def _parts(node: str) -> tuple[str, int, int | None]:
    """(prefix, outcome, wave index or None) of a generated name: `v1_3` -> ("v", 1, 3), `k0` -> ("k", 0, None)."""
    prefix, rest = node[0], node[1:]
    outcome, _, wave = rest.partition("_")
    return prefix, int(outcome), int(wave) if wave else None


def node_row(node: str, n_outcomes: int) -> int:
    """The row of a variable: outcomes of the first half above their within parts, the rest mirrored below."""
    prefix, k, _ = _parts(node)
    band = 3 * k
    upper = k < n_outcomes / 2
    if prefix == "v":
        offset = 1
    elif prefix == "w":
        offset = 2 if upper else 0
    else:                                     # a trait or person effect: outside the observed row
        offset = 0 if upper else 2
    return 1 + band + offset


def _node_label(compiled: CompiledPanel, node: str) -> tuple[str, ...]:
    panel = compiled.panel
    prefix, k, t = _parts(node)
    name = panel.names[k]
    time = panel.description.data.time or "wave"
    if prefix == "v":
        return (name, f"{time} {panel.waves[t]:g}")
    if prefix == "w":
        return (f"{name}, within", f"{time} {panel.waves[t]:g}")
    return (f"{name}, trait",) if prefix == "k" else (f"{name}, person effect",)


def _add_nodes(graph: nx.MultiDiGraph, compiled: CompiledPanel, model: PathModel) -> None:
    from ...compile.graph import CONSTANT, NodeKind

    K = len(compiled.panel.names)
    for node in model.observed + model.latent:
        _, k, t = _parts(node)
        kind = NodeKind.OBSERVED if node in model.observed else NodeKind.LATENT
        graph.add_node(node, kind=kind, label=_node_label(compiled, node), row=node_row(node, K),
                       column=t if t is not None else -1, time=None if t is None else compiled.panel.waves[t])
    graph.add_node(CONSTANT, kind=NodeKind.CONSTANT, label=("1",), row=0, column=-1, time=None)


def nuisance_key(compiled: CompiledPanel, statement: Statement) -> Key:
    """A key for a free parameter the reconciliation does not compare, from the variables it links."""
    names, waves = compiled.panel.names, compiled.panel.waves

    def part(node: str) -> str:
        prefix, k, t = _parts(node)
        what = {"v": "", "w": "within.", "k": "trait.", "h": "person."}[prefix]
        return f"{what}{names[k]}" + ("" if t is None else f".wave{waves[t]:g}")

    if statement.op == "1":
        return f"mean.{part(statement.lhs)}"
    if statement.lhs == statement.rhs:
        return f"var.{part(statement.lhs)}"
    return f"cov.{part(statement.lhs)}.{part(statement.rhs)}"


def _edge(compiled: CompiledPanel, statement: Statement):
    """(tail, head, edge kind) of one statement."""
    from ...compile.graph import CONSTANT, EdgeKind

    s = statement
    if s.op == "~":
        return s.rhs, s.lhs, EdgeKind.REGRESSION
    if s.op == "=~":
        return s.lhs, s.rhs, EdgeKind.LOADING
    if s.op == "1":
        return CONSTANT, s.lhs, EdgeKind.MEAN
    if s.lhs != s.rhs:
        return s.lhs, s.rhs, EdgeKind.COVARIANCE
    return s.lhs, s.rhs, None    # a loop: variance or residual variance, decided by the caller


def _add_edges(graph: nx.MultiDiGraph, compiled: CompiledPanel, model: PathModel) -> None:
    from ...compile.graph import EdgeKind

    explained = {s.lhs for s in model.statements if s.op == "~"} | {s.rhs for s in model.statements if s.op == "=~"}
    for s in model.statements:
        tail, head, kind = _edge(compiled, s)
        if kind is None:
            kind = EdgeKind.RESIDUAL if tail in explained else EdgeKind.VARIANCE
        quantity = None if s.label is None else compiled.keys.get(s.label) or nuisance_key(compiled, s)
        graph.add_edge(tail, head, key=kind.value, kind=kind, quantity=quantity, label=s.label,
                       fixed=None if s.label else float(s.value))


def panel_graph(compiled: CompiledPanel, model: PathModel | None = None) -> nx.MultiDiGraph:
    """The wide path model of a cross-lagged plan as a graph (`model`: the one fitted; default the compiled one)."""
    model = model or compiled.sem
    graph = nx.MultiDiGraph(family="cross-lagged", waves=tuple(compiled.panel.waves),
                            rows=len(compiled.panel.names), variant=compiled.variant.value)
    _add_nodes(graph, compiled, model)
    _add_edges(graph, compiled, model)
    return graph
