"""The `sembridge` command line: one module per command, no statistics here.

Each command module registers itself on `app` when imported; `main` is the console entry point.
"""
from __future__ import annotations

import sys
import traceback

import typer

from ..capture import library_messages
from ..errors import SembridgeError
from . import compile, demo, draw, reconcile, report, simulate, timing  # noqa: F401  (registers the commands)
from .app import app, one_line

__all__ = ["app", "main"]


def main() -> None:
    """Entry point: unexpected failures also end in one line (exit 1) unless --debug is given.

    Library warnings left over outside the main job (which turns them into findings) are not printed.
    """
    try:
        with library_messages():
            app()
    except SembridgeError:  # reached only with --debug: show the traceback, keep the bad-input exit code
        traceback.print_exc()
        sys.exit(2)
    except Exception as exc:  # a bug in sembridge or a library, not the user's input
        if "--debug" in sys.argv:
            raise
        first = one_line(str(exc).splitlines()[0] if str(exc) else "", 200)
        typer.echo(f"sembridge: internal error: {exc.__class__.__name__}: {first} (rerun with --debug for the "
                   "traceback)", err=True)
        sys.exit(1)
