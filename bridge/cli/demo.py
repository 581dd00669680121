"""`sembridge demo`: the main job on the bundled music-school example."""
from __future__ import annotations

from pathlib import Path

import typer

from .. import pipeline
from ..demo import files as demo_files
from ..render import json as json_render
from ..render import terminal
from .app import QUIET, app, guarded, progress, stdout_console, write_text
from .report import write_report


@app.command("demo")
def demo_command(
    out: Path = typer.Option(Path("sembridge-demo"), "--out", help="Folder for the demo files and results."),
    quiet: bool = QUIET,
) -> None:
    """Run the main job on the bundled music-school example and say where the results are."""
    with guarded():
        spec = demo_files.copy_demo(out)
        result = pipeline.run(spec, progress=progress(quiet))
    terminal.render(result, stdout_console())
    result_path = spec.with_suffix(".json")
    write_text(result_path, json_render.to_json(result))
    page = write_report(result, spec.parent / "report")
    typer.echo(f"\nDemo description and data: {spec.parent}\nResult as JSON: {result_path}\nReport: {page}")
    raise typer.Exit(result.exit_code)
