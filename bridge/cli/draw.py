"""`sembridge draw SPEC`: just the figures (the path figure as DOT, SVG, PNG, and PDF with a system Graphviz;
for a cross-lagged model also the standardised paths over the waves)."""
from __future__ import annotations

from pathlib import Path

import typer

from .. import pipeline
from .app import QUIET, SPEC, app, guarded, progress
from .report import write_files


@app.command("draw")
def draw_command(
    spec: Path = SPEC,
    out: Path = typer.Option(None, "--out", help="Folder for the figure files (default: SPEC's name with "
                                                 "'-figure')."),
    structure_only: bool = typer.Option(False, "--structure-only",
                                        help="Draw the model without fitting it: free paths show their quantity "
                                             "keys instead of estimates."),
    no_se: bool = typer.Option(False, "--no-se", help="Leave standard errors out of the labels."),
    quiet: bool = QUIET,
) -> None:
    """Draw the wide form's path figure with the SEM estimates (or, with --structure-only, without fitting).

    For a cross-lagged model, also draw the standardised paths over the waves (after fitting).
    """
    from ..compile.graph import model_graph
    from ..reconcile.summary import report_content
    from ..render import diagram, standardised

    folder = out if out is not None else Path(f"{spec.stem}-figure")
    with guarded():
        if structure_only:
            source = diagram.diagram_source(pipeline.structure_graph(spec))
            files = diagram.figure_files(source, "path-diagram")
        else:
            content = report_content(pipeline.run(spec, progress=progress(quiet)))
            if content.graph is None:
                model_graph(None)   # raises: this model family has no path figure
            files = diagram.figure_files(diagram.diagram_source(content.graph, content.estimates, show_se=not no_se),
                                         "path-diagram")
            if content.standardised is not None:
                files.update(standardised.standardised_files(content.standardised))
    write_files(folder, files)
    typer.echo("\n".join(str(folder / name) for name in files))
