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
    split: "DisplacementSplit | None" = None  # signed displacement split between and within persons

    def to_dict(self) -> dict:
        split = self.split or DisplacementSplit(0.0, 0.0, 0.0)
        return {"design": self.design.value, "waves": list(self.waves), "grid_source": self.grid_source.value,
                "persons": self.n_persons, "occasions": self.n_occasions,
                "distinct_times": self.n_distinct_times,
                "displacement": {"max": self.displacement_max, "mean": self.displacement_mean,
                                 "variance": split.variance, "between_person_share": _none(split.between_share),
                                 "within_person_share": _none(split.within_share)},
                "persons_with_shared_wave": self.shared_wave_persons}


def _none(value: float) -> float | None:
    return None if not np.isfinite(value) else float(value)


@dataclass(frozen=True)
class DisplacementSplit:
    """The signed displacement (exact time minus its wave) split into a person-level and an occasion part.

    `between` estimates the variance of a person's own offset c_i and `within` the variance of the
    occasion-to-occasion jitter around it, by the one-way random-effects analysis of variance
    (method-of-moments estimators for unbalanced groups; Searle, Casella & McCulloch 1992,
    Variance Components, Wiley, ch. 3; the chapter recalled from memory), the between part truncated at 0. `mean` is the mean signed
    displacement (a shared shift of every person's times).
    """

    mean: float
    between: float
    within: float

    @property
    def variance(self) -> float:
        return self.between + self.within

    @property
    def between_share(self) -> float:
        return self.between / self.variance if self.variance > 0 else float("nan")

    @property
    def within_share(self) -> float:
        return self.within / self.variance if self.variance > 0 else float("nan")


def split_displacement(person: np.ndarray, signed: np.ndarray) -> DisplacementSplit:
    """Split signed displacements (one per occasion; persons coded 0..N-1) into between and within parts.

    With n occasions of a persons: MSW = sum (d_ij - mean_i)^2 / (n - a),
    MSB = sum n_i (mean_i - mean)^2 / (a - 1), n0 = (n - sum n_i^2 / n) / (a - 1);
    within = MSW, between = max(0, (MSB - MSW) / n0). Persons seen once inform only the
    between part; with nobody seen twice the whole variance counts as between persons.
    """
    signed = np.asarray(signed, float)
    counts = np.bincount(person).astype(float)
    present = counts > 0
    n, a = float(len(signed)), int(present.sum())
    grand = float(signed.mean())
    means = np.bincount(person, weights=signed)[present] / counts[present]
    ssw = float(((signed - (np.bincount(person, weights=signed) / np.maximum(counts, 1))[person]) ** 2).sum())
    if a < 2:
        return DisplacementSplit(grand, 0.0, ssw / max(n - 1, 1))
    ssb = float((counts[present] * (means - grand) ** 2).sum())
    if n - a <= 0:
        return DisplacementSplit(grand, ssb / (a - 1), 0.0)
    msw, msb = ssw / (n - a), ssb / (a - 1)
    n0 = (n - float((counts[present] ** 2).sum()) / n) / (a - 1)
    return DisplacementSplit(grand, max(0.0, (msb - msw) / n0), msw)


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
    signed = times - grid[index]
    displacement = np.abs(signed)
    if on_grid:
        design = Design.BALANCED if len(times) == len(counts) * len(grid) else Design.BALANCED_MISSING
    else:
        design = Design.INDIVIDUALLY_VARYING
    shared = _persons_sharing_a_wave(person, index, len(grid))
    timing = Timing(design=design, waves=tuple(float(w) for w in grid), grid_source=source,
                    n_persons=len(counts), n_occasions=len(times), n_distinct_times=len(distinct),
                    displacement_max=float(displacement.max()), displacement_mean=float(displacement.mean()),
                    shared_wave_persons=shared, split=split_displacement(person, signed))
    return timing, index
