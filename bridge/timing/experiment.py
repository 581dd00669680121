"""The rounding experiment: fit the wide form on ever finer wave grids and measure how far it moves.

Level 0 is the design's wave grid (the description's `estimation.waves`, or the grid the
reconciler infers). Level k splits every gap of level k-1 in half and extends the grid by
whole steps to cover the earliest and latest times. Only grid points that receive at least
one occasion become wide-form columns (an empty column carries no data, and dropping it
moves no occasion). Each level is fitted by the pipeline itself: the description with
`estimation.waves` set to the level's grid, shaped with `shape_frame` and evaluated with
`bridge.reconcile.evaluation.evaluate` (both fits, the referee's checks and refits). The
long-form mixed model always uses the exact times, so its level-0 solution is the reference.
A level whose columns are those of the level before (no occasion moved) repeats that
level's fit instead of refitting it. The wide form keeps one residual variance on every grid
(`residuals: per-wave` is set to `equal`), as the exact-time mixed model has: a variance
per column would change meaning from grid to grid.

Stopping rule: refine while the next grid has at most `max_columns` wide columns, at most
`max_patterns` missing-data patterns, puts no two occasions of one person on one column,
and the level is at most `max_levels`.
"""
from __future__ import annotations

import logging
import time
from contextlib import contextmanager
from dataclasses import dataclass, replace

import numpy as np

from ..compile import Plan
from ..data import ShapedData, shape_frame
from ..data.reading import read_table
from ..data.timing import nearest_wave
from ..progress import Progress, quiet
from ..errors import DescriptionError
from ..spec import Description, Residuals, load
from ..spec.vocabulary import Kind
from .inspect import count_patterns

MAX_COLUMNS = 50
MAX_PATTERNS = 1000
MAX_LEVELS = 5


@dataclass(frozen=True)
class Limits:
    """When the wide form counts as impractical: the experiment stops before such a grid."""

    max_columns: int = MAX_COLUMNS
    max_patterns: int = MAX_PATTERNS
    max_levels: int = MAX_LEVELS

    def describe(self) -> str:
        return (f"refine while the next grid has at most {self.max_columns} wide columns and at most "
                f"{self.max_patterns} missing-data patterns, up to level {self.max_levels}")


@dataclass(frozen=True)
class Grid:
    """One wave grid of the experiment before fitting: its occupied points and what it costs."""

    level: int
    step: float                 # the spacing the grid was built with (its smallest gap)
    waves: tuple[float, ...]    # occupied grid points: the wide form's columns
    patterns: int
    displacement_mean: float
    displacement_max: float
    shared_persons: int         # persons with two occasions on one column (the wide form cannot hold them)
    gap_max: float = float("nan")   # the largest gap between neighbouring grid points (the extension may differ)

    @property
    def columns(self) -> int:
        return len(self.waves)

    @property
    def spacing(self) -> str:
        """The grid's gaps: one number when even, the smallest and largest otherwise."""
        if not np.isfinite(self.gap_max) or np.isclose(self.gap_max, self.step):
            return f"{self.step:.4g}"
        return f"{self.step:.4g} to {self.gap_max:.4g}"


@dataclass(frozen=True)
class GridFit:
    """The wide form fitted on one grid, against the exact-time mixed model."""

    grid: Grid
    sem: dict[str, float]            # wide-form estimates on this grid
    deviation: dict[str, float]      # wide form on this grid minus the exact-time mixed model
    seconds_sem: float
    seconds_mixed: float
    seconds_total: float             # shaping, both fits and the referee
    refits: int                      # refits the referee ordered
    same_as: int | None = None       # the level whose wide form this grid repeats (not refitted)


