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
    """Persons with their own times, all with the same number of occasions: one stacked factorisation."""

    y: np.ndarray     # (m, n)
    X: np.ndarray     # (m, n, p)
    Z: np.ndarray     # (m, n, q)
    wave: np.ndarray  # (m, n)


@dataclass(frozen=True)
class _Patterns:
    """Persons grouped by shared times and waves (hence one covariance matrix per pattern), stacked.

    Each pattern keeps cross-product sums: with W = V^-1, sum_i X_i' W X_i = sum_ab W_ab xx[a, b],
    and likewise for X'Wy and y'Wy, so an evaluation costs the same however many persons share it.
    """

    count: np.ndarray  # (P,) persons per pattern
    Z: np.ndarray      # (P, n, q)
    wave: np.ndarray   # (P, n)
    xx: np.ndarray     # (P, n, n, p, p)
    xy: np.ndarray     # (P, n, n, p)
    yy: np.ndarray     # (P, n, n)

    @classmethod
    def of(cls, X: np.ndarray, y: np.ndarray, Z: np.ndarray, wave: np.ndarray, which: np.ndarray) -> "_Patterns":
        members = [np.flatnonzero(which == k) for k in range(which.max() + 1)]
        return cls(count=np.array([len(m) for m in members], float), Z=Z[[m[0] for m in members]],
                   wave=wave[[m[0] for m in members]],
                   xx=np.stack([np.einsum("map,mbr->abpr", X[m], X[m]) for m in members]),
                   xy=np.stack([np.einsum("map,mb->abp", X[m], y[m]) for m in members]),
                   yy=np.stack([y[m].T @ y[m] for m in members]))


@dataclass(frozen=True)
class _Pieces:
    """Sums over persons needed by every criterion at one set of variance parameters."""

    logdet: float
    xvx: np.ndarray  # sum X' V^-1 X
    xvy: np.ndarray  # sum X' V^-1 y
    yvy: float       # sum y' V^-1 y


def _batches(design: LongDesign) -> list[_Batch | _Patterns]:
    """Group persons by number of occasions, then by pattern (times and waves) where patterns repeat."""
    order = np.argsort(design.person, kind="stable")
    counts = np.bincount(design.person)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    out: list[_Batch | _Patterns] = []
    for n in np.unique(counts[counts > 0]):
        rows = order[(starts[counts == n][:, None] + np.arange(n)[None, :])]
        Z, wave = design.Z[rows], design.wave[rows]
        which = _pattern_index(np.concatenate([Z.reshape(len(rows), -1), wave.astype(float)], axis=1))
        if which is None:
            out.append(_Batch(design.y[rows], design.X[rows], Z, wave))
        else:
            out.append(_Patterns.of(design.X[rows], design.y[rows], Z, wave, which))
    return out


def _pattern_index(keys: np.ndarray) -> np.ndarray | None:
    """Pattern number of each row of `keys`, or None when patterns repeat too little to be worth sharing.

    Rows are grouped by a one-number digest (a fixed projection) and then checked
    exactly against their group's first row, so two different patterns never merge.
    """
    digest = keys @ np.random.default_rng(0).uniform(1.0, 2.0, keys.shape[1])
    _, first, which = np.unique(digest, return_index=True, return_inverse=True)
    if len(first) * 4 > len(keys) or not np.array_equal(keys, keys[first][which]):
        return None
    return which.ravel()


def _covariance(Z: np.ndarray, wave: np.ndarray, cov: np.ndarray, residual: np.ndarray) -> np.ndarray:
    V = Z @ cov @ np.swapaxes(Z, -1, -2)
    n = V.shape[-1]
    V[..., np.arange(n), np.arange(n)] += residual[wave]
    return V


def _contribution(group: _Batch | _Patterns, cov: np.ndarray, residual: np.ndarray):
    """(log|V|, X'WX, X'Wy, y'Wy) summed over a group's persons; None when V is not PD."""
    try:
        L = np.linalg.cholesky(_covariance(group.Z, group.wave, cov, residual))
    except np.linalg.LinAlgError:
        return None
    logdets = 2.0 * np.log(np.diagonal(L, axis1=-2, axis2=-1)).sum(axis=-1)
    if isinstance(group, _Patterns):
        inverse = np.linalg.solve(L, np.broadcast_to(np.eye(L.shape[-1]), L.shape))
        W = np.swapaxes(inverse, -1, -2) @ inverse
        return (float(logdets @ group.count), np.einsum("Pab,Pabpr->pr", W, group.xx),
                np.einsum("Pab,Pabp->p", W, group.xy), float((W * group.yy).sum()))
    logdet = float(logdets.sum())
    wx = np.linalg.solve(L, group.X)
    wy = np.linalg.solve(L, group.y[..., None])[..., 0]
    return (logdet, np.einsum("mnp,mnr->pr", wx, wx), np.einsum("mnp,mn->p", wx, wy), float((wy * wy).sum()))


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
        for group in self.batches:
            parts = _contribution(group, cov, residual)
            if parts is None:
                return None
            logdet, xvx, xvy, yvy = logdet + parts[0], xvx + parts[1], xvy + parts[2], yvy + parts[3]
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
