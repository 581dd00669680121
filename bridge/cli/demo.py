"""`sembridge demo`: the main job on the bundled music-school examples (growth and cross-lagged)."""
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
    """Run the main job on the bundled music-school examples and say where the results are."""
    with guarded():
        growth = demo_files.copy_demo(out)
    specs = (growth, growth.parent / demo_files.CROSS_LAGGED_DESCRIPTION.name)
    lines, codes = [f"\nDemo descriptions and data: {growth.parent}"], []
    for spec in specs:
        with guarded():
            result = pipeline.run(spec, progress=progress(quiet))
        terminal.render(result, stdout_console())
        result_path = spec.with_suffix(".json")
        write_text(result_path, json_render.to_json(result))
        page = write_report(result, spec.parent / f"{spec.stem}-report")
        lines += [f"{spec.stem}: result as JSON {result_path}; report {page}"]
        codes.append(result.exit_code)
    typer.echo("\n".join(lines))
    raise typer.Exit(max(codes))
