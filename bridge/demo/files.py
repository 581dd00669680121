"""Where the bundled demo lives, and how to copy it somewhere the user can look at it."""
from __future__ import annotations

import shutil
from pathlib import Path

from ..errors import DataError

HERE = Path(__file__).parent
GROWTH_DESCRIPTION = HERE / "sight_reading.yaml"
GROWTH_DATA = HERE / "sight_reading.csv"


def copy_demo(folder: Path) -> Path:
    """Copy the demo description and data into `folder`; return the copied description's path."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for source in (GROWTH_DESCRIPTION, GROWTH_DATA):
            shutil.copyfile(source, folder / source.name)
    except OSError as exc:
        raise DataError(f"cannot write the demo into {folder} ({exc.strerror or exc})") from exc
    return folder / GROWTH_DESCRIPTION.name
