"""Stage 2 for the cross-lagged family: several outcomes measured at the same waves, as one array."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import DataError
from ..spec import Description, Layout
from .prepare import need_columns, numeric_column
from .reading import read_table


@dataclass(frozen=True)
class PanelData:
    """Outcomes by person, wave and variable (NaN where not observed)."""

    description: Description
    persons: tuple[str, ...]
    waves: tuple[float, ...]
    names: tuple[str, ...]      # the outcomes, in the description's order
    values: np.ndarray          # (persons, waves, outcomes)
    persons_read: int

    @property
    def n_persons(self) -> int:
        return len(self.persons)

    @property
    def n_observed(self) -> int:
        return int(np.isfinite(self.values).sum())


def _long(desc: Description, frame: pd.DataFrame, label: str) -> pd.DataFrame:
    """One row per person, wave and outcome, in internal columns only (_person, _time, _var, _y)."""
    d = desc.data
    if d.layout is Layout.WIDE:
        wanted = [("data.person", d.person)] + [(f"data.columns.{v}", c) for v, cols in d.panel_columns
                                                 for c, _ in cols]
        need_columns(frame, wanted, label)
        person = frame[d.person].to_numpy()
        return pd.concat([pd.DataFrame({"_person": person, "_time": float(time), "_var": name,
                                        "_y": numeric_column(frame, column, f"outcome {name!r}", label, True)})
                          for name, columns in d.panel_columns for column, time in columns], ignore_index=True)
    need_columns(frame, [("data.person", d.person), ("data.time", d.time),
                          *(("data.outcomes", o) for o in d.outcomes)], label)
    person, time = frame[d.person].to_numpy(), numeric_column(frame, d.time, "time", label, allow_nan=False)
    return pd.concat([pd.DataFrame({"_person": person, "_time": time, "_var": name,
                                    "_y": numeric_column(frame, name, "outcome", label, allow_nan=True)})
                      for name in d.outcomes], ignore_index=True)


def shape_panel(desc: Description, frame: pd.DataFrame | None = None) -> PanelData:
    """Read (unless given a frame), check and shape cross-lagged data; DataError on the first problem."""
    label = desc.data.path.name
    frame = read_table(desc.data.path, text_columns=[desc.data.person]) if frame is None else frame
    long = _long(desc, frame, label)
    if long["_person"].isna().any():
        raise DataError(f"{label}: person column '{desc.data.person}' has missing values")
    long["_person"] = long["_person"].astype(str)
    duplicated = long.duplicated(["_person", "_time", "_var"])
    if duplicated.any():
        row = long.loc[duplicated].iloc[0]
        raise DataError(f"{label}: person {row['_person']!r} has more than one row at time {row['_time']:g}")
    names = desc.data.outcomes or tuple(name for name, _ in desc.data.panel_columns)
    persons, person_index = np.unique(long["_person"].to_numpy(), return_inverse=True)
    waves, wave_index = np.unique(long["_time"].to_numpy(float), return_inverse=True)
    values = np.full((len(persons), len(waves), len(names)), np.nan)
    values[person_index, wave_index, [names.index(v) for v in long["_var"]]] = long["_y"].to_numpy(float)
    _check(values, names, waves, label)
    seen = np.isfinite(values).any(axis=(1, 2))
    return PanelData(description=desc, persons=tuple(persons[seen]), waves=tuple(float(w) for w in waves),
                     names=tuple(names), values=values[seen], persons_read=len(persons))


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
