"""Stage 2: read the data named by a description, check it, and shape it for both forms."""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from ..errors import DataError
from ..spec import Description, Layout, Missing
from .reading import read_table
from .shaping import long_to_wide, wide_to_long
from .timing import Timing, classify


@dataclass(frozen=True)
class PredictorColumn:
    """One column of the predictor design: a numeric predictor or one dummy of a categorical one."""

    key: str                    # name used in quantity keys: `age` or `format[private]`
    source: str                 # the user's column
    level: str | None = None    # the dummy's level (categorical only)
    reference: str | None = None


@dataclass(frozen=True)
class ShapedData:
    """Checked data in one canonical long shape, with the wave each occasion belongs to."""

    description: Description
    persons: tuple[str, ...]
    person_index: np.ndarray      # per occasion, 0..N-1
    times: np.ndarray             # per occasion, exact, user's units
    wave_index: np.ndarray        # per occasion, index into timing.waves
    outcome: np.ndarray           # per occasion
    predictors: tuple[PredictorColumn, ...]
    predictor_values: np.ndarray  # (N, P) per person, user's units (dummies 0/1)
    timing: Timing
    persons_read: int
    occasions_read: int

    @property
    def n_persons(self) -> int:
        return len(self.persons)

    @property
    def waves(self) -> tuple[float, ...]:
        return self.timing.waves

    def wide_outcome(self) -> np.ndarray:
        """Outcome by person and wave, NaN where missing."""
        return long_to_wide(self.person_index, self.wave_index, self.outcome, self.n_persons, len(self.waves))


def need_columns(frame: pd.DataFrame, wanted: list[tuple[str, str]], label: str) -> None:
    """DataError naming the first (key, column) pair whose column the frame lacks."""
    for key, column in wanted:
        if column not in frame.columns:
            shown = ", ".join(map(str, frame.columns[:12])) + (", ..." if len(frame.columns) > 12 else "")
            raise DataError(f"{label}: unknown column '{column}' named by {key}; the file has: {shown}")


def numeric_column(frame: pd.DataFrame, column: str, role: str, label: str, allow_nan: bool) -> np.ndarray:
    """The column as floats; DataError for text, infinite values, or (unless allowed) missing values."""
    values = pd.to_numeric(frame[column], errors="coerce")
    bad = values.isna() & frame[column].notna()
    if bad.any():
        example = frame.loc[bad, column].iloc[0]
        raise DataError(f"{label}: {role} column '{column}' is not numeric (found {example!r})")
    array = values.to_numpy(dtype=float, na_value=np.nan)
    if np.isinf(array).any():
        raise DataError(f"{label}: {role} column '{column}' contains infinite values")
    if not allow_nan and np.isnan(array).any():
        raise DataError(f"{label}: {role} column '{column}' has missing (NaN) values")
    return array


def _long_frame(desc: Description, frame: pd.DataFrame, label: str) -> pd.DataFrame:
    d = desc.data
    predictors = list(desc.model.predictors)
    if d.layout is Layout.WIDE:
        need_columns(frame, [("data.person", d.person), *((f"data.columns.{c}", c) for c in d.column_times),
                              *(("model.predictors", p) for p in predictors)], label)
        for column in d.column_times:
            frame[column] = numeric_column(frame, column, "outcome", label, allow_nan=True)
        frame = wide_to_long(frame, d.person, d.column_times, time="_time", outcome="_y",
                             keep=tuple(p for p in predictors if p != d.person))
        return frame.assign(_person=frame[d.person])
    need_columns(frame, [("data.person", d.person), ("data.time", d.time), ("data.outcome", d.outcome),
                          *(("model.predictors", p) for p in predictors)], label)
    return frame.assign(_person=frame[d.person], _time=numeric_column(frame, d.time, "time", label, allow_nan=False),
                        _y=numeric_column(frame, d.outcome, "outcome", label, allow_nan=True))


def _predictor_design(desc: Description, per_person: pd.DataFrame, label: str):
    columns, values = [], []
    references = dict(desc.model.reference_levels)
    for name in desc.model.predictors:
        raw = per_person[name]
        if raw.isna().any():
            raise DataError(f"{label}: predictor '{name}' has missing values for "
                            f"{int(raw.isna().sum())} person(s); both forms need it for every person")
        numeric = pd.api.types.is_numeric_dtype(raw) and not pd.api.types.is_bool_dtype(raw)
        if numeric and name not in desc.model.categorical:
            numeric = raw.to_numpy(dtype=float)
            if np.isinf(numeric).any():
                raise DataError(f"{label}: predictor '{name}' contains infinite values")
            if np.ptp(numeric) == 0:
                raise DataError(f"{label}: predictor '{name}' is constant across persons")
            columns.append(PredictorColumn(key=name, source=name))
            values.append(numeric)
            continue
        raw = raw.map(lambda v: f"{v:g}" if isinstance(v, float) else str(v))
        levels = sorted(raw.unique(), key=lambda v: (_as_number(v), v))
        if len(levels) < 2:
            raise DataError(f"{label}: categorical predictor '{name}' has a single level ({levels[0]!r})")
        reference = references.get(name, levels[0])
        if reference not in levels:
            raise DataError(f"{label}: reference level {reference!r} of '{name}' is not among its levels {levels}")
        for level in (lv for lv in levels if lv != reference):
            columns.append(PredictorColumn(key=f"{name}[{level}]", source=name, level=level, reference=reference))
            values.append((raw.astype(str) == level).to_numpy(dtype=float))
    matrix = np.column_stack(values) if values else np.zeros((len(per_person), 0))
    return tuple(columns), matrix


