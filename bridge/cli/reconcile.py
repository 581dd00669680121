"""`sembridge reconcile SPEC`: fit both forms, adjudicate, explain, print the table."""
from __future__ import annotations

from pathlib import Path

import typer

from .. import outputs
from ..render import json as json_render
from ..render import terminal
from ..spec import load
from .app import QUIET, SPEC, app, guarded, inputs_of, run_job, stdout_console, write_text


@app.command("reconcile")
def reconcile_command(
    spec: Path = SPEC,
    json_file: Path = typer.Option(None, "--json", help="Also write the result as JSON to this file ('-' for stdout)."),
    quiet: bool = QUIET,
) -> None:
    """Fit both forms, check them with the referee, compare every quantity and explain every difference."""
    json_only = json_file is not None and str(json_file) == "-"
    with guarded():
        description = load(spec)
        outputs.check_file(json_file, inputs_of(description))
        result = run_job(description, quiet or json_only)
    if json_only:
        typer.echo(json_render.to_json(result), nl=False)
    else:
        terminal.render(result, stdout_console())
        if json_file is not None:
            write_text(json_file, json_render.to_json(result))
    raise typer.Exit(result.exit_code)
