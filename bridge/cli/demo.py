"""`sembridge demo`: the main job on the bundled music-school examples (growth and cross-lagged)."""
from __future__ import annotations

from pathlib import Path

import typer

from .. import outputs
from ..demo import files as demo_files
from ..render import json as json_render
from ..render import terminal
from ..spec import load
from .app import QUIET, app, guarded, run_job, stdout_console
from .report import REPORT_FILES, write_report

DESCRIPTIONS = (demo_files.GROWTH_DESCRIPTION, demo_files.CROSS_LAGGED_DESCRIPTION)


def _check_targets(out: Path) -> None:
    """Before anything is written or fitted: the demo folder and both report folders can take their files."""
    bundled = demo_files.demo_files()
    outputs.check_folder(out, [*bundled, *(d.with_suffix(".json").name for d in DESCRIPTIONS)], same=bundled)
    for description in DESCRIPTIONS:
        outputs.check_folder(out / f"{description.stem}-report", REPORT_FILES)


@app.command("demo")
def demo_command(
    out: Path = typer.Option(Path("sembridge-demo"), "--out", help="Folder for the demo files and results (new, "
                                                                   "empty, or an earlier demo)."),
    quiet: bool = QUIET,
) -> None:
    """Run the main job on the bundled music-school examples and say where the results are."""
    with guarded():
        _check_targets(out)
        growth = demo_files.copy_demo(out)
    specs = (growth, growth.parent / demo_files.CROSS_LAGGED_DESCRIPTION.name)
    lines, codes = [f"\nDemo descriptions and data: {growth.parent}"], []
    for spec in specs:
        with guarded():
            result = run_job(load(spec), quiet)
        terminal.render(result, stdout_console())
        result_path = spec.with_suffix(".json")
        with guarded():
            outputs.write_folder(out, {result_path.name: json_render.to_json(result).encode("utf-8")},
                                 complete=False)
        page = write_report(result, spec.parent / f"{spec.stem}-report")
        lines += [f"{spec.stem}: result as JSON {result_path}; report {page}"]
        codes.append(result.exit_code)
    typer.echo("\n".join(lines))
    raise typer.Exit(max(codes))
