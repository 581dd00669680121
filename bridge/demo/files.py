"""Where the bundled demo lives, and how to copy it somewhere the user can look at it."""
from __future__ import annotations

from pathlib import Path

from .. import outputs

HERE = Path(__file__).parent
GROWTH_DESCRIPTION = HERE / "sight_reading.yaml"
GROWTH_DATA = HERE / "sight_reading.csv"
GROWTH_POPULATION = HERE / "sight_reading_population.yaml"  # true values, for `sembridge simulate`
CROSS_LAGGED_DESCRIPTION = HERE / "weekly_practice.yaml"
CROSS_LAGGED_DATA = HERE / "weekly_practice.csv"
SOURCES = (GROWTH_DESCRIPTION, GROWTH_DATA, GROWTH_POPULATION, CROSS_LAGGED_DESCRIPTION, CROSS_LAGGED_DATA)


def demo_files() -> dict[str, bytes]:
    """The bundled demo files by name, as bytes."""
    return {source.name: source.read_bytes() for source in SOURCES}


def copy_demo(folder: Path) -> Path:
    """Copy the demos' descriptions and data into `folder`; return the growth description's path.

    The cross-lagged description lies beside it, under the name of `CROSS_LAGGED_DESCRIPTION`. A file the
    user changed since an earlier copy is never replaced (`bridge.outputs.OutputError`).
    """
    outputs.write_folder(folder, demo_files(), complete=False)
    return folder / GROWTH_DESCRIPTION.name
