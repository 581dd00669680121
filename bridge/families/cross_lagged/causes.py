"""The cross-lagged family's causes of difference (words only), added to the shared catalogue."""
from __future__ import annotations

from ...reconcile.causes import CATALOGUE, Cause

OWN = (
    Cause("missing-data", "different handling of missing reports",
          "The wide form used every observed value of every person (full-information ML). Each lagged "
          "regression can only use the rows where its outcome and every lag are observed, so it loses rows "
          "around each missing report. Under missing at random the wide form's estimates use all the "
          "information; the two agree when refitted on the persons observed at every wave."),
    Cause("initial-conditions", "the mixed models' assumptions: person effects unrelated to the first wave, "
          "equations fitted separately",
          "The mixed model with a lagged outcome and a random person intercept assumes that the stable person "
          "differences are unrelated to the first wave. With lagged outcomes that is rarely true: persons who "
          "are high throughout started high. Fitted one outcome at a time, the mixed models also leave the two "
          "outcomes' person effects and within-wave residuals uncorrelated. The wide form lets the person "
          "factors correlate with the first wave (Allison, Williams & Moral-Benito 2017, Socius 3) and with "
          "each other, and the residuals correlate within a wave, which keeps the autoregressive and "
          "cross-lagged effects consistent; the mixed models then overstate the autoregression."),
    Cause("short-panel-bias", "person-mean centring of lagged outcomes in a short panel (a note)",
          "The multilevel counterpart of the RI-CLPM centres each lagged outcome on the person's own mean. "
          "That mean includes later occasions, so in short panels the centred lag is correlated with the "
          "residual and the within-person autoregression is biased downward (Nickell 1981, Econometrica "
          "49(6)); the RI-CLPM (Hamaker, Kuiper & Grasman 2015) separates traits from within-person "
          "deviations without that bias. The two are not equivalent, so no refit can remove the difference: "
          "this is a note beside the observed gap and never changes a verdict.", changes_verdict=False),
)

CAUSES: dict[str, Cause] = {**CATALOGUE, **{c.key: c for c in OWN}}
