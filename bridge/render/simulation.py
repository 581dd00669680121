"""A Monte Carlo summary as a Markdown table, a terminal table and a figure. Pure: computes nothing."""
from __future__ import annotations

import math
from pathlib import Path

from rich.table import Table
from rich.text import Text

from ..timing.summary import SimulationSummary
from .fitting import Fitting, key_column, number_columns, stacked

_COLUMNS = ("quantity", "form", "truth", "used", "bias", "MC SE", "RMSE", "mean SE", "emp. SD", "coverage",
            "band", "coverage band", "converged", "within tolerance", "wide - long", "MC SE of wide - long")
_FORM = {"sem": "wide (SEM)", "mixed": "long (mixed)"}


def _fmt(value: float, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    return f"{value:.{digits}g}"


def _cells(summary: SimulationSummary) -> list[list[str]]:
    return [[q.quantity, _FORM[q.framework], _fmt(q.truth), str(q.used), _fmt(q.bias, 3), _fmt(q.bias_mcse, 2),
             _fmt(q.rmse, 3), _fmt(q.mean_se, 3), _fmt(q.empirical_sd, 3), f"{q.coverage:.3f}",
             f"[{q.band.low:.3f}, {q.band.high:.3f}]", q.band_position,
             f"{q.convergence:.0%}", f"{q.agreement:.0%}", _fmt(q.paired_difference, 3),
             _fmt(q.paired_difference_mcse, 2)] for q in summary.quantities]


def verdict_line(summary: SimulationSummary) -> str:
    """How often the frameworks agreed, in one line."""
    counts = summary.verdicts
    return (f"{summary.replications} replications (seed {summary.seed}): the frameworks agreed on every "
            f"quantity in {counts['agree']}, every difference was explained in {counts['explained']}, "
            f"{counts['unexplained']} had an unexplained difference, {counts['failed']} failed")


def markdown_table(summary: SimulationSummary) -> str:
    """The summary as a Markdown table with the verdict line below it."""
    lines = ["| " + " | ".join(_COLUMNS) + " |", "|" + "|".join(["---"] * 2 + ["---:"] * (len(_COLUMNS) - 2)) + "|"]
    lines += ["| " + " | ".join(row) + " |" for row in _cells(summary)]
    return "\n".join(lines) + "\n\n" + verdict_line(summary) + "."


def _caption(summary: SimulationSummary) -> str:
    return (f"{verdict_line(summary)}. Converged: wide form {summary.convergence['sem']:.0%}, long form "
            f"{summary.convergence['mixed']:.0%}. cover: coverage of the 95% intervals; band: where that coverage lies "
            "against its binomial band (inside, below or above). wide - long: the mean "
            "paired difference of the two forms' estimates on the same data sets, +- its Monte Carlo SE; "
            "in tol. (within tolerance): share of replications whose reconciliation found the quantity within its "
            "tolerance (summary.md has it, the bands, Monte Carlo SEs of the bias and mean SEs).")


def _paired(q) -> str:
    return f"{_fmt(q.paired_difference, 3)} +- {_fmt(q.paired_difference_mcse, 2)}"


def _side_by_side(summary: SimulationSummary) -> Table:
    table = Table(title=Text(f"Monte Carlo study: {summary.description} under {summary.population}"),
                  title_justify="left", header_style="bold", caption=Text(_caption(summary)), caption_justify="left",
                  show_edge=False)
    key_column(table, "quantity", summary.keys)
    headings = ("truth", "bias\nwide", "bias\nlong", "RMSE\nwide", "RMSE\nlong", "cover\nwide",
                "band\nwide", "cover\nlong", "band\nlong", "wide - long\n+- MC SE")
    rows = []
    for key in summary.keys:
        sem, mixed = summary.row(key, "sem"), summary.row(key, "mixed")
        rows.append([_fmt(sem.truth), _fmt(sem.bias, 3), _fmt(mixed.bias, 3), _fmt(sem.rmse, 3),
                     _fmt(mixed.rmse, 3), f"{sem.coverage:.3f}", sem.band_position, f"{mixed.coverage:.3f}",
                     mixed.band_position, _paired(sem)])
    number_columns(table, headings, rows)
    for key, row in zip(summary.keys, rows):
        table.add_row(Text(key), *row)
    return table


def _one_row_per_form(summary: SimulationSummary):
    blocks = []
    for key in summary.keys:
        sem, mixed = summary.row(key, "sem"), summary.row(key, "mixed")
        blocks.append((key, [[name, _fmt(q.truth), _fmt(q.bias, 3), _fmt(q.rmse, 3),
                              f"{q.coverage:.3f}", q.band_position, extra]
                             for name, q, extra in (("wide", sem, _paired(sem)),
                                                    ("long", mixed, f"{sem.agreement:.0%} in tol."))]))
    return stacked(f"Monte Carlo study: {summary.description} under {summary.population}", _caption(summary),
                   ("form", "truth", "bias", "RMSE", "coverage", "band", "wide - long +- MC SE"), blocks)


def terminal_table(summary: SimulationSummary) -> Fitting:
    """The summary for the terminal: both forms side by side, or one row per form on a narrow terminal."""
    return Fitting(_side_by_side(summary), _one_row_per_form(summary))


def figure(summary: SimulationSummary, path: Path) -> None:
    """Two panels: bias with +-2 Monte Carlo SE per quantity and form; coverage against its binomial band."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    keys = list(dict.fromkeys(q.quantity for q in summary.quantities))
    fig, (left, right) = plt.subplots(1, 2, figsize=(11, 0.45 * len(keys) + 1.8), sharey=True)
    for offset, framework, marker in ((-0.15, "sem", "s"), (0.15, "mixed", "o")):
        rows = [q for q in summary.quantities if q.framework == framework]
        y = [keys.index(q.quantity) + offset for q in rows]
        scaled, errors = zip(*(q.relative_bias for q in rows)) if rows else ((), ())
        left.errorbar(scaled, y, xerr=errors, fmt=marker, capsize=3, label=_FORM[framework])
        right.plot([q.coverage for q in rows], y, marker, label=_FORM[framework])
        for q, yy in zip(rows, y):
            right.plot([q.band.low, q.band.high], [yy, yy], color="0.75", lw=4, zorder=0)
    left.axvline(0, color="0.4", lw=0.8)
    right.axvline(0.95, color="0.4", lw=0.8)
    left.set_yticks(range(len(keys)), keys)
    left.invert_yaxis()
    left.set_xlabel("bias / |true value|, +-2 Monte Carlo SE\n(plain bias where the true value is 0)")
    right.set_xlabel("95% interval coverage\n(grey: where 95% of studies would fall)")
    left.legend(loc="best", fontsize="small")
    fig.suptitle(f"{summary.replications} replications, seed {summary.seed}", fontsize="medium")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
