"""What rounding times onto waves does to each estimate of a linear growth model, predicted from the exact-time fit.

Growth at the exact times: y_ij = a_i + b_i t_ij + e_ij. The wide form uses the wave w_j instead
of t_ij = w_j + d_ij, so it fits y_ij = a_i + b_i w_j + (b_i d_ij + e_ij). Split the displacement
into a person's own offset and occasion jitter, d_ij = c_i + u_ij (`bridge.data.timing.split_displacement`),
with c_i of mean m and variance Var(c), u_ij of mean 0 and variance Var(u), both independent of the
person effects and of the wave. Then (Mehta & West 2000, Psychological Methods 5(1), who show that
person-specific timing ignored in a wide layout is absorbed by the growth factors and the residual;
the terms below are worked out here and checked by simulation in tests/test_timing_prediction.py):

- the person offset moves into the intercept, a*_i = a_i + b_i c_i:
  Var(a*) - Var(a) = E[b^2] Var(c) + m^2 Var(b) + 2 m Cov(a, b),
  Cov(a*, b) - Cov(a, b) = m Var(b),
  E[a* | x] - E[a | x] = m E[b | x] (each intercept effect gains m times its slope effect);
  the m terms are those of moving the time origin by m (Biesanz et al. 2004, Psychological Methods 9(1));
- the jitter moves into the residual, e*_ij = e_ij + b_i u_ij:
  Var(e*) - Var(e) = E[b^2] Var(u). Its induced covariances vanish: Cov(b_i u_ij, b_i u_ik) = E[b^2] E[u_ij u_ik]
  = 0 for independent jitter, and Cov(b_i u_ij, a_i) = Cov(b_i u_ij, b_i) = 0 because E[u] = 0. The new
  residual is heteroscedastic (its variance grows with b_i^2), which one residual variance averages.
- the slope variance and the mean slope do not change.

E[b^2] = mean over persons of (fixed slope given the predictors)^2 + Var(b). The wide form's joint
model is then still a linear growth covariance, so its maximum estimates these shifted values; the
prediction holds for linear growth in one time variable only.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..data import ShapedData
from ..data.timing import DisplacementSplit

SMALL_SE = 0.2   # a predicted change under 0.2 standard errors everywhere counts as small (this tool's rule)


@dataclass(frozen=True)
class Prediction:
    """The predicted wide-minus-exact change of each quantity, on the user's scale and in standard errors."""

    change: dict[str, float]
    in_se: dict[str, float]
    slope_square: float              # E[b^2] in the mixed model's time units
    offset_variance: float           # Var(c) in the mixed model's time units
    jitter_variance: float           # Var(u) in the mixed model's time units
    offset_mean: float               # m in the mixed model's time units
    observed: dict[str, float]       # the wide form on the grid minus the exact-time mixed model, when fitted

    @property
    def largest_se(self) -> float:
        """The largest predicted change in standard errors (0 when nothing changes)."""
        values = [abs(v) for v in self.in_se.values() if np.isfinite(v)]
        return max(values, default=0.0)

    @property
    def small(self) -> bool:
        return self.largest_se < SMALL_SE

    def to_dict(self) -> dict:
        return {"predicted_change": self.change, "predicted_change_se": self.in_se,
                "observed_change": self.observed, "slope_square_mean": self.slope_square,
                "person_offset": {"mean": self.offset_mean, "variance": self.offset_variance},
                "occasion_jitter_variance": self.jitter_variance}


def person_slopes(shaped: ShapedData, estimates: dict[str, float]) -> np.ndarray:
    """Each person's fixed slope: the mean slope plus the predictors' slope effects."""
    slope = np.full(shaped.n_persons, estimates.get("mean.slope", 0.0))
    for k, column in enumerate(shaped.predictors):
        slope = slope + estimates.get(f"effect.{column.key}.slope", 0.0) * shaped.predictor_values[:, k]
    return slope


