"""`sembridge report SPEC --out DIR`: the HTML report and every figure and table as its own file."""
from __future__ import annotations

from pathlib import Path

import typer

from .. import outputs
from ..reconcile import Reconciliation
from ..spec import load
from .app import QUIET, SPEC, app, guarded, inputs_of, run_job

#: Every file a report may hold (docs/figures.md), checked before fitting: none may be a file sembridge
#: did not write.
REPORT_FILES = ("report.html", "result.json", "correspondence.md", "correspondence.tex", "correspondence.csv",
                *(f"path-diagram.{ext}" for ext in ("dot", "svg", "png", "pdf")), "trajectories.svg",
                "trajectories.png", "mixed-model.md", "mixed-model.tex", "fixed-effects.csv",
                "variance-components.csv", "fit.csv", "standardised-paths.svg", "standardised-paths.png",
                "lagged-regressions.md", "lagged-regressions.tex", "lagged-coefficients.csv", "lagged-variances.csv",
                "lagged-fit.csv")


def write_files(folder: Path, files: dict[str, bytes]) -> None:
    """Write output files into `folder` atomically, with the manifest (a folder that cannot be written, or
    holds files sembridge did not write, is the user's problem: exit 2)."""
    with guarded():
        outputs.write_folder(folder, files)


def write_report(rec: Reconciliation, folder: Path) -> Path:
    """Build the report of a reconciliation, write all its files into `folder`, return the page's path."""
    from ..reconcile.summary import report_content
    from ..render.report import report_files

    with guarded():
        files = report_files(report_content(rec))
    write_files(folder, files)
    return folder / "report.html"


@app.command("report")
def report_command(
    spec: Path = SPEC,
    out: Path = typer.Option(None, "--out", help="Folder for the report and its files (default: SPEC's name "
                                                 "with '-report'); it must be new, empty, or an earlier report."),
    quiet: bool = QUIET,
) -> None:
    """Fit, reconcile and write the HTML report with the path figure, the tables and the explanations."""
    folder = out if out is not None else Path(f"{spec.stem}-report")
    with guarded():
        description = load(spec)
        outputs.check_folder(folder, REPORT_FILES, inputs_of(description))
        result = run_job(description, quiet)
    page = write_report(result, folder)
    typer.echo(f"Report: {page}\nFigures, tables and the JSON result: {folder}")
    raise typer.Exit(result.exit_code)
