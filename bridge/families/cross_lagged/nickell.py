"""Nickell's (1981) asymptotic bias of the within (person-mean-centred) estimator of an autoregressive effect."""
from __future__ import annotations

import math
from fractions import Fraction


def nickell_bias(r: float, periods: int) -> float:
    """plim(r_hat - r) as N -> infinity with `periods` time points in the lagged regression.

    Nickell, S. (1981). Biases in dynamic models with fixed effects. Econometrica 49(6), eq. 18:
    -[(1 + r)/(T - 1)] A [1 - 2 r A / ((1 - r)(T - 1))]^-1, with A = 1 - (1/T)(1 - r^T)/(1 - r).
    """
    if periods < 2:
        raise ValueError("the within estimator needs at least 2 periods")
    T = periods
    if not math.isfinite(r):
        return float("nan")
    if r == 1:
        return -3.0 / (T + 1)  # the limit as r -> 1
    q = Fraction(r)  # exact arithmetic: near r = 1 both factors shrink to zero together
    a = 1 - (1 - q ** T) / (T * (1 - q))
    return float(-((1 + q) / (T - 1)) * a / (1 - 2 * q * a / ((1 - q) * (T - 1))))
