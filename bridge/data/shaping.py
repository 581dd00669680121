"""Long <-> wide reshaping of one outcome measured at waves."""
from __future__ import annotations

import numpy as np
import pandas as pd


def wide_to_long(frame: pd.DataFrame, person: str, columns: dict[str, float],
                 time: str = "time", outcome: str = "outcome", keep: tuple[str, ...] = ()) -> pd.DataFrame:
    """One row per person and wave column; rows of missing outcomes are kept as NaN."""
    long = frame[[person, *keep, *columns]].melt(id_vars=[person, *keep], value_vars=list(columns),
                                                var_name="_column", value_name=outcome)
    long[time] = long.pop("_column").map(columns).astype(float)
    return long.sort_values([person, time], kind="stable").reset_index(drop=True)


def long_to_wide(person_index: np.ndarray, wave_index: np.ndarray, values: np.ndarray,
                 n_persons: int, n_waves: int) -> np.ndarray:
    """An (n_persons, n_waves) array with NaN where a wave was not observed."""
    wide = np.full((n_persons, n_waves), np.nan)
    wide[person_index, wave_index] = values
    return wide
