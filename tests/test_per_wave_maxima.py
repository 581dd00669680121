"""Per-wave residual variances: the wide form's estimates against the independent maximum (reference_mle).

With `residuals: per-wave` the wide form has one residual variance per wave, V_i = Z_i G Z_i' + diag(s2_wave);
`reference_mle.growth_mle(..., waves=...)` maximises that model (variances >= 0, G free but every V_i
positive definite). The long form keeps one residual variance, shown at every wave: its counterpart is
the ordinary semidefinite maximum. Data: Orthodont (Potthoff & Roy 1964, Biometrika 51; 4 ages) and
ChickWeight (Crowder & Hand 1990, Chapman & Hall, recalled from memory; 12 days with missing occasions),
whose maximum puts the day-4 residual variance exactly at 0. Rule as in test_exact_maxima.py.
"""
from __future__ import annotations

import functools
import tempfile
from pathlib import Path

import numpy as np
import pytest

import bridge
from conftest import write_case
from reference_mle import growth_mle
from test_exact_maxima import TERMS, description, design, frame, misses

_FOLDER = Path(tempfile.mkdtemp(prefix="per_wave_"))


@functools.lru_cache(maxsize=None)
def per_wave_run(item: str) -> bridge.Reconciliation:
    desc = description(item, "ml", 1)
    desc["model"]["residuals"] = "per-wave"
    return bridge.run(write_case(_FOLDER, frame(item), desc, name=f"{item}_per_wave"))


@functools.lru_cache(maxsize=None)
def per_wave_reference(item: str, wide: bool) -> dict[str, tuple[float, float]]:
    """Quantity key -> (estimate, SE): per-wave residual variances (wide) or one for all waves (long)."""
    data = frame(item)
    X, Z, keys = design(item, 1)
    waves = np.sort(data["time"].unique())
    best = growth_mle(data["y"], X, Z, data["person"], psd=not wide, waves=data["time"] if wide else None)
    out = {key: (float(b), float(s)) for key, b, s in zip(keys, best.fixed, best.se_fixed)}
    for j in range(2):
        for k in range(j + 1):
            out[f"var.{TERMS[j]}" if j == k else f"cov.{TERMS[k]}.{TERMS[j]}"] = (float(best.G[j, k]),
                                                                                 float(best.se_G[j, k]))
    s2 = best.s2 if wide else np.full(len(waves), best.s2)
    se = best.se_s2 if wide else np.full(len(waves), best.se_s2)
    out.update({f"var.residual.{w:g}": (float(v), float(e)) for w, v, e in zip(waves, s2, se)})
    out["loglik"] = (best.loglik, float("nan"))
    return out


def test_per_wave_reference_on_chickweight_has_a_residual_variance_at_zero():
    # Measured here: the maximum puts the day-4 residual variance at its bound 0 and the log-likelihood
    # (-2278.92164) is 136 units above the equal-variance maximum (-2414.92272), a real difference.
    ref = per_wave_reference("ChickWeight", True)
    assert ref["var.residual.4"][0] == 0.0
    assert ref["loglik"][0] == pytest.approx(-2278.92164, abs=1e-5)


@pytest.mark.parametrize("item", ["Orthodont", "ChickWeight"])
@pytest.mark.parametrize("form", ["sem", "mixed"])
def test_per_wave_estimates_sit_at_the_independent_maximum(item, form):
    rec = per_wave_run(item)
    ref = per_wave_reference(item, form == "sem")
    assert misses(rec, form, ref, item) == {}
    if form == "sem":
        assert rec.log_likelihood["sem"] <= ref["loglik"][0] + 1e-9 * abs(ref["loglik"][0])
