"""`sembridge simulate SPEC --population FILE --replications R`: a Monte Carlo study of both forms."""
from __future__ import annotations

import io
import json
import os
import sys
from pathlib import Path

import typer
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

from .. import outputs
from .app import SPEC, app, fail, guarded
from .timing import json_safe, lab_console

OUTPUTS = ("replications.parquet", "replications.csv", "summary.md", "summary.csv", "summary.json", "summary.png")


def _progress_bar(quiet: bool) -> Progress | None:
    if quiet or not sys.stderr.isatty():
        return None
    return Progress(TextColumn("replications"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                    TextColumn("left"), TimeRemainingColumn(), console=Console(stderr=True), transient=False)


def _run(spec: Path, population: Path, replications: int, workers: int, scheduler: str | None, seed: int,
         quiet: bool):
    from ..spec import load
    from ..timing.montecarlo import run_replications
    from ..timing.population import load_population

    desc = load(spec)
    truth = load_population(population, desc)
    bar = _progress_bar(quiet)
    if bar is None:
        return desc, truth, run_replications(desc, truth, replications, seed, workers, scheduler)
    with bar:
        task = bar.add_task("simulate", total=replications)
        reps = run_replications(desc, truth, replications, seed, workers, scheduler,
                                on_done=lambda done, total: bar.update(task, completed=done))
    return desc, truth, reps


@app.command("simulate")
def simulate_command(
    spec: Path = SPEC,
    population: Path = typer.Option(..., "--population", help="YAML file with the true values and the design "
                                                              "(docs/timing-lab.md)."),
    replications: int = typer.Option(..., "--replications", min=1, help="Number of simulated data sets."),
    workers: int = typer.Option(None, "--workers", min=1, help="Local worker processes (default: one per CPU "
                                                               "core; 1 runs everything in this process)."),
    scheduler: str = typer.Option(None, "--scheduler", help="Address of a running Dask scheduler "
                                                            "(e.g. tcp://10.0.0.5:8786) to run on instead."),
    seed: int = typer.Option(0, "--seed", min=0, help="Seed of the seed sequence that gives each replication "
                                                      "its own seed."),
    out: Path = typer.Option(Path("sembridge-simulation"), "--out", help="Folder for the results."),
    csv: bool = typer.Option(False, "--csv", help="Save the per-replication results as CSV instead of Parquet."),
    quiet: bool = typer.Option(False, "--quiet", help="No progress bar."),
) -> None:
    """Draw data from a known population, fit and reconcile both forms each time, and summarise how they did."""
    from ..render import simulation as render
    from ..timing.summary import replications_frame, summarise, summary_frame

    with guarded():
        outputs.check_folder(out, OUTPUTS, [spec, population])
        desc, truth, reps = _run(spec, population, replications, workers or os.cpu_count() or 1, scheduler, seed,
                                 quiet)
    summary = summarise(reps, desc.label, truth.source, seed)
    raw = out / ("replications.csv" if csv else "replications.parquet")
    with guarded():
        outputs.write_folder(out, _files(summary, replications_frame(reps), summary_frame(summary), raw.name))
    lab_console().print(render.terminal_table(summary))
    typer.echo(f"\nPer-replication results: {raw}\nSummary: {out / 'summary.md'}, {out / 'summary.csv'}, "
               f"{out / 'summary.json'}\nFigure: {out / 'summary.png'}")
    failed = [rep for rep in reps if rep.verdict == "failed"]
    if failed:
        fail(f"{len(failed)} of {len(reps)} replications failed; the first (seed {failed[0].seed}): "
             f"{failed[0].error}")


def _files(summary, per_replication, per_quantity, raw_name: str) -> dict[str, bytes]:
    """Every output of a study, as bytes (written together, atomically, with the folder's manifest)."""
    from ..render import simulation as render
    from ..render.formats import spreadsheet_safe

    figure = io.BytesIO()
    render.figure(summary, figure)
    if raw_name.endswith(".csv"):
        raw = spreadsheet_safe(per_replication).to_csv(index=False).encode("utf-8")
    else:
        buffer = io.BytesIO()
        per_replication.to_parquet(buffer, index=False)
        raw = buffer.getvalue()
    return {raw_name: raw, "summary.md": (render.markdown_table(summary) + "\n").encode("utf-8"),
            "summary.csv": spreadsheet_safe(per_quantity).to_csv(index=False).encode("utf-8"),
            "summary.json": (json.dumps(json_safe(summary.to_dict()), indent=2, allow_nan=False) + "\n").encode(),
            "summary.png": figure.getvalue()}
