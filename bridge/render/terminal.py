"""The side-by-side table for the terminal (rich). Pure: reads the reconciliation, computes nothing."""
from __future__ import annotations

import math

from rich.console import Console, Group
from rich.table import Table
from rich.text import Text

from ..reconcile import Reconciliation, Verdict

_STYLE = {Verdict.AGREE: "green", Verdict.EXPLAINED: "yellow", Verdict.UNEXPLAINED: "bold red",
          Verdict.UNDECIDED: "bold magenta"}


def _fmt(value: float) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    return f"{value:.4g}" if abs(value) >= 1e-3 or value == 0 else f"{value:.2e}"


def _se(estimate) -> str:
    """A standard error, marked when the solution is on a boundary (not an ordinary SE there)."""
    return _fmt(estimate.se) + ("*" if estimate.se_flag else "")


def quantity_table(rec: Reconciliation) -> Table:
    table = Table(title="Each quantity in both frameworks (SEM = wide form, mixed = long form)",
                  title_justify="left", header_style="bold")
    table.add_column("quantity", no_wrap=True)
    for heading in ("SEM", "SE", "mixed", "SE", "gap"):
        table.add_column(heading, justify="right", no_wrap=True)
    table.add_column("verdict", no_wrap=True)
    for row in rec.quantities:
        table.add_row(Text(row.key), _fmt(row.sem.estimate), _se(row.sem), _fmt(row.mixed.estimate),
                      _se(row.mixed), _fmt(row.difference), Text(row.verdict.value, style=_STYLE[row.verdict]))
    return table


def _fmt6(value: float) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{value:.6f}"


def _summary_lines(rec: Reconciliation) -> list[str]:
    t, d, ll = rec.timing, rec.data, rec.log_likelihood
    lines = [f"Description: {rec.description}",
             f"Timing: {t['design']} ({t['persons']} persons, {t['occasions']} occasions, "
             f"waves {', '.join(f'{w:g}' for w in t['waves'])}; rounding onto waves moves times by up to "
             f"{t['displacement']['max']:.3g}, {t['displacement']['mean']:.3g} on average)",
             f"Estimation: {d['method']}, {d['missing']}; persons used {d['persons_used']} of {d['persons_read']}, "
             f"occasions used {d['occasions_used']} of {d['occasions_read']}"]
    for p in d["predictors"]:
        if p["level"] is not None:
            lines.append(f"Predictor {p['key']}: 1 when {p['column']} is {p['level']!r}, 0 at the reference "
                         f"level {p['reference']!r}")
    lines.append(f"Log-likelihood: semopy {_fmt6(ll['sem'])}, statsmodels {_fmt6(ll['mixed'])}; referee on exact "
                 f"times at the SEM solution {_fmt6(ll['referee_at_sem'])}, at the mixed solution "
                 f"{_fmt6(ll['referee_at_mixed'])}")
    if d.get("log_likelihood_note"):
        lines.append(d["log_likelihood_note"])
    for c in rec.certificates:
        status = "certified maximum" if c.passed else f"NOT certified: {c.reason}"
        lines.append(f"Certificate ({c.library}, {c.form} form, {c.criterion}): library {c.reported:.6f}, referee "
                     f"{c.referee:.6f}; the referee's own maximum is {c.gain:.2g} higher; {status}")
    return lines


def render(rec: Reconciliation, console: Console) -> None:
    """Print the reconciliation: summary, table, findings, verdict, caution."""
    console.print(Group(*(Text(line) for line in _summary_lines(rec))))
    console.print(quantity_table(rec))
    if any(r.sem.se_flag or r.mixed.se_flag for r in rec.quantities):
        console.print(Text("* at the boundary of the parameter space: not an ordinary standard error.", style="dim"))
    proved = [e for e in rec.explanations if not e.note]
    if proved:
        console.print(Text("Why the numbers differ", style="bold"))
    for e in proved:
        console.print(Text(f"- {e.title} [{e.cause}] affects {', '.join(e.quantities)}.", style="bold"))
        console.print(Text(f"  {e.why}"))
        console.print(Text(f"  Evidence: {e.evidence}"))
    notes = [e for e in rec.explanations if e.note]
    if notes:
        console.print(Text("Notes (no refit removes these; they change no verdict)", style="bold"))
    for e in notes:
        console.print(Text(f"- {e.title} [{e.cause}] concerns {', '.join(e.quantities) or 'no quantity'}.",
                           style="bold"))
        console.print(Text(f"  {e.why}"))
        console.print(Text(f"  Evidence: {e.evidence}"))
    for finding in rec.findings:
        console.print(Text(f"Note ({finding.library or 'sembridge'}): {finding.message}"))
    console.print(Text(f"Tolerance: {rec.tolerance}.", style="dim"))
    console.print(Text(f"Overall verdict: {rec.verdict.value}", style=_STYLE[rec.verdict]))
    if rec.undecided_reason:
        console.print(Text(f"Why undecided: {rec.undecided_reason}"))
    console.print(Text(f"Caution: {rec.caution}", style="italic"))
