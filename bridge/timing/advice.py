"""Plain-words advice from a timing summary: which framework handles this timing, and at what cost.

The cut-offs below (20 occasions per person for an intensive design, 5% of the wave gap
for a small displacement) are this tool's own rules of thumb, not published thresholds.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..data.timing import Design

INTENSIVE_OCCASIONS = 20      # median occasions per person above which a design counts as intensive
SMALL_DISPLACEMENT = 0.05     # mean displacement as a share of the median wave gap


@dataclass(frozen=True)
class Recommendation:
    """Which framework to use (`either` or `mixed model`), why, and what the other choice costs."""

    framework: str
    reason: str
    cost: str


def _balanced(r: dict) -> Recommendation:
    t = r["timing"]
    return Recommendation(
        "either",
        f"All {t.n_persons} persons were measured at the same {len(t.waves)} times, so the wide form has one "
        "column per wave and no missing data. The latent growth curve and the mixed model are the same model "
        "here and give the same estimates up to optimiser tolerance.",
        "None: choose by convenience. The wide form also offers a residual variance per wave and overall fit "
        "indices.")


def _balanced_missing(r: dict) -> Recommendation:
    t = r["timing"]
    planned = t.n_persons * len(t.waves)
    return Recommendation(
        "either",
        f"Everyone was measured on the same grid of {len(t.waves)} times, but {planned - t.n_occasions} of "
        f"{planned} planned occasions are absent ({r['grid_patterns']} missing-data patterns; "
        f"{r['complete_persons']} of {t.n_persons} persons seen at every wave). With full-information maximum "
        "likelihood both frameworks use every available occasion and give the same estimates.",
        "The wide form must be fitted by full-information estimation; a complete-case analysis would drop "
        f"{t.n_persons - r['complete_persons']} persons.")


def _exact_wide(r: dict) -> str:
    return (f"A wide form on the exact times would need {r['exact_columns']} columns and "
            f"{r['exact_patterns']} missing-data patterns.")


def _varying(r: dict) -> Recommendation:
    t = r["timing"]
    moved = (f"rounding onto the {len(t.waves)} waves moves an occasion by {t.displacement_mean:.3g} on average "
             f"and by up to {t.displacement_max:.3g}")
    if r["occasions_per_person"][1] > INTENSIVE_OCCASIONS:
        return Recommendation(
            "mixed model",
            f"An intensive design: {r['occasions_per_person'][1]:g} occasions per person (median) at "
            f"{t.n_distinct_times} distinct times; {moved}.",
            f"{_exact_wide(r)} That is impractical; the mixed model uses the exact times at no cost.")
    if t.shared_wave_persons:
        return Recommendation(
            "mixed model",
            f"Times vary by person and {t.shared_wave_persons} persons have two occasions nearest to the same "
            "wave, so a wide form on this grid cannot be built.",
            "The mixed model uses the exact times at no cost. A wide form needs a finer grid (more columns and "
            f"missing-data patterns) or dropped occasions. {_exact_wide(r)}")
    share = t.displacement_mean / r["median_gap"]
    size = ("small: the wide form on waves should be a close approximation" if share <= SMALL_DISPLACEMENT else
            "not small: expect visible differences")
    return Recommendation(
        "mixed model",
        f"Times vary by person: {moved}, {share:.0%} of the typical gap of {r['median_gap']:g} between waves "
        f"({size}).",
        "The mixed model uses the exact times at no cost. The wide form can only use rounded times and treats "
        "the displacement as noise, which typically inflates the residual variance and distorts the slope "
        f"variance. {_exact_wide(r)} Run the rounding experiment (`sembridge rounding`) to measure the cost.")


def recommend(report: dict) -> Recommendation:
    """The advice for one timing summary (the fields of `TimingReport` before its recommendation)."""
    design = report["timing"].design
    if design is Design.BALANCED:
        return _balanced(report)
    if design is Design.BALANCED_MISSING:
        return _balanced_missing(report)
    return _varying(report)