def predicted_change(split: DisplacementSplit, estimates: dict[str, float], slopes: np.ndarray,
                     time_scale: float = 1.0, offset_key: str | None = None) -> tuple[dict[str, float], float]:
    """The change of each affected quantity (and E[b^2]) from exact-time estimates of a linear growth model.

    `slopes` are the persons' fixed slopes; displacements are in the data's time units and `time_scale`
    turns them into the model's (form time = (time - origin) x time_scale). With the person offset c_i
    itself a predictor (`offset_key`, its quantity key), E[a + b c | c] = E[a] + E[b] c is taken up by the
    offset's intercept effect (which gains the mean slope), and only Var(b) Var(c) of the intercept
    variance's gain is left (the part of b_i c_i a predictor of the mean cannot absorb).
    """
    if offset_key is not None:
        var_b = estimates.get("var.slope", 0.0)
        square = float(np.mean(np.asarray(slopes) ** 2)) + var_b
        change = {"var.residual": square * split.within * time_scale ** 2,
                  f"effect.{offset_key}.intercept": float(np.mean(slopes)) * time_scale}
        if "var.intercept" in estimates:
            change["var.intercept"] = var_b * split.between * time_scale ** 2
        return change, square
    var_b = estimates.get("var.slope", 0.0)
    cov_ab = estimates.get("cov.intercept.slope", 0.0)
    square = float(np.mean(np.asarray(slopes) ** 2)) + var_b
    m = split.mean * time_scale
    offset, jitter = split.between * time_scale ** 2, split.within * time_scale ** 2
    change = {"var.residual": square * jitter}
    if "var.intercept" in estimates:
        change["var.intercept"] = square * offset + m * m * var_b + 2 * m * cov_ab
        if "cov.intercept.slope" in estimates:
            change["cov.intercept.slope"] = m * var_b
    for key, value in estimates.items():
        if key.endswith(".slope") and (key.startswith("mean.") or key.startswith("effect.")):
            change[key[: -len("slope")] + "intercept"] = m * value
    return change, square


def predict(shaped: ShapedData, exact: dict[str, float], exact_se: dict[str, float],
            observed: dict[str, float] | None = None, time_scale: float = 1.0,
            offset_key: str | None = None) -> Prediction | None:
    """The prediction for a shaped data set from its exact-time estimates; None unless linear growth."""
    if "mean.slope" not in exact or any(k.startswith("mean.") and k not in ("mean.intercept", "mean.slope")
                                        for k in exact):
        return None
    split = shaped.timing.split or DisplacementSplit(0.0, 0.0, 0.0)
    slopes = person_slopes(shaped, {k: v for k, v in exact.items() if offset_key is None
                                    or not k.startswith(f"effect.{offset_key}.")})
    change, square = predicted_change(split, exact, slopes, time_scale, offset_key)
    change = {k: float(change.get(k, 0.0)) for k in exact if not k.startswith("var.residual.")}
    in_se = {k: v / exact_se[k] if exact_se.get(k) and np.isfinite(exact_se[k]) else float("nan")
             for k, v in change.items()}
    return Prediction(change=change, in_se=in_se, slope_square=square,
                      offset_variance=split.between * time_scale ** 2,
                      jitter_variance=split.within * time_scale ** 2, offset_mean=split.mean * time_scale,
                      observed=dict(observed or {}))


def binning_prediction(shaped: ShapedData, rows, time_scale: float = 1.0) -> tuple[str, dict]:
    """A sentence and details for the `time-binning` explanation: the predicted change beside the observed gap.

    `rows` are the reconciliation's quantity rows (wide and long estimates, long-form SEs).
    """
    exact = {r.key: float(r.mixed.estimate) for r in rows}
    exact_se = {r.key: float(r.mixed.se) for r in rows}
    observed = {r.key: float(r.sem.estimate - r.mixed.estimate) for r in rows}
    p = predict(shaped, exact, exact_se, observed, time_scale)
    if p is None:
        return "", {}
    key = max(p.change, key=lambda k: abs(p.in_se.get(k, 0.0)) if np.isfinite(p.in_se.get(k, np.nan)) else 0.0)
    text = (f"Predicted from the exact-time fit (person offsets to the intercept variance, occasion jitter to the "
            f"residual variance): {key} {p.change[key]:+.4g} ({p.in_se[key]:+.2f} SE); observed "
            f"{observed.get(key, float('nan')):+.4g}.")
    return text, {"predicted_change": p.change, "predicted_change_se": p.in_se,
                  "displacement_split": {"mean": p.offset_mean, "person_offset_variance": p.offset_variance,
                                         "occasion_jitter_variance": p.jitter_variance}}
