"""`sembridge simulate SPEC --population FILE --replications R`: a Monte Carlo study of both forms."""
from __future__ import annotations

import json
import os
import sys
from pathlib import Path

import typer
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

from .app import SPEC, app, guarded, write_text
from .timing import json_safe, lab_console, refuse_inputs, writing

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

    refuse_inputs([out / name for name in OUTPUTS], [spec, population])
    with guarded():
        desc, truth, reps = _run(spec, population, replications, workers or os.cpu_count() or 1, scheduler, seed,
                                 quiet)
    summary = summarise(reps, desc.label, truth.source, seed)
    raw = out / ("replications.csv" if csv else "replications.parquet")
    with writing(raw):
        frame = replications_frame(reps)
        frame.to_csv(raw, index=False) if csv else frame.to_parquet(raw, index=False)
    write_text(out / "summary.md", render.markdown_table(summary) + "\n")
    write_text(out / "summary.csv", summary_frame(summary).to_csv(index=False))
    write_text(out / "summary.json", json.dumps(json_safe(summary.to_dict()), indent=2, allow_nan=False) + "\n")
    with writing(out / "summary.png"):
        render.figure(summary, out / "summary.png")
    lab_console().print(render.terminal_table(summary))
    typer.echo(f"\nPer-replication results: {raw}\nSummary: {out / 'summary.md'}, {out / 'summary.csv'}, "
               f"{out / 'summary.json'}\nFigure: {out / 'summary.png'}")
