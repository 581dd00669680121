"""What the trajectory figure shows: observed paths of a reproducible sample of persons, and the
mean trajectory each fit implies.

The implied mean at time t is sum over growth terms of (mean of the term + effects of the
predictors on it) * (form time)^power, where form time is (t - origin) * unit in each form's
own coding. Curves are drawn at the reference setting of the predictors (reference levels,
numeric predictors at zero) and, for each categorical predictor, at each of its other levels.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compile import CompiledGrowth, effect_key, mean_key
from ..data import PredictorColumn
from .result import Reconciliation

SAMPLE_SEED = 20240917   # fixed, so the same persons are drawn every time
MAX_PERSONS = 60
CURVE_POINTS = 61


@dataclass(frozen=True)
class PersonPath:
    person: str
    group: str
    times: tuple[float, ...]
    values: tuple[float, ...]


@dataclass(frozen=True)
class MeanCurve:
    form: str                  # "sem" or "mixed"
    group: str
    times: tuple[float, ...]
    values: tuple[float, ...]


@dataclass(frozen=True)
class TrajectoryData:
    """Everything the trajectory figure draws."""

    outcome: str
    time: str
    persons_total: int
    persons: tuple[PersonPath, ...]
    groups: tuple[str, ...]     # the reference setting first
    curves: tuple[MeanCurve, ...]
    note: str


@dataclass(frozen=True)
class _Setting:
    label: str
    values: dict[str, float]    # predictor key -> value (absent: 0)


def _settings(predictors: tuple[PredictorColumn, ...]) -> tuple[_Setting, ...]:
    categorical = [p for p in predictors if p.level is not None]
    sources = dict.fromkeys(p.source for p in categorical)
    reference = ", ".join(f"{s} = {next(p.reference for p in categorical if p.source == s)}" for s in sources)
    settings = [_Setting(reference or "all persons", {})]
    settings += [_Setting(f"{p.source} = {p.level}", {p.key: 1.0}) for p in categorical]
    return tuple(settings)


def _curve(compiled: CompiledGrowth, estimates: dict[str, float], setting: _Setting, times: np.ndarray) -> np.ndarray:
    s = compiled.scaling
    form_time = (times - s.t_origin) * s.t_unit
    values = np.zeros_like(times)
    for term in compiled.terms:
        coefficient = estimates[mean_key(term)]
        for predictor in compiled.shaped.predictors:
            coefficient += setting.values.get(predictor.key, 0.0) * estimates.get(effect_key(predictor.key, term), 0.0)
        values += coefficient * form_time ** term.power
    return values


def _person_group(shaped, person: int, settings: tuple[_Setting, ...]) -> str:
    row = {p.key: shaped.predictor_values[person, j] for j, p in enumerate(shaped.predictors) if p.level is not None}
    on = [key for key, value in row.items() if value == 1.0]
    if not on:
        return settings[0].label
    return next((s.label for s in settings[1:] if list(s.values) == on), "other")


def _sample(n: int, limit: int) -> np.ndarray:
    if n <= limit:
        return np.arange(n)
    return np.sort(np.random.default_rng(SAMPLE_SEED).choice(n, size=limit, replace=False))


def trajectory_data(rec: Reconciliation, limit: int = MAX_PERSONS) -> TrajectoryData:
    """Observed paths of at most `limit` persons (a fixed-seed sample) and each fit's implied mean curves."""
    pair = rec.pair
    shaped = pair.mixed.shaped
    settings = _settings(shaped.predictors)
    paths = []
    for person in _sample(shaped.n_persons, limit):
        mask = shaped.person_index == person
        paths.append(PersonPath(shaped.persons[person], _person_group(shaped, person, settings),
                                tuple(float(t) for t in shaped.times[mask]),
                                tuple(float(y) for y in shaped.outcome[mask])))
    grid = np.linspace(shaped.times.min(), shaped.times.max(), CURVE_POINTS)
    sem = {row.key: row.sem.estimate for row in rec.quantities}
    mixed = {row.key: row.mixed.estimate for row in rec.quantities}
    curves = tuple(MeanCurve(form, setting.label, tuple(float(t) for t in grid),
                             tuple(float(v) for v in _curve(compiled, values, setting, grid)))
                   for setting in settings
                   for form, compiled, values in (("sem", pair.sem, sem), ("mixed", pair.mixed, mixed)))
    numeric = [p.key for p in shaped.predictors if p.level is None]
    note = f"numeric predictors at zero: {', '.join(numeric)}" if numeric else ""
    data = shaped.description.data
    return TrajectoryData(outcome=data.outcome or "outcome", time=data.time or "time", persons_total=shaped.n_persons,
                          persons=tuple(paths), groups=tuple(s.label for s in settings), curves=curves, note=note)
