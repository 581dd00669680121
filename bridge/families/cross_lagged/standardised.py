"""Standardised auto- and cross-lagged paths of both forms, over the waves, for the cross-lagged figure.

A path b from outcome j at wave t-1 to outcome k at wave t is standardised as
b x SD(j at t-1) / SD(k at t), with sample SDs (n - 1) of the observed values at those
waves (common practice). For time-invariant paths the waves involved are all of them: the
SDs pool the predictor over waves 1..T-1 and the outcome over waves 2..T, which gives one
value per path and form (drawn as a horizontal line). Both forms use the same observed SDs,
so the figure shows their raw differences on a common scale. For the RI-CLPM the paths link
within-person parts, whose SDs are smaller than the observed ones; the figure's note says so.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ...reconcile.result import Reconciliation
from ...spec import Paths, Variant
from .model import CompiledPanel

_PATH = re.compile(r"^(?P<kind>a|c)(?:(?P<source>\d+)_)?(?P<target>\d+)(?:_w(?P<wave>\d+))?$")


@dataclass(frozen=True)
class StandardisedPath:
    key: str                    # auto.<var> or cross.<from>.<to> (with .wave<k> when wave-specific)
    source: str
    target: str
    form: str                   # "sem" or "mixed"
    waves: tuple[float, ...]    # the outcome's waves
    values: tuple[float, ...]


@dataclass(frozen=True)
class StandardisedPaths:
    """Everything the standardised-paths figure draws."""

    time: str
    time_invariant: bool
    first_wave: float           # the first outcome wave a path reaches (wave 2)
    last_wave: float
    paths: tuple[StandardisedPath, ...]
    note: str


def _sd(values: np.ndarray) -> float:
    finite = values[np.isfinite(values)]
    return float(np.std(finite, ddof=1)) if finite.size > 1 else float("nan")


def _factor(compiled: CompiledPanel, source: int, target: int, t: int | None) -> float:
    """SD(predictor) / SD(outcome) at the waves a path links (all lagged waves when t is None)."""
    v = compiled.panel.values
    before, after = (v[:, :-1, source], v[:, 1:, target]) if t is None else (v[:, t - 1, source], v[:, t, target])
    return _sd(before) / _sd(after)


def _paths(compiled: CompiledPanel) -> dict[tuple[int, int], list[tuple[int | None, str]]]:
    """(source, target) -> [(wave index or None, label)] for every lagged path label, in wave order."""
    out: dict[tuple[int, int], list[tuple[int | None, str]]] = {}
    for label in compiled.keys:
        m = _PATH.match(label)
        if not m:
            continue
        target = int(m["target"])
        source = target if m["kind"] == "a" else int(m["source"])
        out.setdefault((source, target), []).append((int(m["wave"]) if m["wave"] else None, label))
    return {pair: sorted(items, key=lambda item: -1 if item[0] is None else item[0]) for pair, items in out.items()}


def _note(compiled: CompiledPanel) -> str:
    note = "paths x SD(predictor) / SD(outcome), sample SDs of the observed values at the waves involved"
    if compiled.variant is Variant.RI_CLPM:
        note += "; RI-CLPM paths link within-person parts, standardised here by the observed SDs"
    return note


def standardised_paths(rec: Reconciliation) -> StandardisedPaths:
    """Every auto- and cross-lagged path of both forms, standardised (see the module docstring)."""
    compiled, solution = rec.pair, rec.solution
    names, waves = compiled.panel.names, compiled.panel.waves
    out = []
    for (source, target), items in sorted(_paths(compiled).items(), key=lambda kv: (kv[0][1], kv[0][0])):
        factors = [_factor(compiled, source, target, t) for t, _ in items]
        key = f"auto.{names[target]}" if source == target else f"cross.{names[source]}.{names[target]}"
        shown = (waves[1], waves[-1]) if items[0][0] is None else tuple(waves[t] for t, _ in items)
        for form, values in (("sem", solution.wide), ("mixed", solution.long)):
            standard = [values[label] * factor for (_, label), factor in zip(items, factors)]
            if items[0][0] is None:
                standard = standard * 2
            out.append(StandardisedPath(key, names[source], names[target], form, tuple(float(w) for w in shown),
                                        tuple(float(s) for s in standard)))
    return StandardisedPaths(time=compiled.panel.description.data.time or "wave",
                             time_invariant=compiled.paths is Paths.TIME_INVARIANT, first_wave=float(waves[1]),
                             last_wave=float(waves[-1]), paths=tuple(out), note=_note(compiled))
