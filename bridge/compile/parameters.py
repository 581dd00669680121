"""The parameter space both forms of a growth model share, on the internal scale.

A :class:`GrowthParameters` holds fixed effects, the covariance of the person
effects and one residual variance per wave (all equal under `residuals: equal`).
Both libraries' solutions are translated into it, the referee evaluates it, and
:class:`Scaling` turns it into quantities on the user's scale.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class GrowthParameters:
    fixed: np.ndarray      # (p,) in the order of CompiledGrowth.fixed_columns
    cov: np.ndarray        # (q, q) over CompiledGrowth.random_terms
    residual: np.ndarray   # (W,) one per wave

    def variance_vector(self, equal_residuals: bool) -> np.ndarray:
        """Free variance parameters: lower triangle of `cov` (row-wise), then residual(s)."""
        rows, cols = np.tril_indices(self.cov.shape[0])
        residual = self.residual[:1] if equal_residuals else self.residual
        return np.concatenate([self.cov[rows, cols], residual])

    def with_variances(self, vector: np.ndarray, equal_residuals: bool) -> "GrowthParameters":
        """The inverse of :meth:`variance_vector` (fixed effects kept)."""
        q = self.cov.shape[0]
        rows, cols = np.tril_indices(q)
        cov = np.zeros((q, q))
        cov[rows, cols] = vector[: len(rows)]
        cov[cols, rows] = vector[: len(rows)]
        rest = vector[len(rows):]
        residual = np.full(len(self.residual), rest[0]) if equal_residuals else np.asarray(rest, float)
        return GrowthParameters(self.fixed, cov, residual)

    def with_fixed(self, fixed: np.ndarray) -> "GrowthParameters":
        return GrowthParameters(np.asarray(fixed, float), self.cov, self.residual)


@dataclass(frozen=True)
class Scaling:
    """Internal scale: y' = (y - y_center) / y_scale, t' = (t - t_origin) * t_unit / t_scale, x' = x / x_scale.

    (t - t_origin) * t_unit is the form's time; quantities are reported per unit of it.
    """

    y_center: float
    y_scale: float
    t_origin: float
    t_scale: float
    x_scale: np.ndarray
    t_unit: float = 1.0

    def outcome(self, y: np.ndarray) -> np.ndarray:
        return (y - self.y_center) / self.y_scale

    def time(self, t: np.ndarray) -> np.ndarray:
        return (t - self.t_origin) * self.t_unit / self.t_scale

    def log_jacobian(self, n_observations: int) -> float:
        """Add to an internal-scale log-likelihood to get the user's-scale one."""
        return -n_observations * float(np.log(self.y_scale))


def psd_factor(cov: np.ndarray) -> np.ndarray:
    """A lower-triangular L with L L' = cov for a positive semidefinite (possibly singular) matrix."""
    w, V = np.linalg.eigh((cov + cov.T) / 2)
    root = V * np.sqrt(np.clip(w, 0.0, None))
    R = np.linalg.qr(root.T, mode="r")      # root root' = R'R
    L = R.T
    return L * np.where(np.diag(L) < 0, -1.0, 1.0)[None, :]


def nearest_psd(cov: np.ndarray) -> np.ndarray:
    w, V = np.linalg.eigh((cov + cov.T) / 2)
    return (V * np.clip(w, 0.0, None)) @ V.T


def is_psd(cov: np.ndarray) -> bool:
    w = np.linalg.eigvalsh(cov)
    return bool(w.min() >= -1e-10 * max(float(np.abs(w).max()), 1e-12))
