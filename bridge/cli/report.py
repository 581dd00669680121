"""`sembridge report SPEC --out DIR`: the HTML report and every figure and table as its own file."""
from __future__ import annotations

from pathlib import Path

import typer

from .. import pipeline
from ..reconcile import Reconciliation
from .app import QUIET, SPEC, app, fail, guarded, progress


def write_files(folder: Path, files: dict[str, bytes]) -> None:
    """Write output files into `folder` (a folder that cannot be written is the user's problem: exit 2)."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for name, data in files.items():
            (folder / name).write_bytes(data)
    except OSError as exc:
        fail(f"cannot write into {folder} ({exc.strerror or exc})")


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
                                                 "with '-report')."),
    quiet: bool = QUIET,
) -> None:
    """Fit, reconcile and write the HTML report with the path figure, the tables and the explanations."""
    folder = out if out is not None else Path(f"{spec.stem}-report")
    with guarded():
        result = pipeline.run(spec, progress=progress(quiet))
    page = write_report(result, folder)
    typer.echo(f"Report: {page}\nFigures, tables and the JSON result: {folder}")
    raise typer.Exit(result.exit_code)