@dataclass(frozen=True)
class RoundingExperiment:
    """Every grid's fit, the exact-time reference and the rule that ended the refinement."""

    description: str
    exact: dict[str, float]          # the long-form mixed model on the exact times
    exact_se: dict[str, float]
    fits: tuple[GridFit, ...]
    rule: str
    stopped: str

    @property
    def keys(self) -> tuple[str, ...]:
        return tuple(self.exact)

    def in_standard_errors(self, key: str) -> list[float]:
        """The deviation of one quantity at every level, in units of the exact-time standard error."""
        se = self.exact_se.get(key, float("nan"))
        return [f.deviation[key] / se if se and np.isfinite(se) else float("nan") for f in self.fits]

    def largest(self, index: int) -> tuple[str, float]:
        """The quantity furthest from the exact-time value at one level, in standard errors."""
        values = {k: self.in_standard_errors(k)[index] for k in self.keys}
        values = {k: v for k, v in values.items() if np.isfinite(v)}
        if not values:
            return "", float("nan")
        key = max(values, key=lambda k: abs(values[k]))
        return key, values[key]

    def worse_notes(self, margin: float = 0.1) -> tuple[str, ...]:
        """Each finer level on which some quantity moved further from the exact-time value (by more than
        `margin` SE) than on the level before, with what was measured and why."""
        notes = []
        for i in range(1, len(self.fits)):
            if self.fits[i].same_as is not None:
                continue
            pairs = {k: self.in_standard_errors(k)[i - 1: i + 1] for k in self.keys}
            worse = [f"{k} {a:+.2f} -> {b:+.2f} SE" for k, (a, b) in pairs.items()
                     if np.isfinite(a) and np.isfinite(b) and abs(b) > abs(a) + margin]
            if not worse:
                continue
            before, after = self.fits[i - 1].grid, self.fits[i].grid
            move = f"the mean move went from {before.displacement_mean:.3g} to {after.displacement_mean:.3g}"
            why = ("A smaller move lowers the predicted (average) change, but on one data set every grid moves "
                   "different occasions in different directions, and that data-set-specific part need not "
                   "shrink with the grid." if after.displacement_mean < 0.99 * before.displacement_mean else
                   "The new grid points catch almost no occasions, so the finer grid cannot help.")
            notes.append(f"A finer grid is worse here: level {after.level} against level {before.level}, "
                         f"{'; '.join(worse)}; {move}. {why}")
        return tuple(notes)

    def to_dict(self) -> dict:
        """Plain data for JSON (docs/timing-lab.md)."""
        return {"description": self.description, "exact": self.exact, "exact_se": self.exact_se,
                "rule": self.rule, "stopped": self.stopped, "finer_but_worse": list(self.worse_notes()),
                "levels": [{"level": f.grid.level, "step": f.grid.step, "spacing": f.grid.spacing,
                            "deviation_se": {k: self.in_standard_errors(k)[i] for k in self.keys},
                            "waves": list(f.grid.waves),
                            "columns": f.grid.columns, "patterns": f.grid.patterns,
                            "displacement": {"mean": f.grid.displacement_mean, "max": f.grid.displacement_max},
                            "sem": f.sem, "deviation": f.deviation, "refits": f.refits, "same_as": f.same_as,
                            "seconds": {"sem": f.seconds_sem, "mixed": f.seconds_mixed, "total": f.seconds_total}}
                           for i, f in enumerate(self.fits)]}


def refine(waves: np.ndarray) -> np.ndarray:
    """Split every gap of a grid in half."""
    return np.sort(np.concatenate([waves, (waves[:-1] + waves[1:]) / 2]))


def extend(waves: np.ndarray, low: float, high: float) -> np.ndarray:
    """Add whole steps (the end gaps) beyond both ends until the grid covers [low, high] within half a step."""
    first, last = waves[1] - waves[0], waves[-1] - waves[-2]
    before = int(max(0, np.ceil((waves[0] - low) / first - 0.5)))
    after = int(max(0, np.ceil((high - waves[-1]) / last - 0.5)))
    return np.concatenate([waves[0] - first * np.arange(before, 0, -1), waves,
                           waves[-1] + last * np.arange(1, after + 1)])


