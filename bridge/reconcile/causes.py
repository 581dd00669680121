"""The catalogue of causes: why two fits of one model can give different numbers.

Each cause has a stable key (used in the JSON), a short title, and a plain
explanation for an applied researcher. Detection and the harmonised refit that
proves a cause live in `explain.py`; this module is only the words. A model family adds its
own causes (`bridge.families.<name>.causes`).
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Cause:
    key: str
    title: str
    why: str
    changes_verdict: bool = True  # False: reported, but never turns a difference into an explained one


CATALOGUE: dict[str, Cause] = {c.key: c for c in (
    Cause("estimation-method", "REML in the mixed model, ML in the SEM",
          "Restricted maximum likelihood (REML) adjusts the variance components for the fixed effects "
          "estimated from the same data, so its variances are larger than the maximum-likelihood (ML) ones, "
          "most visibly in small samples. The SEM is fitted by ML. Fixed effects are unaffected in balanced "
          "designs."),
    Cause("residual-structure", "a residual variance per wave in the SEM, one in the mixed model",
          "The SEM estimated a separate residual variance at every wave; the mixed model has one residual "
          "variance for all occasions. The extra freedom shifts the growth-factor variances as well."),
    Cause("missing-data", "different handling of missing occasions",
          "One form used only persons observed at every wave (complete cases); the other used every "
          "available occasion. These are different data sets, so the estimates differ. Under missing at "
          "random, full-information ML in the SEM and ML on all rows of the mixed model maximise the same "
          "likelihood."),
    Cause("time-binning", "times that vary by person, rounded onto waves for the wide form",
          "Each person was measured at their own times. The wide form has one column per wave, so every "
          "occasion was moved to its nearest wave; the mixed model used the real times. The exact-time "
          "mixed model is the one to trust: the wide form would need person-specific loadings to use the "
          "real times."),
    Cause("optimizer", "a library stopped short of the maximum",
          "A library reported success at a point where the referee's log-likelihood is lower than at the "
          "other library's solution. sembridge refitted it from the better solution; the numbers shown are "
          "from the refit."),
    Cause("boundary", "a variance at or near its boundary",
          "A random-effect variance is at or near zero. Near the boundary the likelihood is flat in that "
          "direction, so two optimisers can stop at different points with almost the same fit. sembridge "
          "refits both forms with that variance (and its covariances) fixed at zero; standard errors at the "
          "boundary are not ordinary standard errors and are flagged."),
    Cause("parameter-space", "a person-effect covariance the mixed model cannot represent",
          "The SEM keeps each variance non-negative but lets the covariance matrix of the growth factors be "
          "indefinite (for example two variances of zero with a non-zero covariance); the mixed model keeps "
          "that matrix positive semidefinite, as a covariance of person effects must be. Both libraries then "
          "found the maximum of their own parameter space. sembridge maximises the SEM's own model over "
          "positive semidefinite matrices with its referee: when that maximum equals the mixed solution, the "
          "spaces are the whole difference. An indefinite solution usually means the data carry too little "
          "information about individual differences in growth for this model."),
    Cause("time-coding", "different time origin or units",
          "The two forms code time differently (another zero point or another unit). The intercept then "
          "refers to another moment and the slope to another unit, so the numbers differ. With a random "
          "intercept and slope and their covariance free, recoding time only reparameterises the model: the "
          "fitted trajectories and the log-likelihood are the same (Biesanz et al. 2004, Psychological Methods "
          "9(1)). With a reduced random part (a random slope without a random intercept, say) a new origin "
          "changes the model itself, and the log-likelihoods differ."),
    Cause("standard-errors", "equal estimates, different standard errors",
          "The estimates agree but the libraries' own standard errors differ. semopy's default uses the "
          "expected information, which ignores missing occasions; statsmodels reports variance-component "
          "standard errors on another scale. sembridge shows observed-information standard errors from "
          "its referee for both forms.", changes_verdict=False),
)}
