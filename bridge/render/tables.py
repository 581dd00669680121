"""The report's tables as Markdown, HTML, LaTeX and CSV: one layout (a `Grid`), four writers.

Pure: the numbers come from `bridge.reconcile.summary`; here they are only laid out and
printed (four significant digits in text formats, full precision in CSV). Every text
from the user's files is escaped for the format it lands in.
"""
from __future__ import annotations

import csv
import html
import io
from dataclasses import dataclass
from typing import Union

from ..reconcile.summary import CorrespondenceLine, MixedModelSummary
from .formats import exact, number, p_value, spreadsheet_text


@dataclass(frozen=True)
class Bracketed:
    """A cell holding an estimate with its standard error in brackets; `flag` marks a boundary solution."""

    estimate: float
    se: float
    flag: bool = False

    def text(self, write) -> str:
        return f"{write(self.estimate)} ({write(self.se)})" + (" *" if self.flag else "")


Cell = Union[str, int, float, Bracketed, None]

#: A cell is text, a count, a number (NaN when it could not be computed), an estimate with its SE, or None
#: when it does not apply. Column kinds: how a cell is printed. `text` as is, `number` four significant
#: digits, `p` a p-value, `stat` a fit statistic (integers as they are, other numbers with three decimals).
TEXT, NUMBER, P, STAT = "text", "number", "p", "stat"


@dataclass(frozen=True)
class Grid:
    """One table laid out: a file stem, a title, headings, cells, and notes under the table."""

    name: str
    title: str
    headings: tuple[str, ...]
    kinds: tuple[str, ...]
    rows: tuple[tuple[Cell, ...], ...]
    notes: tuple[str, ...] = ()


def _cell(value: Cell, kind: str) -> str:
    if value is None:      # not applicable (a missing number is NaN and prints as n/a)
        return ""
    if isinstance(value, str):
        return value
    if isinstance(value, Bracketed):
        return value.text(number)
    if kind == P:
        return p_value(value)
    if kind == STAT and isinstance(value, int):
        return str(value)
    if kind == STAT and value is not None:
        return f"{value:.3f}"
    return number(value)


def _csv_cell(value: Cell) -> str:
    if value is None:
        return ""
    if isinstance(value, str):
        return spreadsheet_text(value)
    if isinstance(value, Bracketed):
        return value.text(exact)
    if isinstance(value, int):
        return str(value)
    return exact(value)


# ---------------------------------------------------------------------------- layouts

def fixed_effects_grid(summary: MixedModelSummary) -> Grid:
    level = f"{summary.confidence:.0%}"
    return Grid("fixed-effects", "Long form (mixed model): fixed effects",
                ("effect", "estimate", "SE", "z", "p", f"{level} lower", f"{level} upper"),
                (TEXT, NUMBER, NUMBER, NUMBER, P, NUMBER, NUMBER),
                tuple((f.name, f.estimate, f.se, f.z, f.p, f.lower, f.upper) for f in summary.fixed),
                (f"z = estimate / SE; two-sided p and {level} interval from the normal distribution; "
                 "standard errors from the referee.",))


BOUNDARY_NOTE = ("*: the solution lies on the boundary of the parameter space (a variance at zero or a singular "
                 "person-effect covariance); this standard error is not an ordinary one.")


def variance_grid(summary: MixedModelSummary) -> Grid:
    """The person effects' covariance as a small matrix, then the residual variance.

    Variances on the diagonal and covariances below it, each with its SE in brackets; correlations above it.
    """
    m = summary.person_effects
    size = len(m.names)

    def cell(i: int, j: int) -> Cell:
        if j > i:
            return m.correlation[i][j]
        e = m.covariance[i][j]
        return Bracketed(e.estimate, e.se, bool(e.se_flag))

    rows = tuple((name, *(cell(i, j) for j in range(size))) for i, name in enumerate(m.names))
    if m.residual is not None:
        rows += (("residual variance", Bracketed(m.residual.estimate, m.residual.se, bool(m.residual.se_flag)),
                  *([None] * (size - 1))),)
    flagged = any(isinstance(c, Bracketed) and c.flag for row in rows for c in row)
    return Grid("variance-components", "Long form (mixed model): person effects and residual",
                ("person effect", *m.names), (TEXT,) + (NUMBER,) * size, rows,
                ("Diagonal: variances; below it: covariances, each with its standard error (from the referee) in "
                 "brackets; above it: correlations (the covariance over the product of the two standard "
                 "deviations). The last row is the residual variance.",) + ((BOUNDARY_NOTE,) if flagged else ()))