def _as_number(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        return float("inf")


def _check_invariant_predictors(long: pd.DataFrame, predictors: tuple[str, ...], label: str) -> None:
    for name in predictors:
        varying = long.groupby("_person", sort=False)[name].nunique(dropna=False)
        if (varying > 1).any():
            who = varying.index[varying > 1][0]
            raise DataError(f"{label}: predictor '{name}' changes within person {who!r}; "
                            "growth predictors must be time-invariant")


def shape_data(desc: Description) -> ShapedData:
    """Read, check and shape the description's data file; raise DataError on the first problem."""
    return shape_frame(desc, read_table(desc.data.path))


def shape_frame(desc: Description, frame: pd.DataFrame) -> ShapedData:
    """Check and shape an in-memory frame laid out as the description says (the file is not read)."""
    label = desc.data.path.name
    long = _long_frame(desc, frame.copy(), label)
    if long["_person"].isna().any():
        raise DataError(f"{label}: person column '{desc.data.person}' has missing values")
    long["_person"] = long["_person"].astype(str)
    persons_read, occasions_read = long["_person"].nunique(), int(long["_y"].notna().sum())
    duplicated = long.duplicated(["_person", "_time"])
    if duplicated.any():
        row = long.loc[duplicated].iloc[0]
        raise DataError(f"{label}: person {row['_person']!r} has more than one row at time {row['_time']:g}")
    _check_invariant_predictors(long, desc.model.predictors, label)
    long = long[long["_y"].notna()].sort_values(["_person", "_time"], kind="stable")
    if long.empty:
        raise DataError(f"{label}: no observed outcome values")
    return _finish(desc, long, label, persons_read, occasions_read)


def _finish(desc: Description, long: pd.DataFrame, label: str, persons_read: int, occasions_read: int) -> ShapedData:
    codes, persons = pd.factorize(long["_person"], sort=False)
    times = long["_time"].to_numpy(float)
    waves = desc.estimation.waves or (tuple(sorted(desc.data.column_times.values())) if desc.data.columns else None)
    timing, wave_index = classify(codes, times, waves)
    if timing.shared_wave_persons:
        raise DataError(f"{label}: {timing.shared_wave_persons} person(s) have two occasions nearest to the same "
                        "wave; give a finer wave grid in estimation.waves")
    uses_complete = Missing.COMPLETE_CASES in (desc.estimation.missing, desc.sem_form.missing,
                                               desc.mixed_form.missing)
    if uses_complete and not (np.bincount(codes) == len(timing.waves)).any():
        raise DataError(f"{label}: no person is observed at every wave, so complete cases leave no data")
    _check_enough(desc, long, timing, label)
    per_person = long.groupby("_person", sort=False).first().loc[list(persons)]
    columns, matrix = _predictor_design(desc, per_person, label)
    return ShapedData(description=desc, persons=tuple(persons), person_index=codes, times=times,
                      wave_index=wave_index, outcome=long["_y"].to_numpy(float), predictors=columns,
                      predictor_values=matrix, timing=timing, persons_read=persons_read,
                      occasions_read=occasions_read)


def _check_enough(desc: Description, long: pd.DataFrame, timing: Timing, label: str) -> None:
    needed = len(desc.model.terms) + 1
    if len(timing.waves) < needed or long["_time"].nunique() < needed:
        raise DataError(f"{label}: a {desc.model.shape.value} growth model needs at least {needed} distinct "
                        f"times, found {min(len(timing.waves), long['_time'].nunique())}")
    if np.ptp(long["_y"].to_numpy(float)) == 0:
        raise DataError(f"{label}: the outcome is constant ({long['_y'].iloc[0]:g}); there is nothing to model")
    if long["_person"].nunique() < 3:
        raise DataError(f"{label}: found {long['_person'].nunique()} person(s); at least 3 are needed")


def complete_cases(shaped: ShapedData) -> ShapedData:
    """The same data restricted to persons observed at every wave."""
    keep_person = np.bincount(shaped.person_index, minlength=shaped.n_persons) == len(shaped.waves)
    if keep_person.all():
        return shaped
    keep = keep_person[shaped.person_index]
    person_index = (np.cumsum(keep_person) - 1)[shaped.person_index[keep]]
    timing, wave_index = classify(person_index, shaped.times[keep], shaped.waves)
    return replace(shaped, persons=tuple(p for p, k in zip(shaped.persons, keep_person) if k),
                   person_index=person_index, times=shaped.times[keep], wave_index=wave_index,
                   outcome=shaped.outcome[keep], predictor_values=shaped.predictor_values[keep_person],
                   timing=replace(timing, grid_source=shaped.timing.grid_source))
