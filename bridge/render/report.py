"""The report: one self-contained HTML page and every figure and table as its own file.

Pure: lays out a `bridge.reconcile.summary.ReportContent`. The page makes no network
request: the style sheet is inline, figures are inlined as base64 data, and a
content-security policy forbids anything else (no scripts at all). Every text that
comes from the user's files is escaped with `html.escape`.
"""
from __future__ import annotations

import base64
import html

from .. import __version__
from ..reconcile.summary import ReportContent
from . import diagram, standardised, tables, trajectory, wide_tables
from .formats import number
from .json import to_json

_POLICY = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"
_STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, Arial, sans-serif; color: #1d2733;
       margin: 0 auto; max-width: 1280px; padding: 1.5rem 2rem 3rem; line-height: 1.45; background: #fcfcfb; }
h1 { font-size: 1.5rem; margin: 0 0 .3rem; } h2 { font-size: 1.2rem; margin-top: 2.2rem;
     border-bottom: 1px solid #d5dbe1; padding-bottom: .2rem; } h3 { font-size: 1rem; margin: 1.2rem 0 .4rem; }
.verdict { display: inline-block; padding: .15rem .6rem; border-radius: .3rem; font-weight: 600; }
.verdict-agree { background: #dcefe0; } .verdict-explained { background: #f6ecd0; }
.verdict-unexplained { background: #f5d6d3; } .verdict-undecided { background: #e6dcf2; }
.side { display: flex; flex-wrap: wrap; gap: 1.5rem; align-items: flex-start; }
.side figure { flex: 1 1 520px; margin: 0; } .side .tables { flex: 1 1 420px; }
figure img { max-width: 100%; height: auto; border: 1px solid #e3e7eb; background: #fff; }
figcaption, .note { font-size: .85rem; color: #4a5562; }
table.grid { border-collapse: collapse; font-size: .88rem; margin: .3rem 0; background: #fff; }
table.grid caption { text-align: left; font-weight: 600; padding: .2rem 0; }
table.grid th, table.grid td { border-bottom: 1px solid #e3e7eb; padding: .2rem .55rem; text-align: left;
                               vertical-align: top; }
table.grid th { border-bottom: 2px solid #b9c2cc; }
table.grid .num { text-align: right; font-variant-numeric: tabular-nums; }
pre { background: #f3f5f7; padding: .7rem; overflow-x: auto; font-size: .82rem; }
dl { display: grid; grid-template-columns: max-content auto; gap: .15rem 1rem; } dt { font-weight: 600; }
.caution { border-left: 4px solid #b5542b; padding: .4rem .9rem; background: #fbf3ee; }
"""


def _e(text) -> str:
    return html.escape(str(text))


def _image(data: bytes, mime: str, alt: str) -> str:
    encoded = base64.b64encode(data).decode("ascii")
    return f'<img src="data:{mime};base64,{encoded}" alt="{_e(alt)}">'


def _header(content: ReportContent) -> str:
    rec = content.reconciliation
    return (f"<header>\n<h1>One model in two frameworks: {_e(rec.description)}</h1>\n"
            f'<p><span class="verdict verdict-{_e(rec.verdict.value)}">verdict: {_e(rec.verdict.value)}</span> '
            f"{len(rec.quantities)} quantities compared; tolerance: {_e(rec.tolerance)}.</p>\n"
            + (f'<p class="caution">Why undecided: {_e(rec.undecided_reason)}</p>\n' if rec.undecided_reason else "")
            + "</header>\n")


_GROWTH_CAPTION = (
    "Wide form (latent growth curve). Rectangles: measured waves and predictors; ellipses: growth factors; "
    "triangle: the constant of the mean structure. One-headed arrows: loadings (fixed, labelled with their "
    "values), means and regressions; two-headed arrows: variances, covariances and residual variances. Free "
    "paths show the SEM estimate with its standard error in brackets; paths fixed at zero are not drawn.")
_PANEL_CAPTION = (
    "Wide form (path model). Rectangles: each outcome at each wave, one row of waves per outcome; ellipses: "
    "person effects, traits and within-person parts; triangle: the constant of the mean structure. One-headed "
    "arrows: auto- and cross-lagged paths, loadings fixed at 1, means and intercepts; two-headed arrows: "
    "variances, covariances and residual variances. Free paths show the SEM estimate with its standard error "
    "in brackets; paths fixed at zero are not drawn.")


def _model_section(content: ReportContent, figures: dict[str, bytes]) -> str:
    if content.graph is None or (content.mixed is None and content.lagged is None):
        return ('<section id="model">\n<h2>The model</h2>\n<p class="note">This model family has no path '
                "figure; the correspondence table below shows every estimate.</p>\n</section>\n")
    if content.mixed is not None:
        grids, caption, heading = tables.mixed_grids(content.mixed), _GROWTH_CAPTION, "mixed-model table"
    else:
        grids, caption, heading = tables.lagged_grids(content.lagged), _PANEL_CAPTION, "lagged regressions"
    long_form = "".join(tables.html_table(grid) for grid in grids)
    figure = _image(figures["path-diagram.svg"], "image/svg+xml", "path figure of the wide form")
    return (f'<section id="model">\n<h2>The model: path figure and {heading}</h2>\n<div class="side">\n'
            f"<figure>{figure}<figcaption>{_e(caption)}</figcaption></figure>\n"
            f'<div class="tables">\n{long_form}</div>\n</div>\n</section>\n')


def _wide_grids(content: ReportContent) -> tuple:
    """The wide form's parameter table and both forms' absolute fit (where there is a wide form)."""
    if not content.wide:
        return ()
    fit = wide_tables.absolute_fit_grid(content.reconciliation.absolute_fit)
    return (wide_tables.wide_parameters_grid(content.wide),) + ((fit,) if fit is not None else ())


def _wide_section(content: ReportContent) -> str:
    grids = _wide_grids(content)
    if not grids:
        return ""
    body = "".join(tables.html_table(grid) for grid in grids)
    return f'<section id="wide-form">\n<h2>The wide form: its parameters and absolute fit</h2>\n{body}</section>\n'


def _standardised_section(figures: dict[str, bytes]) -> str:
    if "standardised-paths.svg" not in figures:
        return ""
    figure = _image(figures["standardised-paths.svg"], "image/svg+xml", "standardised paths over the waves")
    return ('<section id="standardised-paths">\n<h2>Standardised paths over the waves</h2>\n'
            f"<figure>{figure}<figcaption>Each auto- and cross-lagged path times SD(predictor) / SD(outcome) at "
            "the waves it links; left the wide form, right the long form. A time-invariant path is one horizontal "
            "line, a wave-specific path one point per wave.</figcaption></figure>\n</section>\n")


def _trajectory_section(figures: dict[str, bytes]) -> str:
    if "trajectories.svg" not in figures:
        return ""
    figure = _image(figures["trajectories.svg"], "image/svg+xml", "observed trajectories and implied means")
    return (f'<section id="trajectories">\n<h2>Observed trajectories and the implied means</h2>\n'
            f"<figure>{figure}<figcaption>Thin lines: observed persons. Thick solid lines: the mean implied by "
            f"the wide form; dashed: by the long form.</figcaption></figure>\n</section>\n")


def _correspondence_section(content: ReportContent) -> str:
    grid = tables.correspondence_grid(content.correspondence)
    return f'<section id="correspondence">\n<h2>Quantity by quantity</h2>\n{tables.html_table(grid)}</section>\n'


def _dl(pairs) -> str:
    return "<dl>\n" + "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>\n" for k, v in pairs) + "</dl>\n"


def _timing_section(content: ReportContent) -> str:
    rec = content.reconciliation
    t, d = rec.timing, rec.data
    pairs = [("design", t.get("design")), ("waves", ", ".join(f"{w:g}" for w in t.get("waves", ()))),
             ("wave grid from", t.get("grid_source"))]
    if "displacement" in t:
        pairs.append(("rounding onto waves", f"up to {number(t['displacement']['max'])}, "
                                             f"{number(t['displacement']['mean'])} on average"))
    pairs += [("persons", f"{d.get('persons_used')} used of {d.get('persons_read')} read"),
              ("occasions", f"{d.get('occasions_used')} used of {d.get('occasions_read')} read"),
              ("estimation", f"{d.get('method')}, {d.get('missing')}")]
    if "seconds" in d:
        pairs.append(("fitting time", f"semopy {d['seconds']['sem']:.2f} s, statsmodels {d['seconds']['mixed']:.2f} s"))
    pairs += [(f"predictor {p['key']}", f"1 when {p['column']} is {p['level']!r}, 0 at the reference level "
                                        f"{p['reference']!r}") for p in d.get("predictors", ()) if p.get("level")]
    pairs += [(f"certificate ({c.library}, {c.form} form, {c.criterion})",
               f"library {c.reported:.6f}, referee {c.referee:.6f}, the referee's own maximum {c.gain:.2g} higher: "
               + ("a certified maximum" if c.passed else f"not certified ({c.reason})")) for c in rec.certificates]
    return f'<section id="timing">\n<h2>Timing and data</h2>\n{_dl(pairs)}</section>\n'


def _gap_table(e) -> str:
    """Gaps before and after the refit that proves a cause; a note has no refit, so only the gap is shown."""
    if e.note:
        gaps = "".join(f"<tr><td>{_e(k)}</td><td class=\"num\">{_e(number(e.gap_before.get(k)))}</td></tr>\n"
                       for k in e.quantities)
        return (f'<table class="grid"><thead><tr><th>quantity</th><th class="num">observed gap (no refit removes '
                f'it)</th></tr></thead>\n<tbody>\n{gaps}</tbody></table>\n')
    gaps = "".join(f"<tr><td>{_e(k)}</td><td class=\"num\">{_e(number(e.gap_before.get(k)))}</td>"
                   f"<td class=\"num\">{_e(number(e.gap_after.get(k)))}</td></tr>\n" for k in e.quantities)
    return (f'<table class="grid"><thead><tr><th>quantity</th><th class="num">gap with the cause</th>'
            f'<th class="num">gap after the refit</th></tr></thead>\n<tbody>\n{gaps}</tbody></table>\n')


def _explanations_section(content: ReportContent) -> str:
    rec = content.reconciliation
    if not rec.explanations and not rec.findings:
        return ('<section id="explanations">\n<h2>Why the numbers differ</h2>\n'
                "<p>Every quantity agrees; there is nothing to explain.</p>\n</section>\n")
    parts = ['<section id="explanations">\n<h2>Why the numbers differ</h2>\n']
    for e in rec.explanations:
        parts.append(f"<h3>{_e(e.title)} [{_e(e.cause)}]{' (note)' if e.note else ''}</h3>\n<p>{_e(e.why)}</p>\n"
                     f"<p>Evidence: {_e(e.evidence)}</p>\n{_gap_table(e)}")
    if rec.findings:
        parts.append("<h3>Notes</h3>\n<ul>\n" + "".join(f"<li>{_e(f.library or 'sembridge')}: {_e(f.message)}</li>\n"
                                                         for f in rec.findings) + "</ul>\n")
    return "".join(parts) + "</section>\n"


def _specifications_section(content: ReportContent) -> str:
    texts = content.reconciliation.specifications
    blocks = (("Wide form: semopy model text", texts.get("wide", "")),
              (texts.get("long_heading", "Long form: statsmodels MixedLM on its array interface"), texts.get("long", "")),
              ("Generated names", texts.get("legend", "")))
    body = "".join(f"<h3>{_e(title)}</h3>\n<pre>{_e(text)}</pre>\n" for title, text in blocks)
    return f'<section id="specifications">\n<h2>Generated specifications</h2>\n{body}</section>\n'


def report_html(content: ReportContent, figures: dict[str, bytes]) -> str:
    """The self-contained page; `figures` holds at least `path-diagram.svg` and `trajectories.svg`."""
    rec = content.reconciliation
    body = "".join([_header(content), _model_section(content, figures), _wide_section(content),
                    _trajectory_section(figures),
                    _standardised_section(figures),
                    _correspondence_section(content), _timing_section(content), _explanations_section(content),
                    _specifications_section(content),
                    f'<section id="caution">\n<h2>Caution</h2>\n<p class="caution">{_e(rec.caution)}</p>\n</section>\n',
                    f'<footer><p class="note">Written by sembridge {_e(__version__)}.</p></footer>\n'])
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f'<meta http-equiv="Content-Security-Policy" content="{_POLICY}">\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            '<link rel="icon" href="data:,">\n'
            f"<title>sembridge report: {_e(rec.description)}</title>\n<style>{_STYLE}</style>\n</head>\n"
            f"<body>\n{body}</body>\n</html>\n")


def figure_source(content: ReportContent, show_se: bool = True) -> str:
    """DOT source of the report's path figure: the wide form with the SEM estimates."""
    estimates = content.estimates or diagram.estimates_of(content.reconciliation)
    return diagram.diagram_source(content.graph, estimates, show_se=show_se)


def _text_tables(stem: str, grids) -> dict[str, str]:
    return {f"{stem}.md": tables.markdown(grids), f"{stem}.tex": tables.latex(grids)}


def report_files(content: ReportContent) -> dict[str, bytes]:
    """Every output file by name: the page, the figures (with their DOT), the tables, the JSON result."""
    files: dict[str, bytes] = {}
    grids = (tables.correspondence_grid(content.correspondence),)
    texts = {**_text_tables("correspondence", grids), "result.json": to_json(content.reconciliation)}
    if content.graph is not None:
        files.update(diagram.figure_files(figure_source(content), "path-diagram"))
    if content.trajectories is not None:
        files.update(trajectory.trajectory_files(content.trajectories))
    if content.mixed is not None:
        mixed = tables.mixed_grids(content.mixed)
        texts.update(_text_tables("mixed-model", mixed))
        grids = (*mixed, *grids)
    wide = _wide_grids(content)
    if wide:
        texts.update(_text_tables("wide-form", wide))
        grids = (*wide, *grids)
    if content.standardised is not None:
        files.update(standardised.standardised_files(content.standardised))
    if content.lagged is not None:
        lagged = tables.lagged_grids(content.lagged)
        texts.update(_text_tables("lagged-regressions", lagged))
        grids = (*lagged, *grids)
    texts.update({f"{grid.name}.csv": tables.csv_text(grid) for grid in grids})
    files.update({name: text.encode("utf-8") for name, text in texts.items()})
    files["report.html"] = report_html(content, files).encode("utf-8")
    return dict(sorted(files.items()))