def fit_grid(summary: MixedModelSummary) -> Grid:
    f = summary.fit
    rows = (("persons", f.persons), ("observations", f.observations), ("method", f.method.upper()),
            (f.criterion, f.log_likelihood), ("ML log-likelihood (referee, exact times)", f.referee_log_likelihood),
            ("parameters", f.parameters), ("AIC", f.aic), ("BIC", f.bic))
    basis = "the REML criterion" if f.method == "reml" else "the log-likelihood"
    return Grid("fit", "Long form (mixed model): fit", ("statistic", "value"), (TEXT, STAT), rows,
                (f"AIC = -2 L + 2 k and BIC = -2 L + k ln(observations), with L {basis} and k counting every "
                 "fixed effect and variance parameter.",))


def correspondence_grid(lines: tuple[CorrespondenceLine, ...]) -> Grid:
    return Grid("correspondence", "Each quantity in both frameworks",
                ("quantity", "wide form (SEM)", "long form (mixed model)", "SEM estimate", "mixed estimate",
                 "difference", "verdict", "explained by"),
                (TEXT, TEXT, TEXT, NUMBER, NUMBER, NUMBER, TEXT, TEXT),
                tuple((c.key, c.wide_name, c.long_name, c.sem.estimate, c.mixed.estimate, c.difference, c.verdict,
                       c.explanation) for c in lines),
                ("difference = SEM estimate - mixed estimate.",))


def mixed_grids(summary: MixedModelSummary) -> tuple[Grid, ...]:
    """The mixed-model table in its three parts."""
    return fixed_effects_grid(summary), variance_grid(summary), fit_grid(summary)


def _wave(wave) -> str:
    return "all" if wave is None else f"{wave:g}"


def lagged_coefficients_grid(summary) -> Grid:
    """The coefficients of each outcome's lagged regression (the cross-lagged family's `LaggedSummary`)."""
    level = f"{summary.confidence:.0%}"
    rows = tuple((c.outcome, _wave(c.wave), c.effect.name, c.effect.estimate, c.effect.se, c.effect.z, c.effect.p,
                  c.effect.lower, c.effect.upper) for c in summary.coefficients)
    lag = "Lags are centred on each person's mean. " if summary.centred else ""
    return Grid("lagged-coefficients", "Long form (lagged regressions): coefficients",
                ("outcome", "wave", "term", "estimate", "SE", "z", "p", f"{level} lower", f"{level} upper"),
                (TEXT, TEXT, TEXT, NUMBER, NUMBER, NUMBER, P, NUMBER, NUMBER), rows,
                (f"{lag}wave: the outcome's wave (all: one coefficient for every wave). z = estimate / SE; "
                 f"two-sided p and {level} interval from the normal distribution; standard errors from the referee.",))


def lagged_variances_grid(summary) -> Grid:
    rows = tuple((v.outcome, _wave(v.wave), v.name, v.estimate, v.se, v.sd) for v in summary.variances)
    return Grid("lagged-variances", "Long form (lagged regressions): residual and person-intercept variances",
                ("outcome", "wave", "component", "estimate", "SE", "SD"),
                (TEXT, TEXT, TEXT, NUMBER, NUMBER, NUMBER), rows,
                ("SD: square root of the variance.",))


def lagged_fit_grid(summary) -> Grid:
    rows = tuple((f.outcome, f.method, f.rows, f.log_likelihood) for f in summary.fits)
    return Grid("lagged-fit", "Long form (lagged regressions): rows and fit",
                ("outcome", "fitted by", "rows used", "log-likelihood"), (TEXT, TEXT, STAT, STAT), rows,
                ("Rows: person-waves from the second wave on with the outcome and every lag observed.",))


def lagged_grids(summary) -> tuple[Grid, ...]:
    """The long form's table for the cross-lagged family in its three parts."""
    return lagged_coefficients_grid(summary), lagged_variances_grid(summary), lagged_fit_grid(summary)


