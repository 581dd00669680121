"""The `sembridge` command line: parses options, calls the pipeline, prints. No statistics here."""
from __future__ import annotations

import sys
import time
import traceback
from contextlib import contextmanager
from pathlib import Path

import typer
from rich.console import Console

from . import pipeline
from .demo import files as demo_files
from .compile.texts import pair_specifications
from .errors import SembridgeError
from .render import json as json_render
from .render import terminal

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Fit one longitudinal model as a wide-format SEM and a long-format mixed model, and "
                       "reconcile the two.")
_state = {"debug": False}


def _fail(message: str, code: int = 2) -> None:
    typer.echo(f"sembridge: {message}", err=True)
    raise typer.Exit(code)


@contextmanager
def _guarded():
    """Turn user-caused errors into one line and exit code 2 (a traceback only with --debug)."""
    try:
        yield
    except SembridgeError as exc:
        if _state["debug"]:
            raise
        _fail(str(exc).replace("\n", " "))


def _progress(enabled: bool):
    console = Console(stderr=True)

    @contextmanager
    def stage(name: str):
        began = time.perf_counter()
        if enabled:
            with console.status(f"{name} ..."):
                yield
            console.print(f"[dim]{name}: {time.perf_counter() - began:.1f} s[/dim]")
        else:
            yield
    return stage


@app.callback()
def _main(debug: bool = typer.Option(False, "--debug", help="Show full tracebacks for errors.")) -> None:
    _state["debug"] = debug


@app.command("reconcile")
def reconcile_command(
    spec: Path = typer.Argument(..., help="The YAML model description."),
    json_file: Path = typer.Option(None, "--json", help="Also write the result as JSON to this file ('-' for stdout)."),
    quiet: bool = typer.Option(False, "--quiet", help="No progress messages."),
) -> None:
    """Fit both forms, check them with the referee and compare every quantity."""
    json_only = json_file is not None and str(json_file) == "-"
    with _guarded():
        show = sys.stderr.isatty() and not quiet and not json_only
        result = pipeline.run(spec, progress=_progress(show))
    if json_only:
        typer.echo(json_render.to_json(result), nl=False)
    else:
        terminal.render(result, Console(width=None if sys.stdout.isatty() else 120))
        if json_file is not None:
            json_file.write_text(json_render.to_json(result), encoding="utf-8")
    raise typer.Exit(result.exit_code)


@app.command("compile")
def compile_command(spec: Path = typer.Argument(..., help="The YAML model description.")) -> None:
    """Print both generated specifications and the correspondence map, without fitting."""
    with _guarded():
        pair = pipeline.compile_description(spec)
    texts = pair_specifications(pair)
    console = Console()
    console.rule("wide form: semopy model text")
    console.print(texts["wide"], markup=False, highlight=False)
    console.rule("long form: statsmodels MixedLM, array interface")
    console.print(texts["long"], markup=False, highlight=False)
    console.rule("generated names")
    console.print(texts["legend"], markup=False, highlight=False)
    console.rule("which parameter is which")
    for c in pair.sem.correspondence:
        console.print(f"{c.key}\n    wide: {c.wide}\n    long: {c.long}", markup=False, highlight=False)


@app.command("demo")
def demo_command(
    out: Path = typer.Option(Path("sembridge-demo"), "--out", help="Folder for the demo files and results."),
    quiet: bool = typer.Option(False, "--quiet", help="No progress messages."),
) -> None:
    """Run the main job on the bundled music-school example and say where the results are."""
    with _guarded():
        spec = demo_files.copy_demo(out)
        result = pipeline.run(spec, progress=_progress(sys.stderr.isatty() and not quiet))
    terminal.render(result, Console(width=None if sys.stdout.isatty() else 120))
    result_path = spec.with_suffix(".json")
    result_path.write_text(json_render.to_json(result), encoding="utf-8")
    typer.echo(f"\nDemo description and data: {spec.parent}\nResult as JSON: {result_path}")
    raise typer.Exit(result.exit_code)


def main() -> None:
    """Entry point: unexpected failures also end in one line (exit 1) unless --debug is given."""
    try:
        app()
    except SembridgeError:  # reached only with --debug: show the traceback, keep the bad-input exit code
        traceback.print_exc()
        sys.exit(2)
    except Exception as exc:  # a bug in sembridge or a library, not the user's input
        if "--debug" in sys.argv:
            raise
        typer.echo(f"sembridge: internal error: {exc.__class__.__name__}: {str(exc).splitlines()[0] if str(exc) else ''}"
                   " (rerun with --debug for the traceback)", err=True)
        sys.exit(1)


if __name__ == "__main__":
    main()
