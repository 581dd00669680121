"""The timing report and the rounding experiment as terminal tables and figures. Pure: computes nothing."""
from __future__ import annotations

import math
from pathlib import Path

from rich.console import Group
from rich.table import Table
from rich.text import Text

from ..timing.experiment import RoundingExperiment
from .fitting import Fitting, key_column, number_columns
from ..timing.inspect import TimingReport

SHOWN_WAVES = 12   # a longer spread table shows its first and last rows only (all are in the JSON)


def _fmt(value: float, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    return f"{value:.{digits}g}" if abs(value) >= 1e-3 or value == 0 else f"{value:.2e}"


def _spread_table(report: TimingReport) -> Table:
    table = Table(title=f"Times assigned to each wave (time in '{report.time}' units)", title_justify="left",
                  header_style="bold", show_edge=False)
    spread = list(report.spread)
    hidden = len(spread) - SHOWN_WAVES
    if hidden > 0:
        spread = spread[:SHOWN_WAVES // 2] + [None] + spread[-SHOWN_WAVES // 2:]
    rows = [[f"... {hidden} more"] + [""] * 9 if s is None else
            [_fmt(s.wave), str(s.n), *(_fmt(v) for v in (s.minimum, s.q1, s.median, s.q3, s.maximum, s.sd,
                                                          s.displacement_mean, s.displacement_max))]
            for s in spread]
    number_columns(table, ("wave", "n", "min", "25%", "median", "75%", "max", "SD", "mean\nmove", "max\nmove"), rows)
    for row in rows:
        table.add_row(*row)
    return table


def timing_lines(report: TimingReport) -> list[str]:
    """The report's headline facts, one per line."""
    t, per = report.timing, report.occasions_per_person
    waves = ", ".join(f"{w:g}" for w in t.waves[:10]) + (f", ... ({len(t.waves)} waves)" if len(t.waves) > 10 else "")
    median, p90, top = report.displacement_quantiles
    return [f"Data: {report.source} (person '{report.person}', time '{report.time}')",
            f"Design: {t.design.value}",
            f"{t.n_persons} persons, {t.n_occasions} occasions ({per[0]} to {per[2]} per person, median {per[1]:g}), "
            f"{t.n_distinct_times} distinct times",
            f"Wave grid ({t.grid_source.value}): {waves}",
            f"Rounding onto the grid moves a time by {t.displacement_mean:.3g} on average (median {median:.3g}, "
            f"90% within {p90:.3g}, at most {top:.3g}); median gap between waves {report.median_gap:g}",
            _split_line(t),
            f"Wide form on this grid: {len(t.waves)} columns, {report.grid_patterns} missing-data patterns, "
            f"{report.complete_persons} persons seen at every wave",
            f"Wide form on the exact times: {report.exact_columns} columns, {report.exact_patterns} missing-data "
            "patterns"]


def _split_line(t) -> str:
    s = t.split
    if s is None or s.variance <= 0:
        return "Signed displacement (time minus its wave): none"
    return (f"Signed displacement (time minus its wave): mean {s.mean:.3g}, variance {s.variance:.3g} = "
            f"person offsets {s.between:.3g} ({s.between_share:.0%}) + occasion jitter {s.within:.3g} "
            f"({s.within_share:.0%})")


def _check_table(report: TimingReport, full: bool) -> Table:
    """Exact-time value, predicted and measured change of each quantity, in standard errors."""
    check = report.check
    p = check.prediction
    title = ("Rounding onto the grid: wide form minus exact-time mixed model" +
             (f" (with {check.offset_predictor} as a predictor)" if check.offset_predictor else ""))
    caption = ("Sorted by the measured gap in standard errors (SE of the exact-time mixed model)."
               + ("" if full else " Exact values and SEs: --json."))
    table = Table(title=title, title_justify="left", header_style="bold", caption=caption, caption_justify="left",
                  show_edge=full)
    keys = [k for k, _ in check.ranked()]
    key_column(table, "quantity", keys)
    headings = ("exact", "SE", "predicted", "pred.\nin SE", "measured", "meas.\nin SE")
    rows = []
    for key, in_se in check.ranked():
        change = p.change.get(key) if p else None
        rows.append([_fmt(check.exact[key]), _fmt(check.exact_se[key]),
                     _fmt(change) if change is not None else "-",
                     f"{p.in_se[key]:+.2f}" if p and key in p.in_se else "-",
                     _fmt(check.observed[key]), f"{in_se:+.2f}"])
    if not full:
        headings, rows = headings[2:], [row[2:] for row in rows]
    number_columns(table, headings, rows)
    for key, row in zip(keys, rows):
        table.add_row(Text(key), *row)
    return table


def _exact_wide_line(report: TimingReport) -> str:
    e = report.check.exact_wide
    return (f"Exact wide form (person-specific loadings at the exact times), maximised by the referee: "
            f"log-likelihood {e.log_likelihood:.6f}; mixed model {e.mixed_log_likelihood:.6f} (difference "
            f"{e.difference:.2g}). Unbalanced timing is a limit of the software that fits the wide layout, "
            "not of the framework.")


def timing_view(report: TimingReport) -> Group:
    """Everything `sembridge timing` prints."""
    r = report.recommendation
    advice = Text.assemble(("Recommendation: ", "bold"), (r.framework, "bold green"), f"\n{r.reason}\n",
                           ("Trade-offs: ", "bold"), r.cost)
    parts = [*(Text(line) for line in timing_lines(report)), Text(""), _spread_table(report)]
    if report.check is not None:
        parts.append(Fitting(_check_table(report, True), _check_table(report, False)))
        if report.check.exact_wide is not None:
            parts.append(Text(_exact_wide_line(report)))
    return Group(*parts, advice)


def timing_figure(report: TimingReport, path: Path) -> None:
    """Histogram of the occasion times coloured by the wave they are rounded to, with the grid marked."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    edges, counts = report.histogram.edges, report.histogram.counts
    lefts, widths = edges[:-1], [b - a for a, b in zip(edges[:-1], edges[1:])]
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(9, 5.5), sharex=True, height_ratios=(3, 2))
    base = [0] * len(lefts)
    for k, row in enumerate(counts):
        top.bar(lefts, row, width=widths, bottom=base, align="edge", color=f"C{k % 10}", linewidth=0)
        base = [b + c for b, c in zip(base, row)]
    for s in report.spread:
        top.axvline(s.wave, color="0.2", lw=0.8, ls="--")
        if s.n:
            bottom.plot([s.minimum, s.maximum], [s.wave, s.wave], color="0.6", lw=1)
            bottom.plot([s.q1, s.q3], [s.wave, s.wave], color="0.2", lw=5, solid_capstyle="butt")
            bottom.plot([s.wave], [s.wave], "k|", ms=12)
    top.set_ylabel("occasions")
    top.set_title(f"{report.source}: {report.timing.design.value}; colour = wave the time is rounded to",
                  fontsize="medium")
    bottom.set_ylabel("wave")
    bottom.set_xlabel(f"time ('{report.time}'); bottom: range and middle half of the times of each wave")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def _grid_table(experiment: RoundingExperiment) -> Table:
    table = Table(title="Wave grids (level 0 = the design's waves; each level halves the spacing)",
                  title_justify="left", header_style="bold")
    for heading in ("level", "spacing", "wide columns", "patterns", "mean move", "max move", "SEM fit s",
                    "all s", "note"):
        table.add_column(heading, justify="right" if heading != "note" else "left", no_wrap=True)
    for f in experiment.fits:
        g = f.grid
        note = f"same columns as level {f.same_as}" if f.same_as is not None else (
            f"{f.refits} refit(s) ordered by the referee" if f.refits else "")
        table.add_row(str(g.level), _fmt(g.step), str(g.columns), str(g.patterns), _fmt(g.displacement_mean),
                      _fmt(g.displacement_max), f"{f.seconds_sem:.2f}", f"{f.seconds_total:.2f}", note)
    return table


def _deviation_table(experiment: RoundingExperiment) -> Table:
    table = Table(title="Wide form on each grid minus the exact-time mixed model", title_justify="left",
                  header_style="bold")
    table.add_column("quantity", no_wrap=True)
    table.add_column("exact-time value", justify="right")
    for f in experiment.fits:
        table.add_column(f"level {f.grid.level}", justify="right", no_wrap=True)
    for key in experiment.keys:
        table.add_row(Text(key), _fmt(experiment.exact[key]), *(_fmt(f.deviation.get(key)) for f in experiment.fits))
    return table


def experiment_view(experiment: RoundingExperiment) -> Group:
    """Everything `sembridge rounding` prints."""
    return Group(Text(f"Description: {experiment.description}"), _grid_table(experiment),
                 _deviation_table(experiment),
                 Text(f"Rule: {experiment.rule}. Stopped: {experiment.stopped}."))


def experiment_figure(experiment: RoundingExperiment, path: Path) -> None:
    """Each quantity's deviation, in exact-time standard errors, at every level of the experiment."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    levels = [f.grid.level for f in experiment.fits]
    fig, ax = plt.subplots(figsize=(8, 4.8))
    for k, key in enumerate(experiment.keys):
        ax.plot(levels, experiment.in_standard_errors(key), marker="o", color=f"C{k % 10}", label=key)
    ax.axhline(0, color="0.3", lw=0.8)
    ax.set_xticks(levels, [f"level {f.grid.level}\n{f.grid.columns} columns\nmoved {f.grid.displacement_mean:.3g}"
                           for f in experiment.fits], fontsize="small")
    ax.set_xlabel("wave grid (finer to the right); moved = mean distance rounding moves a time")
    ax.set_ylabel("wide form - exact mixed model\n(in exact-time standard errors)")
    ax.set_title(f"{experiment.description}: rounding experiment", fontsize="medium")
    ax.legend(fontsize="x-small", loc="best")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