# ---------------------------------------------------------------------------- Markdown

_MD = str.maketrans({"\\": "\\\\", "|": "\\|", "*": "\\*", "_": "\\_", "`": "\\`", "<": "&lt;", ">": "&gt;",
                     "&": "&amp;", "\n": " "})


def md_escape(text: str) -> str:
    """Text made literal in a Markdown table cell (no emphasis, no inline HTML, no column breaks)."""
    return text.translate(_MD)


def markdown(grids: tuple[Grid, ...]) -> str:
    """The tables as Markdown, one section per table."""
    parts = []
    for grid in grids:
        right = [kind != TEXT for kind in grid.kinds]
        lines = [f"### {md_escape(grid.title)}", "",
                 "| " + " | ".join(md_escape(h) for h in grid.headings) + " |",
                 "|" + "|".join("---:" if r else ":---" for r in right) + "|"]
        lines += ["| " + " | ".join(md_escape(_cell(v, k)) for v, k in zip(row, grid.kinds)) + " |"
                  for row in grid.rows]
        lines += [""] + [f"{md_escape(note)}" for note in grid.notes]
        parts.append("\n".join(lines) + "\n")
    return "\n".join(parts)


# ---------------------------------------------------------------------------- HTML

def html_table(grid: Grid) -> str:
    """One table as an HTML fragment (every text escaped)."""
    def cls(kind: str) -> str:
        return "" if kind == TEXT else ' class="num"'
    head = "".join(f"<th{cls(k)}>{html.escape(h)}</th>" for h, k in zip(grid.headings, grid.kinds))
    body = "".join("<tr>" + "".join(f"<td{cls(k)}>{html.escape(_cell(v, k))}</td>" for v, k in zip(row, grid.kinds))
                   + "</tr>\n" for row in grid.rows)
    notes = "".join(f'<p class="note">{html.escape(n)}</p>\n' for n in grid.notes)
    return (f'<table class="grid" id="{html.escape(grid.name)}">\n<caption>{html.escape(grid.title)}</caption>\n'
            f"<thead><tr>{head}</tr></thead>\n<tbody>\n{body}</tbody>\n</table>\n{notes}")


# ---------------------------------------------------------------------------- LaTeX

_TEX = str.maketrans({"\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "_": r"\_", "%": r"\%", "&": r"\&",
                      "#": r"\#", "$": r"\$", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
                      "<": r"\textless{}", ">": r"\textgreater{}", "[": "{[}", "]": "{]}", "×": r"$\times$",
                      "\n": " "})


def tex_escape(text: str) -> str:
    """Text made literal in LaTeX: the ten special characters, angle brackets and brackets neutralised."""
    return text.translate(_TEX)


def latex(grids: tuple[Grid, ...]) -> str:
    """The tables as LaTeX `table` environments using plain `tabular` (no packages needed)."""
    parts = []
    for grid in grids:
        spec = "".join("l" if kind == TEXT else "r" for kind in grid.kinds)
        rows = [" & ".join(tex_escape(_cell(v, k)) for v, k in zip(row, grid.kinds)) + r" \\" for row in grid.rows]
        notes = [r"\par\smallskip{\footnotesize " + tex_escape(n) + "}" for n in grid.notes]
        parts.append("\n".join([r"\begin{table}[htbp]", r"\centering", rf"\caption{{{tex_escape(grid.title)}}}",
                                rf"\begin{{tabular}}{{{spec}}}", r"\hline",
                                " & ".join(tex_escape(h) for h in grid.headings) + r" \\", r"\hline", *rows,
                                r"\hline", r"\end{tabular}", *notes, r"\end{table}"]) + "\n")
    return "\n".join(parts)


# ---------------------------------------------------------------------------- CSV

def csv_text(grid: Grid) -> str:
    """One table as CSV: the headings, then the cells at full precision (empty when missing).

    Text cells a spreadsheet would run as a formula get a leading `'` (`render.formats.spreadsheet_text`).
    """
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow([spreadsheet_text(h) for h in grid.headings])
    writer.writerows([_csv_cell(v) for v in row] for row in grid.rows)
    return out.getvalue()
