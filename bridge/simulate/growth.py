"""Draw long-layout growth data whose population values are known exactly.

The generating model, for person i at occasion j with observed time t_ij, is

    y_ij = sum_k (mean_k + sum_p effect_{p,k} * x_ip + u_ik) * t_ij ** k + e_ij

where k = 0, 1, 2 for the intercept, slope and quadratic terms, u_i is drawn
from N(0, random_cov) over ``random_terms`` (zero for the other terms) and
e_ij from N(0, residual variance of wave j).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

#: The power of time each growth term multiplies.
TERM_POWERS: dict[str, int] = {"intercept": 0, "slope": 1, "quadratic": 2}
_RESERVED = ("person", "time", "outcome")


def _finite(value: object) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool) \
        and math.isfinite(float(value))


def _binary_levels(name: str, spec: str) -> tuple[str, str] | None:
    """The two levels of a ``binary:<level0>,<level1>`` spec, or None for ``normal``."""
    if spec == "normal":
        return None
    if not isinstance(spec, str) or not spec.startswith("binary:"):
        raise ValueError(f"predictor {name!r} has unknown distribution {spec!r}; "
                         "use 'normal' or 'binary:<level0>,<level1>'")
    levels = [level.strip() for level in spec[len("binary:"):].split(",")]
    if len(levels) != 2 or not all(levels) or levels[0] == levels[1]:
        raise ValueError(f"predictor {name!r} needs two distinct non-empty binary levels, got {spec!r}")
    return levels[0], levels[1]


@dataclass(frozen=True)
class GrowthTruth:
    """Population values of a growth model, checked when the object is built.

    Attributes:
        n_persons: number of persons to draw.
        waves: planned measurement times, strictly increasing.
        mean: fixed effect of each growth term ("intercept", "slope", optionally
            "quadratic") when every predictor is 0.
        random_cov: covariance matrix of the person effects, rows and columns in
            the order of ``random_terms``; must be positive semi-definite.
        random_terms: growth terms that vary across persons.
        residual: one residual variance for all waves, or one per wave.
        effects: predictor -> {term: shift of that term per unit of the predictor}.
        predictors: predictor -> "normal" (standard normal) or
            "binary:<level0>,<level1>" (two text levels drawn 50/50; the effect
            applies to level1).
        jitter: each observed time is the wave plus a uniform(-jitter, +jitter)
            offset drawn separately for every person and occasion.
        missing_rate: probability that an occasion is missing, independently of
            everything else; each person keeps at least one occasion.

    Raises:
        ValueError: with a one-line message naming the first problem found.
    """

    n_persons: int
    waves: tuple[float, ...]
    mean: dict[str, float]
    random_cov: tuple[tuple[float, ...], ...]
    random_terms: tuple[str, ...] = ("intercept", "slope")
    residual: float | tuple[float, ...] = 1.0
    effects: dict[str, dict[str, float]] = field(default_factory=dict)
    predictors: dict[str, str] = field(default_factory=dict)
    jitter: float = 0.0
    missing_rate: float = 0.0

    def __post_init__(self) -> None:
        # Store sequences as tuples so a truth cannot change after validation.
        set_ = object.__setattr__
        for name in ("waves", "random_terms", "random_cov", "residual"):
            value = getattr(self, name)
            if name == "residual" and _finite(value):
                continue
            try:
                set_(self, name, tuple(tuple(row) for row in value) if name == "random_cov" else tuple(value))
            except TypeError:
                raise ValueError(f"{name} must be a sequence, got {value!r}") from None
        self._validate()

    def _validate(self) -> None:
        n = self.n_persons
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
            raise ValueError(f"n_persons must be a positive integer, got {n!r}")
        if not self.waves:
            raise ValueError("waves must contain at least one planned time")
        if not all(_finite(w) for w in self.waves) or any(b <= a for a, b in zip(self.waves, self.waves[1:])):
            raise ValueError(f"waves must be finite and strictly increasing, got {self.waves!r}")
        for term, value in self.mean.items():
            if term not in TERM_POWERS:
                raise ValueError(f"mean has unknown term {term!r}; allowed: {', '.join(TERM_POWERS)}")
            if not _finite(value):
                raise ValueError(f"mean of {term!r} must be a finite number, got {value!r}")
        for term in ("intercept", "slope"):
            if term not in self.mean:
                raise ValueError(f"mean must give a value for {term!r}")
        if len(set(self.random_terms)) != len(self.random_terms):
            raise ValueError(f"random_terms has repeated names: {self.random_terms!r}")
        for term in self.random_terms:
            if term not in self.mean:
                raise ValueError(f"random term {term!r} has no entry in mean")
        self._validate_cov()
        self._validate_residual()
        for name, spec in self.predictors.items():
            if name in _RESERVED:
                raise ValueError(f"predictor name {name!r} clashes with an output column")
            _binary_levels(name, spec)
        for name, shifts in self.effects.items():
            if name not in self.predictors:
                raise ValueError(f"effects name predictor {name!r}, which is not declared in predictors")
            for term, value in shifts.items():
                if term not in self.mean:
                    raise ValueError(f"effect of {name!r} on {term!r}: that term has no entry in mean")
                if not _finite(value):
                    raise ValueError(f"effect of {name!r} on {term!r} must be a finite number, got {value!r}")
        if not _finite(self.jitter) or self.jitter < 0:
            raise ValueError(f"jitter must be a finite non-negative number, got {self.jitter!r}")
        gaps = np.diff(np.asarray(self.waves, dtype=float))
        if gaps.size and self.jitter >= gaps.min() / 2:
            raise ValueError(f"jitter must be smaller than half the smallest gap between waves ({gaps.min() / 2:g})")
        if not _finite(self.missing_rate) or not 0 <= self.missing_rate < 1:
            raise ValueError(f"missing_rate must be in [0, 1), got {self.missing_rate!r}")

    def _validate_cov(self) -> None:
        q = len(self.random_terms)
        if len(self.random_cov) != q or any(len(row) != q for row in self.random_cov):
            raise ValueError(f"random_cov must be {q}x{q} to match random_terms {self.random_terms!r}")
        if not all(_finite(v) for row in self.random_cov for v in row):
            raise ValueError("random_cov must contain only finite numbers")
        cov = np.asarray(self.random_cov, dtype=float).reshape(q, q)
        if not np.allclose(cov, cov.T, rtol=0, atol=1e-12):
            raise ValueError("random_cov must be symmetric")
        smallest = float(np.linalg.eigvalsh(cov).min()) if q else 0.0
        if smallest < -1e-10 * max(1.0, float(np.abs(cov).max(initial=0.0))):
            raise ValueError(f"random_cov must be positive semi-definite (smallest eigenvalue {smallest:.3g})")

    def _validate_residual(self) -> None:
        values = (self.residual,) if _finite(self.residual) else self.residual
        if not _finite(self.residual) and len(values) != len(self.waves):
            raise ValueError(f"residual must be one variance or one per wave ({len(self.waves)}), got {len(values)}")
        if not all(_finite(v) and v >= 0 for v in values):
            raise ValueError(f"residual variances must be finite and non-negative, got {self.residual!r}")

    def residual_by_wave(self) -> np.ndarray:
        """The residual variance at each planned wave."""
        if _finite(self.residual):
            return np.full(len(self.waves), float(self.residual))
        return np.asarray(self.residual, dtype=float)


def simulate_growth(truth: GrowthTruth, seed: int) -> pd.DataFrame:
    """Draw one long-layout data set from ``truth``.

    Random numbers come only from ``numpy.random.default_rng(seed)``, drawn in a
    fixed order (predictors, person effects, time offsets, residuals,
    missingness), so the same truth and seed always give the same frame.

    Returns:
        Columns ``person`` (text ids such as "p0001"), ``time``, ``outcome``,
        then one column per predictor (float for normal, text level for binary).
        Rows are ordered by person, then wave; missing occasions are absent.

    Raises:
        ValueError: if ``seed`` is not a non-negative integer.
    """
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ValueError(f"seed must be a non-negative integer, got {seed!r}")
    rng = np.random.default_rng(seed)
    n, waves = int(truth.n_persons), np.asarray(truth.waves, dtype=float)
    n_waves = waves.size

    # Person-level coefficients: fixed part plus predictor shifts.
    coef = {term: np.full(n, float(value)) for term, value in truth.mean.items()}
    columns: dict[str, np.ndarray] = {}
    for name, spec in truth.predictors.items():
        levels = _binary_levels(name, spec)
        if levels is None:
            x = rng.standard_normal(n)
            columns[name] = x
        else:
            x = rng.integers(0, 2, size=n).astype(float)
            columns[name] = np.where(x == 1.0, levels[1], levels[0]).astype(object)
        for term, shift in truth.effects.get(name, {}).items():
            coef[term] = coef[term] + float(shift) * x

    # Person effects u ~ N(0, G) via a symmetric square root (works for singular G).
    q = len(truth.random_terms)
    if q:
        values, vectors = np.linalg.eigh(np.asarray(truth.random_cov, dtype=float))
        root = vectors * np.sqrt(np.clip(values, 0.0, None))
        u = rng.standard_normal((n, q)) @ root.T
        for j, term in enumerate(truth.random_terms):
            coef[term] = coef[term] + u[:, j]

    time = waves + rng.uniform(-truth.jitter, truth.jitter, size=(n, n_waves)) if truth.jitter > 0 \
        else np.broadcast_to(waves, (n, n_waves)).copy()
    outcome = rng.standard_normal((n, n_waves)) * np.sqrt(truth.residual_by_wave())
    for term, values_k in coef.items():
        outcome += values_k[:, None] * time ** TERM_POWERS[term]

    keep = np.ones((n, n_waves), dtype=bool)
    if truth.missing_rate > 0:
        keep = rng.random((n, n_waves)) >= truth.missing_rate
        empty = ~keep.any(axis=1)
        keep[np.flatnonzero(empty), rng.integers(0, n_waves, size=int(empty.sum()))] = True

    width = max(4, len(str(n)))
    ids = np.array([f"p{i + 1:0{width}d}" for i in range(n)], dtype=object)
    rows, cols = np.nonzero(keep)  # row-major: person, then wave
    frame = pd.DataFrame({"person": ids[rows], "time": time[rows, cols], "outcome": outcome[rows, cols]})
    for name, x in columns.items():
        frame[name] = x[rows]
    return frame
