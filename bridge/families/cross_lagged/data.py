"""Shaped data of the cross-lagged family: several outcomes measured at the same waves, as one array.

Long layout: each occasion is placed on its nearest wave of `estimation.waves` (or, without it, every
distinct time is a wave), with the shared classifier of `bridge.data.timing`; the timing summary says how
far rounding moved the times and whether the waves are equally spaced. Wide layout: the column map gives
the waves.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ...data.prepare import need_columns, numeric_column
from ...data.reading import read_table
from ...data.timing import Timing, classify
from ...errors import DataError
from ...spec import Description, Layout, Missing


@dataclass(frozen=True)
class PanelData:
    """Outcomes by person, wave and variable (NaN where not observed)."""

    description: Description
    persons: tuple[str, ...]
    waves: tuple[float, ...]
    names: tuple[str, ...]      # the outcomes, in the description's order
    values: np.ndarray          # (persons, waves, outcomes)
    persons_read: int
    timing: Timing | None = None
    values_read: int = 0        # observed values in the file (before complete cases, if asked for)
    occasions_read: int = 0     # (person, wave) pairs with any observed value, likewise

    @property
    def n_persons(self) -> int:
        return len(self.persons)

    @property
    def n_observed(self) -> int:
        """Observed values (outcome x person x wave)."""
        return int(np.isfinite(self.values).sum())

    @property
    def n_occasions(self) -> int:
        """(person, wave) pairs with at least one observed outcome."""
        return int(np.isfinite(self.values).any(axis=2).sum())

    def observed_by_outcome(self) -> np.ndarray:
        """Observed values of each outcome."""
        return np.isfinite(self.values).sum(axis=(0, 1))

    def timing_summary(self) -> dict:
        """The timing summary (`bridge.data.timing.Timing`) with the spacing of the waves."""
        base = self.timing.to_dict() if self.timing is not None else {}
        gaps = np.diff(np.asarray(self.waves, float))
        equal = bool(np.allclose(gaps, gaps[0], rtol=1e-9, atol=0.0))
        return {**base, "intervals": [float(g) for g in gaps], "equally_spaced": equal}


def _long(desc: Description, frame: pd.DataFrame, label: str) -> pd.DataFrame:
    d = desc.data
    if d.layout is Layout.WIDE:
        wanted = [("data.person", d.person)] + [(f"data.columns.{v}", c) for v, cols in d.panel_columns
                                                 for c, _ in cols]
        need_columns(frame, wanted, label)
        parts = []
        for name, columns in d.panel_columns:
            block = frame[[d.person, *(c for c, _ in columns)]].melt(id_vars=d.person, var_name="_col",
                                                                      value_name="_y")
            block["_time"] = block.pop("_col").map(dict(columns)).astype(float)
            parts.append(block.assign(_var=name, _y=numeric_column(block, "_y", f"outcome {name!r}", label, True)))
        return pd.concat(parts).rename(columns={d.person: "_person"})
    need_columns(frame, [("data.person", d.person), ("data.time", d.time),
                          *(("data.outcomes", o) for o in d.outcomes)], label)
    long = frame.assign(_time=numeric_column(frame, d.time, "time", label, allow_nan=False))
    for name in d.outcomes:
        long[name] = numeric_column(frame, name, "outcome", label, allow_nan=True)
    return long.melt(id_vars=[d.person, "_time"], value_vars=list(d.outcomes), var_name="_var",
                     value_name="_y").rename(columns={d.person: "_person"})


def shape_panel(desc: Description, frame: pd.DataFrame | None = None) -> PanelData:
    """Read (unless given a frame), check and shape cross-lagged data; DataError on the first problem."""
    label = desc.data.path.name
    frame = read_table(desc.data.path) if frame is None else frame
    long = _long(desc, frame.copy(), label)
    if long["_person"].isna().any():
        raise DataError(f"{label}: person column '{desc.data.person}' has missing values")
    long["_person"] = long["_person"].astype(str)
    long = long.reset_index(drop=True)
    duplicated = long.duplicated(["_person", "_time", "_var"])
    if duplicated.any():
        row = long.loc[duplicated].iloc[0]
        raise DataError(f"{label}: person {row['_person']!r} has more than one row at time {row['_time']:g}")
    names = desc.data.outcomes or tuple(name for name, _ in desc.data.panel_columns)
    persons, person_index = np.unique(long["_person"].to_numpy(), return_inverse=True)
    timing, wave_index = _waves(desc, long, persons, label)
    waves = np.asarray(timing.waves)
    values = np.full((len(persons), len(waves), len(names)), np.nan)
    values[person_index, wave_index, [names.index(v) for v in long["_var"]]] = long["_y"].to_numpy(float)
    _check(values, names, waves, label)
    seen = np.isfinite(values).any(axis=(1, 2))
    read = int(np.isfinite(values).sum())
    occasions = int(np.isfinite(values).any(axis=2).sum())
    if desc.estimation.missing is Missing.COMPLETE_CASES:
        seen &= np.isfinite(values).all(axis=(1, 2))
        if seen.sum() < 3:
            raise DataError(f"{label}: fewer than 3 persons have every outcome at every wave (complete cases)")
    return PanelData(description=desc, persons=tuple(persons[seen]), waves=tuple(float(w) for w in waves),
                     names=tuple(names), values=values[seen], persons_read=len(persons), timing=timing,
                     values_read=read, occasions_read=occasions)


def _waves(desc: Description, long: pd.DataFrame, persons: np.ndarray, label: str) -> tuple[Timing, np.ndarray]:
    """Each row's wave on the shared classifier's grid (`bridge.data.timing.classify`); no two rows per wave."""
    occasions = long.drop_duplicates(["_person", "_time"])
    codes = np.searchsorted(persons, occasions["_person"].to_numpy())
    times = occasions["_time"].to_numpy(float)
    grid = desc.estimation.waves
    if desc.data.layout is Layout.WIDE:   # the column map gives the waves
        grid = tuple(sorted({float(t) for _, columns in desc.data.panel_columns for _, t in columns}))
    timing, index = classify(codes, times, grid)   # without a grid: the distinct times, or one inferred
    if timing.shared_wave_persons:
        raise DataError(f"{label}: {timing.shared_wave_persons} person(s) have two occasions nearest to the same "
                        "wave; give estimation.waves a finer grid")
    position = dict(zip(zip(occasions["_person"], times), index))
    return timing, np.array([position[(p, t)] for p, t in zip(long["_person"], long["_time"].to_numpy(float))])


def _check(values: np.ndarray, names: tuple[str, ...], waves: np.ndarray, label: str) -> None:
    if len(waves) < 3:
        raise DataError(f"{label}: a cross-lagged model needs at least 3 waves, found {len(waves)}")
    observed = np.isfinite(values)
    seen = observed.any(axis=0)  # (waves, outcomes): observed for anyone at that wave
    if not seen.all(axis=1).any():
        schedules = "; ".join(f"'{name}' at waves " + ", ".join(f"{w:g}" for w in waves[seen[:, k]])
                              for k, name in enumerate(names))
        raise DataError(f"{label}: the waves of the outcomes do not overlap ({schedules}); a cross-lagged "
                        "model needs the outcomes measured at the same waves")
    for k, name in enumerate(names):
        if np.nanstd(values[:, :, k]) == 0:
            raise DataError(f"{label}: outcome '{name}' is constant; there is nothing to model")
        empty = [w for w, seen in zip(waves, observed[:, :, k].any(axis=0)) if not seen]
        if empty:
            raise DataError(f"{label}: outcome '{name}' is never observed at wave {empty[0]:g}")
    together = observed.all(axis=2).any(axis=0)
    if not together.all():
        wave = waves[np.argmin(together)]
        raise DataError(f"{label}: at wave {wave:g} no person has all outcomes observed; the waves of the "
                        "outcomes do not overlap")
    if observed.all(axis=2).any(axis=1).sum() < 3:
        raise DataError(f"{label}: fewer than 3 persons have all outcomes observed at some wave")
