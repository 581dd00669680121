"""Where the bundled demo lives, and how to copy it somewhere the user can look at it."""
from __future__ import annotations

import shutil
from pathlib import Path

from ..errors import DataError

HERE = Path(__file__).parent
GROWTH_DESCRIPTION = HERE / "sight_reading.yaml"
GROWTH_DATA = HERE / "sight_reading.csv"
GROWTH_POPULATION = HERE / "sight_reading_population.yaml"  # true values, for `sembridge simulate`
CROSS_LAGGED_DESCRIPTION = HERE / "weekly_practice.yaml"
CROSS_LAGGED_DATA = HERE / "weekly_practice.csv"


def copy_demo(folder: Path) -> Path:
    """Copy the demos' descriptions and data into `folder`; return the growth description's path.

    The cross-lagged description lies beside it, under the name of `CROSS_LAGGED_DESCRIPTION`.
    """
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for source in (GROWTH_DESCRIPTION, GROWTH_DATA, GROWTH_POPULATION, CROSS_LAGGED_DESCRIPTION,
                       CROSS_LAGGED_DATA):
            shutil.copyfile(source, folder / source.name)
    except OSError as exc:
        raise DataError(f"cannot write the demo into {folder} ({exc.strerror or exc})") from exc
    return folder / GROWTH_DESCRIPTION.name
