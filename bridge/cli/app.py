"""The typer application and what every command shares: errors, progress, consoles, options."""
from __future__ import annotations

import sys
import time
from contextlib import contextmanager
from pathlib import Path

import typer
from rich.console import Console

from ..errors import SembridgeError

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Fit one longitudinal model as a wide-format SEM and a long-format mixed model, and "
                       "reconcile the two.")
_state = {"debug": False}

SPEC = typer.Argument(..., help="The YAML model description.")
QUIET = typer.Option(False, "--quiet", help="No progress messages.")


@app.callback()
def _main(debug: bool = typer.Option(False, "--debug", help="Show full tracebacks for errors.")) -> None:
    _state["debug"] = debug


def fail(message: str, code: int = 2) -> None:
    """Print one line on standard error and leave with `code`."""
    typer.echo(f"sembridge: {message}", err=True)
    raise typer.Exit(code)


@contextmanager
def guarded():
    """Turn user-caused errors into one line and exit code 2 (a traceback only with --debug)."""
    try:
        yield
    except SembridgeError as exc:
        if _state["debug"]:
            raise
        fail(str(exc).replace("\n", " "))


def progress(quiet: bool):
    """Stage names and elapsed times on standard error, only when it is a terminal and not quiet."""
    enabled = sys.stderr.isatty() and not quiet
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


def stdout_console() -> Console:
    """The console for results: the terminal's width, or 120 columns when output is redirected."""
    return Console(width=None if sys.stdout.isatty() else 120)


def write_text(path: Path, text: str) -> None:
    """Write an output file; a folder that cannot be written is the user's problem (exit 2)."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    except OSError as exc:
        fail(f"cannot write {path} ({exc.strerror or exc})")
