"""Read a data file (.csv, .tsv, .parquet) into a pandas frame, read-only."""
from __future__ import annotations

from pathlib import Path
from typing import Iterable

import pandas as pd

from ..errors import DataError

_READERS = {".csv": ",", ".tsv": "\t", ".txt": "\t"}


def read_table(path: Path, text_columns: Iterable[str] = ()) -> pd.DataFrame:
    """Read the file named by the description; every failure becomes a one-line DataError.

    `text_columns` (person ids, predictor levels: every identifier) are read exactly as written, never
    converted to numbers: `1.1` and `1.10` stay two different persons. An empty cell is still missing.
    """
    if path.is_symlink() and not path.exists():
        raise DataError(f"{path.name}: is a symbolic link to nothing, or a loop of links ({path})")
    if not path.exists():
        raise DataError(f"{path.name}: data file not found at {path}")
    if not path.is_file():
        raise DataError(f"{path.name}: is not a file")
    suffix = path.suffix.lower()
    try:
        if suffix == ".parquet":
            frame = pd.read_parquet(path)
        elif suffix in _READERS:
            frame = pd.read_csv(path, sep=_READERS[suffix], dtype={str(c): str for c in text_columns})
        else:
            raise DataError(f"{path.name}: unsupported file type '{suffix}' (expected .csv, .tsv or .parquet)")
    except DataError:
        raise
    except pd.errors.EmptyDataError:
        raise DataError(f"{path.name}: the data file is empty") from None
    except (OSError, ValueError, UnicodeDecodeError, pd.errors.ParserError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else exc.__class__.__name__
        raise DataError(f"{path.name}: cannot read the data file ({first})") from exc
    except Exception as exc:  # parquet engines raise their own exception types
        raise DataError(f"{path.name}: cannot read the data file ({exc.__class__.__name__})") from exc
    if frame.empty:
        raise DataError(f"{path.name}: the data file has no rows")
    frame.columns = [str(c) for c in frame.columns]
    return frame
