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
    for k, s in enumerate(report.spread):
        top.axvline(s.wave, color="0.2", lw=0.8, ls="--", label="planned wave" if k == 0 else None)
        if s.n:
            bottom.plot([s.minimum, s.maximum], [k, k], color="0.6", lw=1, label="range" if k == 0 else None)
            bottom.plot([s.q1, s.q3], [k, k], color="0.2", lw=5, solid_capstyle="butt",
                        label="middle half" if k == 0 else None)
            bottom.plot([s.wave], [k], "k|", ms=12, label="planned wave" if k == 0 else None)
    top.set_ylim(0, max(base + [1]) * 1.15)
    top.set_ylabel("occasions per bin")
    top.set_title(f"{report.source}: {report.timing.design.value}; colour = wave the time is rounded to",
                  fontsize="medium")
    top.legend(fontsize="small", loc="upper right")
    shown = [k for k, s in enumerate(report.spread)]
    step = max(1, len(shown) // 12)
    bottom.set_yticks(shown[::step], [f"{report.spread[k].wave:g}" for k in shown[::step]])
    bottom.set_ylim(-0.8, len(shown) - 0.2)
    bottom.set_ylabel(f"wave ({report.time})")
    bottom.legend(fontsize="small", loc="lower right", ncols=3)
    bottom.set_xlabel(f"time ({report.time}); bottom: where the times of each wave lie")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def _grid_table(experiment: RoundingExperiment) -> Table:
    table = Table(title="Wave grids (level 0 = the design's waves; each level halves the gaps)",
                  title_justify="left", header_style="bold")
    rows = []
    for f in experiment.fits:
        g = f.grid
        note = f"as level {f.same_as}" if f.same_as is not None else (f"{f.refits} refit(s)" if f.refits else "")
        rows.append([str(g.level), g.spacing, str(g.columns), str(g.patterns), _fmt(g.displacement_mean),
                     _fmt(g.displacement_max), f"{f.seconds_sem:.2f}", f"{f.seconds_total:.2f}", note])
    number_columns(table, ("level", "gaps", "wide\ncolumns", "patterns", "mean\nmove", "max\nmove", "wide\nfit s",
                           "all s", "note"), rows)
    for row in rows:
        table.add_row(*row)
    return table


def _deviation_table(experiment: RoundingExperiment, full: bool) -> Table:
    caption = ("Deviation in standard errors of the exact-time mixed model; rows sorted by the largest."
               + ("" if full else " Exact values and SEs: --json."))
    table = Table(title="Wide form on each grid minus the exact-time mixed model, in SE", title_justify="left",
                  header_style="bold", caption=caption, caption_justify="left", show_edge=full)
    keys = sorted(experiment.keys, key=lambda k: -max((abs(v) for v in experiment.in_standard_errors(k)
                                                        if math.isfinite(v)), default=0.0))
    key_column(table, "quantity", keys)
    headings = (("exact", "SE") if full else ()) + tuple(f"level\n{f.grid.level}" for f in experiment.fits)
    rows = [([_fmt(experiment.exact[k]), _fmt(experiment.exact_se[k])] if full else [])
            + [f"{v:+.2f}" if math.isfinite(v) else "n/a" for v in experiment.in_standard_errors(k)] for k in keys]
    number_columns(table, headings, rows)
    for key, row in zip(keys, rows):
        table.add_row(Text(key), *row)
    return table


def experiment_view(experiment: RoundingExperiment) -> Group:
    """Everything `sembridge rounding` prints."""
    notes = [Text(n) for n in experiment.worse_notes()]
    return Group(Text(f"Description: {experiment.description}"),
                 Fitting(_grid_table(experiment), _grid_table(experiment)),
                 Fitting(_deviation_table(experiment, True), _deviation_table(experiment, False)), *notes,
                 Text(f"Rule: {experiment.rule}. Stopped: {experiment.stopped}."))


def experiment_figure(experiment: RoundingExperiment, path: Path) -> None:
    """Each quantity's deviation, in exact-time standard errors, at every level, with a +-0.5 SE band."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    levels = [f.grid.level for f in experiment.fits]
    fig, ax = plt.subplots(figsize=(9, 5.2))
    ax.axhspan(-0.5, 0.5, color="0.9", zorder=0, label="within +-0.5 SE")
    ax.axhline(0, color="0.3", lw=0.8)
    values = [0.5]
    for k, key in enumerate(experiment.keys):
        series = experiment.in_standard_errors(key)
        values += [abs(v) for v in series if math.isfinite(v)]
        ax.plot(levels, series, marker="os^vD<>p"[k % 8], color=f"C{k % 10}", label=key)
    top = max(values) * 1.15
    ax.set_ylim(-top, top)
    ax.set_xlim(min(levels) - 0.3, max(levels) + 0.3)
    ax.set_xticks(levels, [f"level {f.grid.level}\n{f.grid.columns} columns\nmoved {f.grid.displacement_mean:.3g}"
                           for f in experiment.fits], fontsize="small")
    ax.set_xlabel("wave grid (finer to the right); moved = mean distance rounding moves a time (time units)")
    ax.set_ylabel("wide form minus exact mixed model\n(standard errors of the exact-time estimate)")
    ax.set_title(f"{experiment.description}: rounding experiment", fontsize="medium")
    ax.legend(fontsize="x-small", loc="center left", bbox_to_anchor=(1.01, 0.5), frameon=False)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
