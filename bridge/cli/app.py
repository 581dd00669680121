"""The typer application and what every command shares: errors, progress, consoles, options."""
from __future__ import annotations

import sys
import time
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path

import numpy as np
import typer
from rich.console import Console

from .. import outputs
from ..capture import library_messages
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


MESSAGE_LIMIT = 400
#: Numerical failures that only degenerate data cause (the library found no matrix it could factor).
DEGENERATE = ("the data leave no model that can be fitted ({}): look for persons whose data are all identical, "
              "extreme values, or times far from 0 such as Unix timestamps (then set model.time_origin)")


def one_line(message: str, limit: int = MESSAGE_LIMIT) -> str:
    """The message on one line of at most `limit` characters."""
    text = " ".join(str(message).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def fail(message: str, code: int = 2) -> None:
    """Print one line on standard error and leave with `code`."""
    typer.echo(one_line(f"sembridge: {message}"), err=True)
    raise typer.Exit(code)


@contextmanager
def guarded():
    """Turn user-caused errors into one line and exit code 2 (a traceback only with --debug).

    Numerical breakdowns of the libraries on degenerate data (a singular matrix, an overflow) are the
    data's problem too: exit 2 with a hint.
    """
    try:
        yield
    except SembridgeError as exc:
        if _state["debug"]:
            raise
        fail(str(exc))
    except (np.linalg.LinAlgError, FloatingPointError) as exc:
        if _state["debug"]:
            raise
        fail(DEGENERATE.format(one_line(f"{exc.__class__.__name__}: {exc}", 80)))


def inputs_of(description) -> list[Path]:
    """The files a description reads: itself and its data file."""
    return [p for p in (description.source, description.data.path) if p is not None]


def run_job(description, quiet: bool):
    """The main job on a loaded description; library warnings and log lines become findings."""
    from .. import pipeline
    from ..reconcile.result import Finding

    with library_messages() as messages:
        result = pipeline.run(description, progress=progress(quiet))
    known = {f.message for f in result.findings}
    extra = tuple(Finding("library-message", None, m) for m in messages if m not in known)
    return replace(result, findings=result.findings + extra) if extra else result


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
    """Write an output file atomically; a file that cannot be written is the user's problem (exit 2)."""
    with guarded():
        outputs.write_file(path, text)
