"""The structure of a compiled wide-form model as a graph: the single source for figures.

:func:`growth_graph` turns a :class:`CompiledGrowth` into a `networkx.MultiDiGraph`
whose nodes are the model's variables and whose edges are its paths:

- nodes carry `kind` (:class:`NodeKind`), `label` (the user's words, one text per line),
  `row` and `column` (where the variable sits: observed waves share a row, in time order,
  so a model with two measured series can later use two rows of waves);
- edges carry `kind` (:class:`EdgeKind`), `quantity` (the key of the quantity the path
  estimates, or None) and `fixed` (the value the path is fixed at, or None). Exactly one of
  the two is set. Variances and residual variances are loops from a node to itself.

Edge keys are the edge kinds, so a pair of nodes holds at most one path of each kind.
The graph's own attribute `family` says which builder made it: "growth" here, "cross-lagged"
in `bridge.families.cross_lagged.graph` (whose edges also carry the parameter's generated `label`).
"""
from __future__ import annotations

import networkx as nx

from ..errors import SembridgeError
from ..spec import Term
from ..spec.vocabulary import Words
from .growth import CompiledGrowth
from .quantities import Key, cov_key, mean_key, residual_key, var_key

CONSTANT = "one"  # the node id of the constant that carries the mean structure


class NodeKind(Words):
    OBSERVED = "observed"      # a measured variable: one wave of the outcome
    LATENT = "latent"          # a growth factor
    CONSTANT = "constant"      # the constant 1 of the mean structure
    PREDICTOR = "predictor"    # a measured, time-invariant predictor (or one dummy of a categorical one)


class EdgeKind(Words):
    LOADING = "loading"        # factor -> wave, one-headed, fixed by the time coding
    REGRESSION = "regression"  # predictor -> factor, one-headed
    MEAN = "mean"              # constant -> variable, one-headed: a mean or an intercept
    VARIANCE = "variance"      # two-headed loop on a factor
    COVARIANCE = "covariance"  # two-headed, between two factors
    RESIDUAL = "residual"      # two-headed loop on a wave: its residual variance


#: Edge kinds drawn with two heads.
TWO_HEADED = frozenset({EdgeKind.VARIANCE, EdgeKind.COVARIANCE, EdgeKind.RESIDUAL})


def wave_label(compiled: CompiledGrowth, index: int) -> tuple[str, ...]:
    """The user's words for the outcome at one wave: the wide column, or the outcome and its time."""
    data = compiled.shaped.description.data
    wave = compiled.shaped.waves[index]
    by_time = {time: column for column, time in data.columns}
    if wave in by_time:
        return (by_time[wave],)
    return (data.outcome or "outcome", f"{data.time or 'time'} {wave:g}")


def _add_nodes(graph: nx.MultiDiGraph, compiled: CompiledGrowth) -> None:
    for i in range(compiled.n_waves):
        graph.add_node(f"y{i}", kind=NodeKind.OBSERVED, label=wave_label(compiled, i), row=0, column=i,
                       time=compiled.shaped.waves[i])
    for k, term in enumerate(compiled.terms):
        graph.add_node(f"f{term.power}", kind=NodeKind.LATENT, label=(term.value,), row=-1, column=k, time=None)
    graph.add_node(CONSTANT, kind=NodeKind.CONSTANT, label=("1",), row=-2, column=0, time=None)
    for j, predictor in enumerate(compiled.shaped.predictors):
        graph.add_node(f"x{j}", kind=NodeKind.PREDICTOR, label=(predictor.key,), row=-2, column=j + 1, time=None)


def _path(graph: nx.MultiDiGraph, tail: str, head: str, kind: EdgeKind, quantity: Key | None = None,
          fixed: float | None = None) -> None:
    graph.add_edge(tail, head, key=kind.value, kind=kind, quantity=quantity, fixed=fixed)


def _loading(compiled: CompiledGrowth, term: Term, index: int) -> float:
    """The fixed loading of one wave on one factor, in the form's own time units."""
    s = compiled.scaling
    return float(((compiled.shaped.waves[index] - s.t_origin) * s.t_unit) ** term.power)


def _add_paths(graph: nx.MultiDiGraph, compiled: CompiledGrowth) -> None:
    random = compiled.random_terms
    for term in compiled.terms:
        factor = f"f{term.power}"
        for i in range(compiled.n_waves):
            _path(graph, factor, f"y{i}", EdgeKind.LOADING, fixed=_loading(compiled, term, i))
        _path(graph, CONSTANT, factor, EdgeKind.MEAN, quantity=mean_key(term))
    for column in compiled.fixed_columns:
        if column.predictor is not None:
            j = compiled.shaped.predictors.index(column.predictor)
            _path(graph, f"x{j}", f"f{column.term.power}", EdgeKind.REGRESSION, quantity=column.key)
    for i, second in enumerate(compiled.terms):
        for first in compiled.terms[: i + 1]:
            free = first in random and second in random
            if first is second:
                _path(graph, f"f{first.power}", f"f{first.power}", EdgeKind.VARIANCE,
                      quantity=var_key(first) if free else None, fixed=None if free else 0.0)
            else:
                _path(graph, f"f{first.power}", f"f{second.power}", EdgeKind.COVARIANCE,
                      quantity=cov_key(first, second) if free else None, fixed=None if free else 0.0)
    for i, wave in enumerate(compiled.shaped.waves):
        _path(graph, CONSTANT, f"y{i}", EdgeKind.MEAN, fixed=0.0)
        _path(graph, f"y{i}", f"y{i}", EdgeKind.RESIDUAL,
              quantity=residual_key() if compiled.equal_residuals else residual_key(wave))


def growth_graph(compiled: CompiledGrowth) -> nx.MultiDiGraph:
    """The wide form of a compiled growth model as a graph (see the module docstring for its attributes)."""
    graph = nx.MultiDiGraph(family="growth", waves=tuple(compiled.shaped.waves), rows=1)
    _add_nodes(graph, compiled)
    _add_paths(graph, compiled)
    return graph


class NoGraph(SembridgeError):
    """The model family has no graph (and so no path figure)."""


def model_graph(compiled, model=None) -> nx.MultiDiGraph:
    """The graph of a compiled wide-form model: a growth model, or another family's model.

    Another family's compiled object carries its family (`.family`), which draws its own graph;
    `model` names the wide model that was fitted (the relaxed form of a dynamic panel, say).
    """
    if isinstance(compiled, CompiledGrowth):
        return growth_graph(compiled)
    family = getattr(compiled, "family", None)
    if family is not None and hasattr(family, "graph"):
        return family.graph(compiled, model)
    raise NoGraph("this model family has no path figure")
