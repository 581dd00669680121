"""Plain-words advice from a timing summary: `either`, `mixed model` or `wide form needs exact times`.

The advice says only what the tool measured. From a data file alone it knows the timing (how far
rounding moves each time, and whether the displacement is a person's own offset or occasion jitter)
but not what that does to the estimates; with a description (`timing SPEC`) it predicts each
quantity's change from the exact-time fit and measures it on the wave grid, in standard errors.
Two cut-offs are this tool's own rules of thumb, not published thresholds: more than 20 occasions
per person (median) counts as intensive, and a change under 0.2 standard errors counts as small.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..data.timing import Design
from .predict import SMALL_SE

INTENSIVE_OCCASIONS = 20      # median occasions per person above which a design counts as intensive
EITHER, MIXED, EXACT_WIDE = "either", "mixed model", "wide form needs exact times"

WIDE_ADDS = ("a residual variance per wave, a global fit test against the saturated model over waves, and "
             "latent measurement models for the outcome")
MIXED_ADDS = ("the exact times as measured, time-varying predictors without new columns, and REML in "
              "statsmodels (REML is defined for this Gaussian linear model in either layout; Patterson & "
              "Thompson 1971; semopy has none)")
EXACT_WIDE_COST = ("A wide form can use the exact times through person-specific loadings (definition variables; "
                   "Mehta & Neale 2005): its likelihood is the mixed model's. semopy cannot fit it, and it has no "
                   "saturated model over waves, so it loses the global fit test.")


@dataclass(frozen=True)
class Recommendation:
    """Which framework to use, why (what was measured), and what the other choice adds or loses."""

    framework: str
    reason: str
    cost: str


def _balanced(r: dict) -> Recommendation:
    t = r["timing"]
    return Recommendation(
        EITHER,
        f"All {t.n_persons} persons were measured at the same {len(t.waves)} times, so the wide form has one "
        "column per wave and no missing data. Fitted by ML, with one residual variance and no residual "
        "covariances in the wide form and loadings equal to the times, the latent growth curve and the mixed "
        "model are the same model and give the same estimates up to optimiser tolerance.",
        f"None for that model: choose by what you need. The wide form adds {WIDE_ADDS}; the mixed model adds "
        f"{MIXED_ADDS}.")


def _balanced_missing(r: dict) -> Recommendation:
    t = r["timing"]
    planned = t.n_persons * len(t.waves)
    return Recommendation(
        EITHER,
        f"Everyone was measured on the same grid of {len(t.waves)} times, but {planned - t.n_occasions} of "
        f"{planned} planned occasions are absent ({r['grid_patterns']} missing-data patterns; "
        f"{r['complete_persons']} of {t.n_persons} persons seen at every wave). With full-information maximum "
        "likelihood both frameworks use every available occasion and maximise the same likelihood (under "
        "missing at random).",
        "The wide form must be fitted by full-information estimation; a complete-case analysis would drop "
        f"{t.n_persons - r['complete_persons']} persons. The wide form adds {WIDE_ADDS}; the mixed model adds "
        f"{MIXED_ADDS}.")


def split_sentence(t) -> str:
    """The displacement split in words."""
    s = t.split
    if s is None or s.variance <= 0:
        return "the signed displacement does not vary"
    return (f"the signed displacement (time minus its wave) has variance {s.variance:.3g}: "
            f"{s.between_share:.0%} is a person's own offset, {s.within_share:.0%} occasion-to-occasion jitter")


def _moved(r: dict) -> str:
    t = r["timing"]
    return (f"rounding onto the {len(t.waves)} waves moves an occasion by {t.displacement_mean:.3g} on average "
            f"and by up to {t.displacement_max:.3g}; {split_sentence(t)}")


def _offset_remedy(r: dict) -> str:
    s = r["timing"].split
    if s is None or s.variance <= 0 or s.between_share < 0.5:
        return ""
    return (" Most of the displacement is a person's own offset, which rounding moves into the intercept "
            "variance: a wide form on waves can keep it out by taking the offset (entry offset, or age at entry) "
            "as a person-level predictor of intercept and slope, as in accelerated designs "
            "(`sembridge timing SPEC --with-offset` shows that reconciliation).")


def _described(r: dict, check) -> Recommendation:
    p = check.prediction
    ranked = check.ranked()
    top = f"{ranked[0][0]} {ranked[0][1]:+.2f} SE" if ranked else "none"
    if p is None:
        head = f"Times vary by person: {_moved(r)}. Measured on the wave grid, the largest gap is {top}."
        small = bool(ranked) and abs(ranked[0][1]) < SMALL_SE
    else:
        worst = max(p.in_se, key=lambda k: abs(p.in_se[k])) if p.in_se else None
        predicted = f"{worst} {p.in_se[worst]:+.2f} SE" if worst else "none"
        head = (f"Times vary by person: {_moved(r)}. Predicted change from rounding, largest: {predicted}; "
                f"measured on the wave grid, largest gap: {top}.")
        small = p.small
    if small:
        return Recommendation(EITHER, head + f" Both are under {SMALL_SE:g} standard errors.",
                              f"Rounding costs less than {SMALL_SE:g} SE here, so choose by what you need: the "
                              f"wide form on waves adds {WIDE_ADDS}; the mixed model adds {MIXED_ADDS}.")
    if check.per_wave_residuals:
        return Recommendation(
            EXACT_WIDE, head + " The description asks for a residual variance per wave, which only the wide "
                               "form estimates directly; rounded onto waves it pays the change above.",
            f"{EXACT_WIDE_COST} The mixed model offers {MIXED_ADDS} but one residual variance only."
            + _offset_remedy(r))
    return Recommendation(
        MIXED, head,
        f"The mixed model uses the exact times but gives up what the wide form adds ({WIDE_ADDS}). "
        f"{EXACT_WIDE_COST}" + _offset_remedy(r))


def _varying(r: dict) -> Recommendation:
    t = r["timing"]
    if r["occasions_per_person"][1] > INTENSIVE_OCCASIONS:
        return Recommendation(
            MIXED,
            f"An intensive design: {r['occasions_per_person'][1]:g} occasions per person (median) at "
            f"{t.n_distinct_times} distinct times; {_moved(r)}.",
            f"A wide form needs {r['exact_columns']} columns at the exact times or heavy rounding. "
            f"{EXACT_WIDE_COST} The mixed model gives up what the wide form adds ({WIDE_ADDS}).")
    if t.shared_wave_persons:
        return Recommendation(
            MIXED,
            f"Times vary by person and {t.shared_wave_persons} persons have two occasions nearest to the same "
            "wave, so a wide form on this grid cannot be built.",
            f"A wide form needs a finer grid (more columns and missing-data patterns), dropped occasions or "
            f"exact times. {EXACT_WIDE_COST}")
    if r.get("check") is not None:
        return _described(r, r["check"])
    return Recommendation(
        MIXED,
        f"Times vary by person: {_moved(r)}. The mixed model uses these times as measured. What rounding would "
        "do to the estimates depends on the growth parameters and is not measured from the data alone: "
        "`sembridge timing SPEC` predicts and measures it in standard errors.",
        f"The mixed model gives up what the wide form adds ({WIDE_ADDS}). {EXACT_WIDE_COST}" + _offset_remedy(r))


def recommend(report: dict) -> Recommendation:
    """The advice for one timing summary (the fields of `TimingReport` before its recommendation)."""
    design = report["timing"].design
    if design is Design.BALANCED:
        return _balanced(report)
    if design is Design.BALANCED_MISSING:
        return _balanced_missing(report)
    return _varying(report)
