"""The wide form's own tables: its free parameters, and both forms' absolute fit. Pure: lays out numbers.

Both are `tables.Grid`s, so they print in every format the report offers (HTML, Markdown, LaTeX, CSV).
"""
from __future__ import annotations

from ..reconcile.summary import FixedEffect
from .formats import number
from .tables import NUMBER, P, STAT, TEXT, Grid


def wide_parameters_grid(parameters: tuple[FixedEffect, ...], confidence: float = 0.95) -> Grid:
    """Every free parameter of the wide form with estimate, SE, z, p and interval."""
    level = f"{confidence:.0%}"
    return Grid("wide-parameters", "Wide form (SEM): every free parameter",
                ("quantity", "parameter", "estimate", "SE", "z", "p", f"{level} lower", f"{level} upper"),
                (TEXT, TEXT, NUMBER, NUMBER, NUMBER, P, NUMBER, NUMBER),
                tuple((w.key, w.name, w.estimate, w.se, w.z, w.p, w.lower, w.upper) for w in parameters),
                ("Brackets hold the generated label used in the wide form's model text. z = estimate / SE; two-sided "
                 f"p and {level} interval from the normal distribution; standard errors from the referee's Hessian "
                 "of the wide form's likelihood. For a variance the test of zero lies on the boundary of its space, "
                 "where this p-value is conservative.",))


_FORMS = (("wide form (SEM)", "sem"), ("long form", "mixed"))


def _form_row(name: str, fit) -> tuple:
    if fit is None:
        return (name, *([None] * 11))
    return (name, fit.log_likelihood, fit.parameters, fit.chi_square, fit.df, fit.p_value, fit.rmsea,
            fit.rmsea_ci90[0], fit.rmsea_ci90[1], fit.cfi, fit.tli, fit.srmr)


def absolute_fit_grid(fit) -> Grid | None:
    """Saturated model, independence baseline and each form's indices (`referee.absolute_fit.AbsoluteFit`)."""
    if fit is None:
        return None
    headings = ("model", "log-likelihood", "parameters", "chi-square", "df", "p", "RMSEA", "RMSEA 90% lower",
                "RMSEA 90% upper", "CFI", "TLI", "SRMR")
    kinds = (TEXT, STAT, STAT, STAT, STAT, P, STAT, STAT, STAT, STAT, STAT, STAT)
    if fit.saturated_log_likelihood is None:
        return Grid("absolute-fit", "Absolute fit over the waves", headings, kinds, (),
                    (f"Not computed: {fit.reason}.",))
    rows = [("saturated (free means and covariances)", fit.saturated_log_likelihood, fit.moments, *([None] * 9)),
            ("independence baseline", None, None, fit.baseline_chi_square, fit.baseline_df, *([None] * 7))]
    rows += [_form_row(name, getattr(fit, attr)) for name, attr in _FORMS]
    notes = [f"{name.capitalize()}: no numbers, because {getattr(fit, attr + '_reason')}."
             for name, attr in _FORMS if getattr(fit, attr) is None]
    notes.append(f"{fit.persons} persons, {fit.moments} moments (the means at each wave, given the predictors where "
                 "there are any, and the variances and covariances over the waves). chi-square = 2 x (saturated - model log-likelihood), "
                 "df = moments - parameters; RMSEA with N - 1 = "
                 f"{number(fit.persons - 1)} and its 90% interval from the noncentral chi-square; CFI and TLI against "
                 "the independence baseline (means and variances only); SRMR over the covariances only, "
                 "standardised by the saturated model's variances (docs/absolute-fit.md).")
    if fit.note:
        notes.append(fit.note)
    return Grid("absolute-fit", "Absolute fit over the waves: both forms against the saturated model", headings,
                kinds, tuple(rows), tuple(notes))
