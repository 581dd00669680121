"""The timing summary of a long data file: design class, time spread per wave, rounding cost, a recommendation.

Everything is computed from the per-occasion arrays (person code, time, wave index), never
from a person-by-wave matrix, so intensive designs with hundreds of occasions per person
stay cheap. The design class comes from `bridge.data.timing.classify`, the classifier the
reconciler uses.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..data.prepare import need_columns, numeric_column
from ..data.reading import read_table
from ..data.timing import Timing, classify
from ..errors import DataError
from .advice import Recommendation, recommend
from .described import RoundingCheck, check_description

HISTOGRAM_BINS = 60


@dataclass(frozen=True)
class WaveSpread:
    """The times assigned to one wave: how many, where they fall, how far rounding moves them."""

    wave: float
    n: int
    minimum: float
    q1: float
    median: float
    q3: float
    maximum: float
    sd: float
    displacement_mean: float
    displacement_max: float


@dataclass(frozen=True)
class TimeHistogram:
    """Counts of occasion times on common bins, one row of counts per wave they are assigned to."""

    edges: tuple[float, ...]
    counts: tuple[tuple[int, ...], ...]


@dataclass(frozen=True)
class TimingReport:
    """What the timing of one data set is and what each framework would make of it."""

    source: str
    person: str
    time: str
    timing: Timing
    spread: tuple[WaveSpread, ...]
    occasions_per_person: tuple[int, float, int]      # min, median, max
    complete_persons: int                             # persons with one occasion at every wave
    displacement_quantiles: tuple[float, float, float]  # median, 90th percentile, max
    median_gap: float                                 # median distance between neighbouring waves
    grid_patterns: int                                # missing-data patterns of the wide form on this grid
    exact_columns: int                                # columns of a wide form with one column per distinct time
    exact_patterns: int                               # its missing-data patterns
    histogram: TimeHistogram
    recommendation: Recommendation
    check: RoundingCheck | None = None                # `timing SPEC`: the description fitted on its grid

    def to_dict(self) -> dict:
        """The report as plain data (the `timing --json` contract, docs/timing-lab.md)."""
        out = self._plain()
        if self.check is not None:
            prediction = self.check.prediction
            out["predicted_change"] = prediction.change if prediction else {}
            out["predicted_change_se"] = prediction.in_se if prediction else {}
            out["rounding_check"] = self.check.to_dict()
        return out

    def _plain(self) -> dict:
        return {"source": self.source, "person": self.person, "time": self.time, **self.timing.to_dict(),
                "occasions_per_person": dict(zip(("min", "median", "max"), self.occasions_per_person)),
                "complete_persons": self.complete_persons,
                "displacement_quantiles": dict(zip(("median", "p90", "max"), self.displacement_quantiles)),
                "median_gap": self.median_gap,
                "wide_form": {"grid": {"columns": len(self.timing.waves), "patterns": self.grid_patterns},
                              "exact_times": {"columns": self.exact_columns, "patterns": self.exact_patterns}},
                "waves_spread": [vars(s) for s in self.spread],
                "recommendation": vars(self.recommendation)}


def count_patterns(person: np.ndarray, column: np.ndarray) -> int:
    """Distinct sets of columns observed per person: the wide form's missing-data patterns.

    Works on the per-occasion arrays; `person` holds codes 0..N-1.
    """
    order = np.lexsort((column, person))
    p, c = person[order], np.asarray(column)[order]
    bounds = np.flatnonzero(np.diff(p)) + 1
    return len({chunk.tobytes() for chunk in np.split(c, bounds)})


def _spread(times: np.ndarray, index: np.ndarray, waves: tuple[float, ...]) -> tuple[WaveSpread, ...]:
    out = []
    for k, wave in enumerate(waves):
        t = times[index == k]
        if t.size == 0:
            out.append(WaveSpread(wave, 0, *([float("nan")] * 8)))
            continue
        q1, median, q3 = np.percentile(t, [25, 50, 75])
        moved = np.abs(t - wave)
        out.append(WaveSpread(wave=wave, n=int(t.size), minimum=float(t.min()), q1=float(q1), median=float(median),
                              q3=float(q3), maximum=float(t.max()), sd=float(t.std(ddof=1)) if t.size > 1 else 0.0,
                              displacement_mean=float(moved.mean()), displacement_max=float(moved.max())))
    return tuple(out)


def _histogram(times: np.ndarray, index: np.ndarray, n_waves: int) -> TimeHistogram:
    low, high = float(times.min()), float(times.max())
    edges = np.linspace(low, high if high > low else low + 1.0, HISTOGRAM_BINS + 1)
    counts = tuple(tuple(int(c) for c in np.histogram(times[index == k], bins=edges)[0]) for k in range(n_waves))
    return TimeHistogram(edges=tuple(float(e) for e in edges), counts=counts)


def _exact_columns(times: np.ndarray) -> np.ndarray:
    return np.unique(times, return_inverse=True)[1].ravel()


def summarise(person: np.ndarray, times: np.ndarray, waves: tuple[float, ...] | None = None, *,
              source: str = "<data>", person_name: str = "person", time_name: str = "time",
              check: RoundingCheck | None = None) -> TimingReport:
    """The timing report from integer person codes (0..N-1) and occasion times (one entry per occasion)."""
    timing, index = classify(person, times, waves)
    counts = np.bincount(person)
    counts = counts[counts > 0]
    moved = np.abs(times - np.asarray(timing.waves)[index])
    gaps = np.diff(timing.waves)
    pairs = np.unique(person * len(timing.waves) + index)
    complete = int((np.bincount(pairs // len(timing.waves)) == len(timing.waves)).sum())
    report = dict(
        source=source, person=person_name, time=time_name, timing=timing,
        spread=_spread(times, index, timing.waves),
        occasions_per_person=(int(counts.min()), float(np.median(counts)), int(counts.max())),
        complete_persons=complete,
        displacement_quantiles=tuple(float(q) for q in np.percentile(moved, [50, 90, 100])),
        median_gap=float(np.median(gaps)) if gaps.size else float("nan"),
        grid_patterns=count_patterns(person, index),
        exact_columns=timing.n_distinct_times, exact_patterns=count_patterns(person, _exact_columns(times)),
        histogram=_histogram(times, index, len(timing.waves)))
    return TimingReport(**report, recommendation=recommend({**report, "check": check}), check=check)


def check_waves(waves: tuple[float, ...] | None) -> tuple[float, ...] | None:
    """A wave grid must be finite and strictly increasing, with at least two values."""
    if waves is None:
        return None
    values = np.asarray(waves, dtype=float)
    if values.size < 2 or not np.isfinite(values).all() or (np.diff(values) <= 0).any():
        shown = ", ".join(f"{w:g}" for w in values)
        raise DataError(f"the wave grid must be at least two finite, strictly increasing times; got [{shown}]")
    return tuple(float(w) for w in values)


def _columns(frame: pd.DataFrame, label: str, person: str, time: str) -> tuple[np.ndarray, np.ndarray]:
    need_columns(frame, [("--person", person), ("--time", time)], label)
    times = numeric_column(frame, time, "time", label, allow_nan=False)
    if frame[person].isna().any():
        raise DataError(f"{label}: person column '{person}' has missing values")
    codes = pd.factorize(frame[person].astype(str), sort=False)[0]
    return codes.astype(np.int64), times


def inspect_frame(frame: pd.DataFrame, person: str, time: str, waves: tuple[float, ...] | None = None,
                  source: str = "<data>") -> TimingReport:
    """The timing report of a long-layout frame (one row per occasion); the frame is not changed."""
    codes, times = _columns(frame, source, person, time)
    waves = check_waves(waves)
    if np.unique(times).size < 2:
        raise DataError(f"{source}: time column '{time}' has a single value; there is no timing to inspect")
    keys = pd.DataFrame({"p": codes, "t": times})
    duplicated = keys.duplicated()
    if duplicated.any():
        row = frame.loc[duplicated.to_numpy()].iloc[0]
        raise DataError(f"{source}: person {row[person]!r} has more than one row at time {float(row[time]):g}")
    return summarise(codes, times, waves, source=source, person_name=person, time_name=time)


def inspect_file(path: str | Path, person: str, time: str, waves: tuple[float, ...] | None = None) -> TimingReport:
    """The timing report of a long-layout data file (.csv, .tsv, .parquet); the file is only read."""
    path = Path(path)
    waves = check_waves(waves)
    return inspect_frame(read_table(path, text_columns=[person]), person, time, waves, source=path.name)


def inspect_description(path, with_offset: bool = False) -> TimingReport:
    """`timing SPEC`: the timing report of a growth description's data, with the predicted and the measured
    change of every quantity on its wave grid (`described.check_description`)."""
    shaped, check = check_description(path, with_offset=with_offset)
    d = shaped.description.data
    return summarise(shaped.person_index, shaped.times, shaped.description.estimation.waves, source=Path(str(d.path)).name,
                     person_name=d.person, time_name=d.time, check=check)
