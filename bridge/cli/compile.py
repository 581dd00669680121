"""`sembridge compile SPEC`: both generated specifications and the correspondence map, without fitting."""
from __future__ import annotations

from pathlib import Path

from .. import pipeline
from .app import SPEC, app, guarded, stdout_console


@app.command("compile")
def compile_command(spec: Path = SPEC) -> None:
    """Print both generated specifications and the correspondence map, without fitting."""
    with guarded():
        titled, correspondence = pipeline.specifications(spec)
    console = stdout_console()
    for title, text in titled:
        console.rule(title)
        console.print(text, markup=False, highlight=False)
    console.rule("which parameter is which")
    for c in correspondence:
        console.print(f"{c.key}\n    wide: {c.wide}\n    long: {c.long}", markup=False, highlight=False)
