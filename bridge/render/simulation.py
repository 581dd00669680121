"""A Monte Carlo summary as a Markdown table, a terminal table and a figure. Pure: computes nothing."""
from __future__ import annotations

import math
from pathlib import Path

from rich.table import Table
from rich.text import Text

from ..timing.summary import SimulationSummary

_COLUMNS = ("quantity", "form", "truth", "used", "bias", "MC SE", "RMSE", "mean SE", "emp. SD", "coverage",
            "band", "converged", "agreed")
_FORM = {"sem": "wide (SEM)", "mixed": "long (mixed)"}


def _fmt(value: float, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    return f"{value:.{digits}g}"


def _cells(summary: SimulationSummary) -> list[list[str]]:
    return [[q.quantity, _FORM[q.framework], _fmt(q.truth), str(q.used), _fmt(q.bias, 3), _fmt(q.bias_mcse, 2),
             _fmt(q.rmse, 3), _fmt(q.mean_se, 3), _fmt(q.empirical_sd, 3), f"{q.coverage:.3f}",
             f"[{q.band.low:.3f}, {q.band.high:.3f}]" + ("" if q.within_band else " outside"),
             f"{q.convergence:.0%}", f"{q.agreement:.0%}"] for q in summary.quantities]


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


def terminal_table(summary: SimulationSummary) -> Table:
    """The summary for the terminal (rich): bias, RMSE and coverage of both forms side by side."""
    caption = (f"{verdict_line(summary)}. Converged: wide form {summary.convergence['sem']:.0%}, long form "
               f"{summary.convergence['mixed']:.0%}. * coverage outside its binomial band "
               "(summary.md has the bands, Monte Carlo SEs and mean SEs).")
    table = Table(title=Text(f"Monte Carlo study: {summary.description} under {summary.population}"),
                  title_justify="left", header_style="bold", caption=Text(caption), caption_justify="left")
    table.add_column("quantity", no_wrap=True)
    for heading in ("truth", "bias\nSEM", "bias\nmixed", "RMSE\nSEM", "RMSE\nmixed", "coverage\nSEM",
                    "coverage\nmixed", "agreed"):
        table.add_column(heading, justify="right", no_wrap=True)
    for key in summary.keys:
        sem, mixed = summary.row(key, "sem"), summary.row(key, "mixed")
        cover = [f"{q.coverage:.3f}" + ("" if q.within_band else "*") for q in (sem, mixed)]
        table.add_row(Text(key), _fmt(sem.truth), _fmt(sem.bias, 3), _fmt(mixed.bias, 3), _fmt(sem.rmse, 3),
                      _fmt(mixed.rmse, 3), *cover, f"{sem.agreement:.0%}")
    return table


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
