"""The referee: an independent marginal log-likelihood of the growth model.

Each person's observed vector is y_i ~ N(X_i b, Z_i G Z_i' + diag(s2[wave])).
Persons are batched by their number of occasions, so one stacked Cholesky per
batch covers balanced, missing-occasion and individually-timed designs alike.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compile import GrowthParameters, LongDesign

LOG_2PI = float(np.log(2 * np.pi))


@dataclass(frozen=True)
class _Batch:
    y: np.ndarray   # (m, n)
    X: np.ndarray   # (m, n, p)
    Z: np.ndarray   # (m, n, q)
    wave: np.ndarray  # (m, n)


@dataclass(frozen=True)
class _Pieces:
    """Sums over persons needed by every criterion at one set of variance parameters."""

    logdet: float
    xvx: np.ndarray  # sum X' V^-1 X
    xvy: np.ndarray  # sum X' V^-1 y
    yvy: float       # sum y' V^-1 y


def _batches(design: LongDesign) -> list[_Batch]:
    order = np.argsort(design.person, kind="stable")
    counts = np.bincount(design.person)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    out = []
    for n in np.unique(counts[counts > 0]):
        rows = order[(starts[counts == n][:, None] + np.arange(n)[None, :])]
        out.append(_Batch(design.y[rows], design.X[rows], design.Z[rows], design.wave[rows]))
    return out


class Referee:
    """Log-likelihood (ML or REML) of one long design, evaluated at any parameter point."""

    def __init__(self, design: LongDesign):
        self.design = design
        self.batches = _batches(design)
        self.n_obs = len(design.y)
        self.n_fixed = design.X.shape[1]

    def _pieces(self, cov: np.ndarray, residual: np.ndarray) -> _Pieces | None:
        p = self.n_fixed
        logdet, xvx, xvy, yvy = 0.0, np.zeros((p, p)), np.zeros(p), 0.0
        for b in self.batches:
            V = b.Z @ cov @ b.Z.transpose(0, 2, 1)
            V[:, np.arange(V.shape[1]), np.arange(V.shape[1])] += residual[b.wave]
            try:
                L = np.linalg.cholesky(V)
            except np.linalg.LinAlgError:
                return None
            logdet += 2.0 * float(np.log(np.diagonal(L, axis1=1, axis2=2)).sum())
            wx = np.linalg.solve(L, b.X)
            wy = np.linalg.solve(L, b.y[..., None])[..., 0]
            xvx += np.einsum("mnp,mnr->pr", wx, wx)
            xvy += np.einsum("mnp,mn->p", wx, wy)
            yvy += float((wy * wy).sum())
        return _Pieces(logdet, xvx, xvy, yvy)

    def log_likelihood(self, params: GrowthParameters) -> float:
        """Full ML log-likelihood at the given fixed effects and variances (-inf where V is not PD)."""
        pieces = self._pieces(params.cov, params.residual)
        if pieces is None:
            return -np.inf
        b = params.fixed
        quad = pieces.yvy - 2.0 * b @ pieces.xvy + b @ pieces.xvx @ b
        return -0.5 * (self.n_obs * LOG_2PI + pieces.logdet + quad)

    def profile(self, params: GrowthParameters, reml: bool = False) -> float:
        """ML or REML log-likelihood with the fixed effects at their GLS value for these variances."""
        pieces = self._pieces(params.cov, params.residual)
        if pieces is None:
            return -np.inf
        try:
            chol = np.linalg.cholesky(pieces.xvx)
        except np.linalg.LinAlgError:
            return -np.inf
        half = np.linalg.solve(chol, pieces.xvy)
        quad = pieces.yvy - float(half @ half)
        if not reml:
            return -0.5 * (self.n_obs * LOG_2PI + pieces.logdet + quad)
        logdet_x = 2.0 * float(np.log(np.diag(chol)).sum())
        return -0.5 * ((self.n_obs - self.n_fixed) * LOG_2PI + pieces.logdet + logdet_x + quad)

    def gls_fixed(self, params: GrowthParameters) -> GrowthParameters:
        """The fixed effects that maximise the likelihood for these variances."""
        pieces = self._pieces(params.cov, params.residual)
        if pieces is None:
            return params
        return params.with_fixed(np.linalg.solve(pieces.xvx, pieces.xvy))

    def fixed_covariance(self, params: GrowthParameters) -> np.ndarray:
        """(sum X' V^-1 X)^-1: the sampling covariance of the fixed effects."""
        pieces = self._pieces(params.cov, params.residual)
        if pieces is None:
            return np.full((self.n_fixed, self.n_fixed), np.nan)
        return np.linalg.inv(pieces.xvx)

    def criterion(self, params: GrowthParameters, reml: bool) -> float:
        """What each library maximises: the full ML log-likelihood, or the REML one."""
        return self.profile(params, reml=True) if reml else self.log_likelihood(params)
