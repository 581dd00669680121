"""`sembridge compile SPEC`: both generated specifications and the correspondence map, without fitting."""
from __future__ import annotations

from pathlib import Path

from .. import pipeline
from ..compile.texts import pair_specifications
from .app import SPEC, app, guarded, stdout_console


@app.command("compile")
def compile_command(spec: Path = SPEC) -> None:
    """Print both generated specifications and the correspondence map, without fitting."""
    with guarded():
        if pipeline.is_cross_lagged(spec):
            return _print_cross_lagged(pipeline.compile_cross_lagged(spec))
        pair = pipeline.compile_description(spec)
    texts = pair_specifications(pair)
    console = stdout_console()
    for title, key in (("wide form: semopy model text", "wide"), ("long form: statsmodels MixedLM, array interface",
                                                                     "long"), ("generated names", "legend")):
        console.rule(title)
        console.print(texts[key], markup=False, highlight=False)
    console.rule("which parameter is which")
    for c in pair.sem.correspondence:
        console.print(f"{c.key}\n    wide: {c.wide}\n    long: {c.long}", markup=False, highlight=False)


def _print_cross_lagged(compiled) -> None:
    from ..compile.panel_texts import legend, long_text

    console = stdout_console()
    models = [("wide form: semopy model text", compiled.sem.text())]
    if compiled.relaxed is not None:
        models.append(("relaxed wide form (person factors may correlate with the first wave)",
                       compiled.relaxed.text()))
    for title, text in models + [("long form: statsmodels lagged regressions", long_text(compiled)),
                                 ("generated names", legend(compiled))]:
        console.rule(title)
        console.print(text, markup=False, highlight=False)
    console.rule("which parameter is which")
    for c in compiled.correspondence:
        console.print(f"{c.key}\n    wide: {c.wide}\n    long: {c.long}", markup=False, highlight=False)
