"""Simulate panels of several outcomes for the cross-lagged family (fixed seeds, invented data)."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class PanelTruth:
    """Population values. `paths[to][from]` is the effect of outcome `from` at t-1 on `to` at t.

    kind: "clpm" (no person effects), "dynamic-panel" (a stable person effect enters every equation from
    wave 2 on; with `initial_from_person` it also shaped the first wave), "ri-clpm" (stable traits plus
    within-person dynamics).
    """

    n_persons: int
    n_waves: int
    paths: tuple[tuple[float, ...], ...]
    kind: str = "clpm"
    intercepts: tuple[float, ...] = (0.0, 0.0)
    residual_cov: tuple[tuple[float, ...], ...] = ((1.0, 0.3), (0.3, 1.0))
    person_cov: tuple[tuple[float, ...], ...] = ((1.0, 0.0), (0.0, 1.0))
    first_cov: tuple[tuple[float, ...], ...] = ((1.0, 0.3), (0.3, 1.0))
    means: tuple[float, ...] = (0.0, 0.0)
    initial_from_person: bool = False
    missing_rate: float = 0.0
    names: tuple[str, ...] = field(default=("x", "y"))


def simulate_panel(truth: PanelTruth, seed: int) -> pd.DataFrame:
    """Long data: columns person, wave (1..T) and one column per outcome (NaN where missing)."""
    rng = np.random.default_rng(seed)
    N, T, K = truth.n_persons, truth.n_waves, len(truth.names)
    A = np.asarray(truth.paths, float)
    person = rng.multivariate_normal(np.zeros(K), truth.person_cov, N)
    first = rng.multivariate_normal(np.zeros(K), truth.first_cov, N)
    values = np.zeros((N, T, K))
    if truth.kind == "ri-clpm":
        within = first
        values[:, 0] = np.asarray(truth.means) + person + within
        for t in range(1, T):
            within = within @ A.T + rng.multivariate_normal(np.zeros(K), truth.residual_cov, N)
            values[:, t] = np.asarray(truth.means) + person + within
    else:
        start = np.asarray(truth.means) + first
        if truth.kind == "dynamic-panel" and truth.initial_from_person:
            start = start + person @ np.linalg.inv(np.eye(K) - A).T
        values[:, 0] = start
        effect = person if truth.kind == "dynamic-panel" else 0.0
        for t in range(1, T):
            noise = rng.multivariate_normal(np.zeros(K), truth.residual_cov, N)
            values[:, t] = np.asarray(truth.intercepts) + values[:, t - 1] @ A.T + effect + noise
    values[rng.random(values.shape) < truth.missing_rate] = np.nan
    frame = pd.DataFrame({"person": np.repeat([f"p{i:04d}" for i in range(N)], T),
                          "wave": np.tile(np.arange(1, T + 1), N).astype(float)})
    for k, name in enumerate(truth.names):
        frame[name] = values[:, :, k].ravel()
    return frame
