"""The referee for path models: full-information normal log-likelihood, persons grouped by missing pattern."""
from __future__ import annotations

import numpy as np

from ..compile.path import PathModel
from .likelihood import LOG_2PI


class PathReferee:
    """Log-likelihood of wide data (persons x observed variables, NaN = missing) under a path model."""

    def __init__(self, model: PathModel, data: np.ndarray):
        self.model = model
        seen = np.isfinite(data)
        patterns, which = np.unique(seen, axis=0, return_inverse=True)
        self.groups = [(pattern, data[which.ravel() == g][:, pattern]) for g, pattern in enumerate(patterns)
                       if pattern.any()]
        self.n_observed = int(seen.sum())

    def log_likelihood(self, values: dict[str, float]) -> float:
        mean, cov = self.model.moments(values)
        total = 0.0
        for pattern, block in self.groups:
            try:
                L = np.linalg.cholesky(cov[np.ix_(pattern, pattern)])
            except np.linalg.LinAlgError:
                return -np.inf
            white = np.linalg.solve(L, (block - mean[pattern]).T)
            total -= 0.5 * (block.size * LOG_2PI + len(block) * 2.0 * np.log(np.diag(L)).sum()
                            + float((white * white).sum()))
        return float(total)
