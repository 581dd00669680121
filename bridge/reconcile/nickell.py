"""Nickell's (1981) asymptotic bias of the within (person-mean-centred) estimator of an autoregressive effect."""
from __future__ import annotations


def nickell_bias(r: float, periods: int) -> float:
    """plim(r_hat - r) as N -> infinity with `periods` time points in the lagged regression.

    Nickell, S. (1981). Biases in dynamic models with fixed effects. Econometrica 49(6), eq. 18:
    -[(1 + r)/(T - 1)] A [1 - 2 r A / ((1 - r)(T - 1))]^-1, with A = 1 - (1/T)(1 - r^T)/(1 - r).
    """
    if periods < 2:
        raise ValueError("the within estimator needs at least 2 periods")
    T = periods
    a = 1.0 - (1.0 - r ** T) / (T * (1.0 - r)) if r != 1 else 0.0
    return -((1.0 + r) / (T - 1)) * a / (1.0 - 2.0 * r * a / ((1.0 - r) * (T - 1)))
