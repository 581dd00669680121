"""Stage 2: read the data named by a description, check it, and shape it for both forms."""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from ..errors import DataError, cut, shown
from ..spec import Description, Layout, Missing
from .reading import read_table
from .shaping import long_to_wide
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
        raise DataError(f"{label}: {role} column '{column}' is not numeric (found {shown(example)})")
    array = values.to_numpy(dtype=float, na_value=np.nan)
    if np.isinf(array).any():
        raise DataError(f"{label}: {role} column '{column}' contains infinite values")
    if not allow_nan and np.isnan(array).any():
        raise DataError(f"{label}: {role} column '{column}' has missing (NaN) values")
    return array


def predictor_columns(desc: Description) -> dict[str, str]:
    """Each predictor's internal column name (`_x0`, `_x1`, ...): user names never meet internal ones."""
    return {name: f"_x{i}" for i, name in enumerate(desc.model.predictors)}


def _rows(person, time, outcome, predictors: dict[str, object]) -> pd.DataFrame:
    return pd.DataFrame({"_person": person, "_time": time, "_y": outcome, **predictors})


def _long_frame(desc: Description, frame: pd.DataFrame, label: str) -> pd.DataFrame:
    """The occasions in a new frame of internal columns only: _person, _time, _y and _x0.. (predictors)."""
    d = desc.data
    inner = predictor_columns(desc)
    wanted = [("model.predictors", p) for p in inner]
    if d.layout is Layout.WIDE:
        need_columns(frame, [("data.person", d.person), *((f"data.columns.{c}", c) for c in d.column_times),
                             *wanted], label)
        person = frame[d.person].to_numpy()
        predictors = {column: frame[name].to_numpy() for name, column in inner.items()}
        return pd.concat([_rows(person, float(time), numeric_column(frame, column, "outcome", label, allow_nan=True),
                                predictors) for column, time in d.column_times.items()], ignore_index=True)
    need_columns(frame, [("data.person", d.person), ("data.time", d.time), ("data.outcome", d.outcome), *wanted],
                 label)
    return _rows(frame[d.person].to_numpy(), numeric_column(frame, d.time, "time", label, allow_nan=False),
                 numeric_column(frame, d.outcome, "outcome", label, allow_nan=True),
                 {column: frame[name].to_numpy() for name, column in inner.items()})


def _as_numbers(raw: pd.Series) -> pd.Series | None:
    """The predictor's values as floats when every one is a number (as read, or written as one); else None."""
    if pd.api.types.is_bool_dtype(raw):
        return None
    if pd.api.types.is_numeric_dtype(raw):
        return raw.astype(float)
    numbers = pd.to_numeric(raw, errors="coerce")
    return numbers.astype(float) if numbers.notna().all() else None


def _level_text(value) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _reference(name: str, wanted: str | None, levels: list[str], label: str) -> str:
    if wanted is None:
        return levels[0]
    if wanted in levels:
        return wanted
    same_number = [lv for lv in levels if _as_number(lv) == _as_number(wanted) != float("inf")]
    if same_number:
        return same_number[0]
    raise DataError(f"{label}: reference level {shown(wanted)} of '{name}' is not among its levels "
                    f"{cut(', '.join(levels), 120)}")


def _predictor_design(desc: Description, per_person: pd.DataFrame, label: str):
    columns, values = [], []
    references = dict(desc.model.reference_levels)
    for name, inner in predictor_columns(desc).items():
        raw = per_person[inner]
        if raw.isna().any():
            raise DataError(f"{label}: predictor '{name}' has missing values for "
                            f"{int(raw.isna().sum())} person(s); both forms need it for every person")
        numbers = _as_numbers(raw)
        if numbers is not None and name not in desc.model.categorical:
            numeric = numbers.to_numpy(dtype=float)
            if not np.isfinite(numeric).all() or not np.isfinite(np.std(numeric)):
                raise DataError(f"{label}: predictor '{name}' contains infinite values or values too large to "
                                "compute with; rescale it")
            if np.ptp(numeric) == 0:
                raise DataError(f"{label}: predictor '{name}' is constant across persons")
            columns.append(PredictorColumn(key=name, source=name))
            values.append(numeric)
            continue
        raw = raw.map(_level_text)
        levels = sorted(raw.unique(), key=lambda v: (_as_number(v), v))
        if len(levels) < 2:
            raise DataError(f"{label}: categorical predictor '{name}' has a single level ({shown(levels[0])})")
        reference = _reference(name, references.get(name), levels, label)
        for level in (lv for lv in levels if lv != reference):
            columns.append(PredictorColumn(key=f"{name}[{level}]", source=name, level=level, reference=reference))
            values.append((raw == level).to_numpy(dtype=float))
    matrix = np.column_stack(values) if values else np.zeros((len(per_person), 0))
    return tuple(columns), matrix


