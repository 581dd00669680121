"""The growth family's two parameter spaces, as the referee certifies and maximises them.

- `wide` (what semopy fits): variances of the person effects and residual variance(s) >= 0, the
  covariances free; the person-effect covariance matrix may be indefinite as long as every person's
  covariance matrix stays positive definite.
- `psd` (what MixedLM fits): the person-effect covariance positive semidefinite, written through its
  Cholesky factor (diagonal >= 0), so every point of the vector space is a valid matrix.

The fixed effects are profiled out (their GLS value for the variances), so the referee works over the
variance parameters only; the library's own fixed effects enter through the reproduction check and
the gain (`certificate.certify(at_solution=...)`) and through their own move check here.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..compile import CompiledGrowth, GrowthParameters
from ..compile.parameters import is_psd, nearest_psd, psd_factor
from .certificate import MOVE_RELATIVE, MOVE_SE, Certificate, certify, maximise_locally
from .likelihood import Referee

SINGULAR = 1e-8   # smallest/largest eigenvalue of the person-effect covariance at which it counts as singular


@dataclass(frozen=True)
class GrowthSpace:
    """One form's model as the referee sees it: its design, residual structure, criterion and space."""

    referee: Referee
    template: GrowthParameters
    equal_residuals: bool
    reml: bool
    psd: bool
    shift: float                 # added to the internal criterion to give the user's-scale value

    @property
    def _q(self) -> int:
        return self.template.cov.shape[0]

    def vector(self, params: GrowthParameters) -> np.ndarray:
        if not self.psd:
            return params.variance_vector(self.equal_residuals)
        rows, cols = np.tril_indices(self._q)
        residual = params.residual[:1] if self.equal_residuals else params.residual
        return np.concatenate([psd_factor(params.cov)[rows, cols], residual])

    def natural(self, vector: np.ndarray) -> np.ndarray:
        """The variance vector (covariance lower triangle, residuals) a point stands for."""
        if not self.psd:
            return np.asarray(vector, float)
        q = self._q
        rows, cols = np.tril_indices(q)
        L = np.zeros((q, q))
        L[rows, cols] = vector[: len(rows)]
        cov = L @ L.T
        return np.concatenate([cov[rows, cols], vector[len(rows):]])

    def params(self, vector: np.ndarray) -> GrowthParameters:
        """The parameters at a point, fixed effects at their GLS value."""
        plain = self.template.with_variances(self.natural(vector), self.equal_residuals)
        return self.referee.gls_fixed(plain)

    def criterion(self, vector: np.ndarray) -> float:
        plain = self.template.with_variances(self.natural(vector), self.equal_residuals)
        return self.referee.profile(plain, reml=self.reml)

    def full(self, params: GrowthParameters) -> float:
        """The criterion at a full solution (fixed effects as given under ML)."""
        return self.referee.criterion(params, self.reml)

    def singular(self, vector: np.ndarray) -> bool:
        """Whether the person-effect covariance at a point is singular (on the edge of the PSD cone)."""
        if not self.psd:
            return False
        w = np.linalg.eigvalsh(self.template.with_variances(self.natural(vector), self.equal_residuals).cov)
        return bool(w.min() <= SINGULAR * max(float(w.max()), 1e-300))

    def lower(self) -> np.ndarray:
        rows, cols = np.tril_indices(self._q)
        n_res = 1 if self.equal_residuals else len(self.template.residual)
        return np.concatenate([np.where(rows == cols, 0.0, -np.inf), np.zeros(n_res)])

    def names(self) -> tuple[str, ...]:
        rows, cols = np.tril_indices(self._q)
        symbol = "chol" if self.psd else "cov"
        n_res = 1 if self.equal_residuals else len(self.template.residual)
        return tuple(f"{symbol}[{r},{c}]" for r, c in zip(rows, cols)) + tuple(f"residual[{w}]" for w in range(n_res))

    def maximum(self, start: GrowthParameters) -> tuple[GrowthParameters, float]:
        """The referee's own maximum near `start` (user's-scale criterion value)."""
        found = maximise_locally(self.criterion, self.vector(self._inside(start)), self.lower())
        return self.params(found.point), found.value + self.shift

    def _inside(self, params: GrowthParameters) -> GrowthParameters:
        if self.psd and not is_psd(params.cov):
            return GrowthParameters(params.fixed, nearest_psd(params.cov), params.residual)
        return params


def space_of(compiled: CompiledGrowth, referee: Referee, template: GrowthParameters, reml: bool, psd: bool,
             equal_residuals: bool | None = None) -> GrowthSpace:
    """The space of one compiled form, with the user's-scale shift of its criterion."""
    shift = compiled.reml_log_jacobian() if reml else compiled.scaling.log_jacobian(referee.n_obs)
    equal = compiled.equal_residuals if equal_residuals is None else equal_residuals
    return GrowthSpace(referee, template, equal, reml, psd, shift)


def certify_growth(space: GrowthSpace, compiled: CompiledGrowth, params: GrowthParameters, reported: float,
                   library: str, form: str) -> tuple[Certificate, GrowthParameters | None]:
    """A library's growth solution certified in its own space; also the referee's maximum near it."""
    certificate, found = certify(
        space.criterion, space.vector(params), space.names(), reported, library=library, form=form,
        criterion_name="reml" if space.reml else "ml", lower=space.lower(), shift=space.shift,
        quantities=space.natural, at_solution=space.full(params), singular=space.singular)
    if found is None:
        return certificate, None
    best = space.params(found.point)
    fixed_move = _fixed_move(space, compiled, params, best)
    if certificate.passed and fixed_move > 1.0:
        certificate = replace(certificate, passed=False, largest_move=max(certificate.largest_move, fixed_move),
                              reason=f"a fixed effect is {fixed_move:.3g} times the allowed distance from the "
                                     f"referee's maximum (allowed: {MOVE_RELATIVE:g} relative or {MOVE_SE:g} SE)")
    return certificate, best


def _fixed_move(space: GrowthSpace, compiled: CompiledGrowth, params: GrowthParameters,
                best: GrowthParameters) -> float:
    """Largest fixed-effect distance to the referee's maximum, on the user's scale, in allowed units."""
    se = np.sqrt(np.clip(np.diag(space.referee.fixed_covariance(best)), 0.0, None))
    factors = compiled.scale_factors()
    keys = [c.key for c in compiled.fixed_columns]
    here, there = compiled.to_quantities(params), compiled.to_quantities(best)
    worst = 0.0
    for key, s in zip(keys, se):
        near_zero = abs(there[key]) < s * factors[key]
        allowed = max(MOVE_RELATIVE * abs(there[key]), MOVE_SE * s * factors[key] if near_zero else 0.0, 1e-12)
        worst = max(worst, abs(here[key] - there[key]) / allowed)
    return worst
