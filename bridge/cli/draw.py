"""`sembridge draw SPEC`: just the path figure (DOT, SVG, PNG, and PDF with a system Graphviz)."""
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
    """Draw the wide form's path figure with the SEM estimates (or, with --structure-only, without fitting)."""
    from ..compile.graph import model_graph
    from ..render import diagram

    folder = out if out is not None else Path(f"{spec.stem}-figure")
    with guarded():
        if structure_only:
            source = diagram.diagram_source(model_graph(getattr(pipeline.compile_description(spec), "sem", None)))
        else:
            result = pipeline.run(spec, progress=progress(quiet))
            source = diagram.diagram_source(model_graph(getattr(result.pair, "sem", None)), diagram.estimates_of(result),
                                            show_se=not no_se)
        files = diagram.figure_files(source, "path-diagram")
    write_files(folder, files)
    typer.echo("\n".join(str(folder / name) for name in files))