def _as_number(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        return float("inf")


def _check_invariant_predictors(long: pd.DataFrame, desc: Description, label: str) -> None:
    for name, inner in predictor_columns(desc).items():
        varying = long.groupby("_person", sort=False)[inner].nunique(dropna=False)
        if (varying > 1).any():
            who = varying.index[varying > 1][0]
            raise DataError(f"{label}: predictor '{name}' changes within person {shown(who)}; "
                            "growth predictors must be time-invariant")


def shape_data(desc: Description) -> ShapedData:
    """Read, check and shape the description's data file; raise DataError on the first problem."""
    return shape_frame(desc, read_table(desc.data.path, text_columns=(desc.data.person, *desc.model.predictors)))


def shape_frame(desc: Description, frame: pd.DataFrame) -> ShapedData:
    """Check and shape an in-memory frame laid out as the description says (the file is not read)."""
    label = desc.data.path.name
    long = _long_frame(desc, frame, label)
    if long["_person"].isna().any():
        raise DataError(f"{label}: person column '{desc.data.person}' has missing values")
    long["_person"] = long["_person"].astype(str)
    persons_read, occasions_read = long["_person"].nunique(), int(long["_y"].notna().sum())
    duplicated = long.duplicated(["_person", "_time"])
    if duplicated.any():
        row = long.loc[duplicated].iloc[0]
        raise DataError(f"{label}: person {shown(row['_person'])} has more than one row at time {row['_time']:g}")
    _check_invariant_predictors(long, desc, label)
    long = long[long["_y"].notna()].sort_values(["_person", "_time"], kind="stable")
    if long.empty:
        raise DataError(f"{label}: no observed outcome values")
    _check_computable(desc, long["_time"].to_numpy(float), long["_y"].to_numpy(float), label)
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
    _check_identical_persons(long, codes, label)
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


#: Times farther from their origin than this many times their spread (Unix timestamps, say) are refused.
FAR_FROM_ORIGIN = 1000.0


def _check_computable(desc: Description, times: np.ndarray, outcome: np.ndarray, label: str) -> None:
    """DataError (with a hint) for values no fit can compute with: spreads that overflow, times too close."""
    with np.errstate(all="ignore"):
        outcome_sd, time_sd = np.std(outcome), np.std(times)
    if not np.isfinite(outcome_sd):
        raise DataError(f"{label}: the outcome has values too large to compute with (up to "
                        f"{np.max(np.abs(outcome)):.3g}); rescale the outcome")
    if not np.isfinite(time_sd):
        raise DataError(f"{label}: the times are too large to compute with (up to {np.max(np.abs(times)):.3g}); "
                        "rescale them")
    spread = float(np.ptp(times))
    for name, form in (("sem", desc.sem_form), ("mixed", desc.mixed_form)):
        origin = form.time_origin if form.time_origin is not None else desc.model.time_origin
        farthest = float(np.max(np.abs(times - origin)))
        if 0 < spread * FAR_FROM_ORIGIN <= farthest:   # e.g. Unix timestamps
            raise DataError(f"{label}: the times lie far from the time origin {origin:g} compared with their spread "
                            f"({spread:.3g} at {farthest:.3g}), so the intercept would be extrapolated far outside "
                            f"the data and the fit is numerically unreliable; set model.time_origin near the first "
                            f"time (e.g. {np.min(times):.10g})")
        scaled = spread * (form.time_scale or 1.0)
        if spread > 0 and not 1e-100 < scaled < 1e100:
            raise DataError(f"{label}: forms.{name}.time_scale {form.time_scale:g} makes the time range "
                            f"{scaled:.3g}; choose a scale that keeps it between 1e-100 and 1e100")


def _check_identical_persons(long: pd.DataFrame, codes: np.ndarray, label: str) -> None:
    counts = np.bincount(codes)
    if len(counts) < 2 or (counts != counts[0]).any():
        return
    shape = (len(counts), counts[0])
    times, outcome = long["_time"].to_numpy(float).reshape(shape), long["_y"].to_numpy(float).reshape(shape)
    if (times == times[0]).all() and (outcome == outcome[0]).all():
        raise DataError(f"{label}: all {len(counts)} persons have identical times and outcomes; nothing varies "
                        "between persons, so no growth model can be fitted")


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
