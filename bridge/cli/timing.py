"""`sembridge timing DATA` (the timing summary) and `sembridge rounding SPEC` (the rounding experiment)."""
from __future__ import annotations

import json
import math
from contextlib import contextmanager
from pathlib import Path

import typer

from .. import outputs
from ..errors import DataError
from ..spec import load
from .app import QUIET, SPEC, app, fail, guarded, inputs_of, progress, write_text

JSON = typer.Option(None, "--json", help="Also write the result as JSON to this file ('-' for stdout only).")
FIGURE = typer.Option(None, "--figure", help="Also draw the figure into this PNG file.")


def parse_waves(text: str | None) -> tuple[float, ...] | None:
    """`0,6,12` -> (0.0, 6.0, 12.0); a value that is not a number is bad input."""
    if text is None:
        return None
    values = []
    for part in text.replace(" ", "").split(","):
        try:
            values.append(float(part))
        except ValueError:
            raise DataError(f"--waves: {part!r} is not a number (give times separated by commas, e.g. 0,6,12)") \
                from None
    return tuple(values)


def check_outputs(files: list[Path | None], inputs: list[Path]) -> None:
    """Before any work: every output file can be written and none is an input (exit 2 otherwise)."""
    with guarded():
        for path in files:
            outputs.check_file(path, inputs)


def lab_console():
    """The timing lab's console: the terminal's width; when output is piped, COLUMNS (at least 40) or 120."""
    import os
    import sys

    from rich.console import Console

    if sys.stdout.isatty():
        return Console()
    columns = os.environ.get("COLUMNS", "")
    return Console(width=int(columns) if columns.isdigit() and int(columns) >= 40 else 120)


@contextmanager
def writing(path: Path):
    """A temporary path for a writer that needs a file name, moved onto `path` when it is complete;
    a failed write is one line and exit code 2."""
    with guarded(), outputs.writing_to(path) as temporary:
        yield temporary


def json_safe(value):
    """JSON has no NaN or infinity: such numbers (an empty wave's spread, say) become null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    return value


def _emit(payload: dict, json_file: Path | None, view) -> None:
    text = json.dumps(json_safe(payload), indent=2, allow_nan=False) + "\n"
    if json_file is not None and str(json_file) == "-":
        typer.echo(text, nl=False)
        return
    lab_console().print(view)
    if json_file is not None:
        write_text(json_file, text)


@app.command("timing")
def timing_command(
    data: Path = typer.Argument(..., help="A long-layout data file (.csv, .tsv or .parquet), one row per occasion, "
                                          "or a growth description (.yaml) to also predict and measure what "
                                          "rounding does to each estimate."),
    person: str = typer.Option(None, "--person", help="The column that identifies persons (data files)."),
    time: str = typer.Option(None, "--time", help="The column with each occasion's time (data files)."),
    waves: str = typer.Option(None, "--waves", help="The planned wave times, comma-separated (e.g. 0,6,12,18,24); "
                                                    "without it the grid is inferred as the reconciler does."),
    with_offset: bool = typer.Option(False, "--with-offset",
                                     help="Description only: add each person's mean displacement from the "
                                          "grid as a person-level predictor and show the reconciliation."),
    json_file: Path = JSON,
    figure: Path = FIGURE,
    quiet: bool = QUIET,
) -> None:
    """Classify a design's timing, show the time spread per wave and what rounding costs, and recommend a form."""
    from ..render import timing as render
    from ..timing.inspect import inspect_description, inspect_file

    described = data.suffix.lower() in (".yaml", ".yml")
    if described and (person or time or waves):
        fail("--person, --time and --waves are for data files; a description names its own columns and waves")
    if not described and (person is None or time is None):
        fail("a data file needs --person and --time (or give a growth description, .yaml)")
    if with_offset and not described:
        fail("--with-offset needs a growth description (.yaml)")
    with guarded():
        check_outputs([json_file, figure], inputs_of(load(data)) if described else [data])
    with guarded():
        if described:
            with progress(quiet or (json_file is not None and str(json_file) == "-"))("fitting both forms"):
                report = inspect_description(data, with_offset=with_offset)
        else:
            report = inspect_file(data, person, time, parse_waves(waves))
    _emit(report.to_dict(), json_file, render.timing_view(report))
    if figure is not None:
        with writing(figure) as temporary:
            render.timing_figure(report, temporary)


@app.command("rounding")
def rounding_command(
    spec: Path = SPEC,
    max_columns: int = typer.Option(50, "--max-columns", min=2, help="Stop before a grid with more wide columns."),
    max_patterns: int = typer.Option(1000, "--max-patterns", min=1,
                                     help="Stop before a grid with more missing-data patterns."),
    max_levels: int = typer.Option(5, "--max-levels", min=0, help="The finest level to try (spacing / 2^level)."),
    json_file: Path = JSON,
    figure: Path = FIGURE,
    quiet: bool = QUIET,
) -> None:
    """Fit the wide form on ever finer wave grids and show how far each quantity is from the exact-time model."""
    from ..render import timing as render
    from ..timing.experiment import Limits, run_experiment

    with guarded():
        check_outputs([json_file, figure], inputs_of(load(spec)))
    json_only = json_file is not None and str(json_file) == "-"
    with guarded():
        experiment = run_experiment(spec, Limits(max_columns, max_patterns, max_levels),
                                    progress=progress(quiet or json_only))
    _emit(experiment.to_dict(), json_file, render.experiment_view(experiment))
    if figure is not None:
        with writing(figure) as temporary:
            render.experiment_figure(experiment, temporary)