def grid_at(level: int, design: tuple[float, ...], person: np.ndarray, times: np.ndarray) -> Grid:
    """The grid of one level, reduced to the points that receive an occasion."""
    points = np.asarray(design, float)
    for _ in range(level):
        points = refine(points)
    if level:
        points = extend(points, float(times.min()), float(times.max()))
    index = nearest_wave(times, points)
    used, column = np.unique(index, return_inverse=True)
    moved = np.abs(times - points[index])
    cells, repeats = np.unique(person.astype(np.int64) * len(points) + index, return_counts=True)
    shared = len(np.unique(cells[repeats > 1] // len(points)))
    return Grid(level=level, step=float(np.diff(points).min()), gap_max=float(np.diff(points).max()),
                waves=tuple(float(w) for w in points[used]),
                patterns=count_patterns(person, column.ravel()), displacement_mean=float(moved.mean()),
                displacement_max=float(moved.max()), shared_persons=shared)


@contextmanager
def _fitting_quietly():
    """One BLAS thread and no library log lines while fitting.

    semopy's full-information objective inverts one small matrix per missing-data pattern
    and iteration; a multi-threaded BLAS adds overhead to each (tens of times slower on a
    busy machine). semopy also logs a warning on the root logger whenever its start
    covariance is not positive definite, which fine grids always cause.
    """
    from threadpoolctl import threadpool_limits

    logging.disable(logging.WARNING)
    try:
        with threadpool_limits(limits=1):
            yield
    finally:
        logging.disable(logging.NOTSET)


def _fit(description: Description, frame, grid: Grid, progress: Progress):
    from ..reconcile.evaluation import evaluate

    began = time.perf_counter()
    desc = replace(description, estimation=replace(description.estimation, waves=grid.waves))
    shaped = shape_frame(desc, frame)
    with progress(f"level {grid.level}: {grid.columns} wide columns, {grid.patterns} missing-data patterns"):
        with _fitting_quietly():
            evaluation = evaluate(shaped, Plan.from_description(desc))
    return evaluation, time.perf_counter() - began


def _grid_fit(grid: Grid, evaluation, seconds: float, exact: dict[str, float]) -> GridFit:
    sem = {r.key: float(r.sem.estimate) for r in evaluation.rows}
    adj = evaluation.adjudication
    return GridFit(grid=grid, sem=sem, deviation={k: sem[k] - exact[k] for k in exact if k in sem},
                   seconds_sem=float(adj.sem.seconds), seconds_mixed=float(adj.mixed.seconds),
                   seconds_total=float(seconds), refits=len(adj.refits))


def _next_grid(level: int, design, shaped: ShapedData, limits: Limits) -> tuple[Grid | None, str]:
    if level > limits.max_levels:
        return None, f"reached the last level ({limits.max_levels})"
    grid = grid_at(level, design, shaped.person_index, shaped.times)
    if grid.columns > limits.max_columns:
        return None, f"level {level} would need {grid.columns} wide columns (more than {limits.max_columns})"
    if grid.patterns > limits.max_patterns:
        return None, (f"level {level} would have {grid.patterns} missing-data patterns "
                      f"(more than {limits.max_patterns})")
    if grid.shared_persons:
        return None, (f"level {level} would put two occasions of {grid.shared_persons} person(s) on one wide "
                      "column")
    return grid, ""


def run_experiment(description: Description | str, limits: Limits = Limits(), frame=None,
                   progress: Progress = quiet) -> RoundingExperiment:
    """The rounding experiment on a description's data (or on `frame`, laid out as the description says)."""
    description = description if isinstance(description, Description) else load(description)
    if description.model.kind is not Kind.GROWTH:
        raise DescriptionError(f"{description.label}: the rounding experiment is for growth models; "
                               f"model.kind is {description.model.kind.value}")
    if description.model.residuals is not Residuals.EQUAL:  # one variance per column cannot follow the grid
        description = replace(description, model=replace(description.model, residuals=Residuals.EQUAL))
    frame = read_table(description.data.path, text_columns=(description.data.person, *description.model.predictors)) \
        if frame is None else frame
    base = shape_frame(description, frame)
    design = base.timing.waves
    grid = grid_at(0, design, base.person_index, base.times)
    evaluation, seconds = _fit(description, frame, grid, progress)
    exact = {r.key: float(r.mixed.estimate) for r in evaluation.rows}
    exact_se = {r.key: float(r.mixed.se) for r in evaluation.rows}
    fits = [_grid_fit(grid, evaluation, seconds, exact)]
    level = 1
    while True:
        grid, stopped = _next_grid(level, design, base, limits)
        if grid is None:
            break
        previous = fits[-1]
        if grid.waves == previous.grid.waves:  # no occasion moved: the same wide form, not refitted
            same = previous.grid.level if previous.same_as is None else previous.same_as
            fits.append(replace(previous, grid=grid, seconds_sem=0.0, seconds_mixed=0.0, seconds_total=0.0,
                                refits=0, same_as=same))
        else:
            fits.append(_grid_fit(grid, *_fit(description, frame, grid, progress), exact))
        level += 1
    return RoundingExperiment(description=description.label, exact=exact, exact_se=exact_se, fits=tuple(fits),
                              rule=limits.describe(), stopped=stopped)
