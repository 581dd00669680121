"""Classify the timing of a longitudinal design and place each occasion on a wave grid.

Works on the long layout only (one row per occasion), so designs with hundreds of
distinct times per person never need a wide matrix.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..spec.vocabulary import Words


class Design(Words):
    BALANCED = "balanced"
    BALANCED_MISSING = "balanced-missing"
    INDIVIDUALLY_VARYING = "individually-varying"



class GridSource(Words):
    DESCRIPTION = "description"      # estimation.waves or the wide layout's column map
    OBSERVED = "observed"            # every distinct time is a wave
    INFERRED = "inferred"            # medians of the k-th occasion of persons seen at every wave



@dataclass(frozen=True)
class Timing:
    """What the timing of a design is, and what rounding onto waves costs."""

    design: Design
    waves: tuple[float, ...]
    grid_source: GridSource
    n_persons: int
    n_occasions: int
    n_distinct_times: int
    displacement_max: float
    displacement_mean: float
    shared_wave_persons: int  # persons with two occasions nearest to the same wave

    def to_dict(self) -> dict:
        return {"design": self.design.value, "waves": list(self.waves), "grid_source": self.grid_source.value,
                "persons": self.n_persons, "occasions": self.n_occasions,
                "distinct_times": self.n_distinct_times,
                "displacement": {"max": self.displacement_max, "mean": self.displacement_mean},
                "persons_with_shared_wave": self.shared_wave_persons}


def nearest_wave(times: np.ndarray, waves: np.ndarray) -> np.ndarray:
    """Index of the nearest wave for each time (ties go to the earlier wave)."""
    right = np.clip(np.searchsorted(waves, times), 1, len(waves) - 1) if len(waves) > 1 else np.zeros(len(times), int)
    if len(waves) == 1:
        return right
    left = right - 1
    return np.where(np.abs(times - waves[left]) <= np.abs(times - waves[right]), left, right)


def _infer_grid(person: np.ndarray, times: np.ndarray) -> np.ndarray:
    order = np.lexsort((times, person))
    p_sorted, t_sorted = person[order], times[order]
    counts = np.bincount(person)
    ranks = np.arange(len(times)) - (np.cumsum(counts) - counts)[p_sorted]
    complete = counts[p_sorted] == counts.max()
    return np.array([np.median(t_sorted[complete & (ranks == k)]) for k in range(counts.max())])


def _persons_sharing_a_wave(person: np.ndarray, index: np.ndarray, n_waves: int) -> int:
    pairs, repeats = np.unique(person.astype(np.int64) * n_waves + index, return_counts=True)
    return len(np.unique(pairs[repeats > 1] // n_waves))


def classify(person: np.ndarray, times: np.ndarray, waves: tuple[float, ...] | None = None) -> tuple[Timing, np.ndarray]:
    """Classify a design from integer person codes (0..N-1) and occasion times.

    Returns the timing summary and each occasion's wave index on the grid: the
    description's `waves` when given, otherwise the observed distinct times when
    they are few enough to be waves, otherwise a grid inferred from the persons
    observed most often.
    """
    counts = np.bincount(person)
    counts = counts[counts > 0]
    distinct = np.unique(times)
    if waves is not None:
        grid, source = np.asarray(waves, float), GridSource.DESCRIPTION
        on_grid = bool(np.all(np.isclose(times[:, None], grid[None, :], rtol=0, atol=1e-9).any(axis=1)))
    elif len(distinct) <= counts.max():
        grid, source, on_grid = distinct, GridSource.OBSERVED, True
    else:
        grid, source, on_grid = _infer_grid(person, times), GridSource.INFERRED, False
    index = nearest_wave(times, grid)
    displacement = np.abs(times - grid[index])
    if on_grid:
        design = Design.BALANCED if len(times) == len(counts) * len(grid) else Design.BALANCED_MISSING
    else:
        design = Design.INDIVIDUALLY_VARYING
    shared = _persons_sharing_a_wave(person, index, len(grid))
    timing = Timing(design=design, waves=tuple(float(w) for w in grid), grid_source=source,
                    n_persons=len(counts), n_occasions=len(times), n_distinct_times=len(distinct),
                    displacement_max=float(displacement.max()), displacement_mean=float(displacement.mean()),
                    shared_wave_persons=shared)
    return timing, index
