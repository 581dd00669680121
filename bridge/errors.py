"""One exception tree for the whole pipeline.

Every error a user can cause derives from :class:`SembridgeError`; the command
line turns it into a one-line message and exit code 2.
"""
from __future__ import annotations


class SembridgeError(Exception):
    """Base class for problems caused by the user's input."""


class DescriptionError(SembridgeError):
    """The model description (YAML) is missing, malformed or inconsistent."""


class DataError(SembridgeError):
    """The data file cannot be read or does not fit the description."""


class FitError(SembridgeError):
    """A library could not fit the compiled model at all."""


class SembridgeWarning(UserWarning):
    """Warnings raised by sembridge itself (library warnings are captured as findings)."""


class OutputError(SembridgeError):
    """An output cannot be written where asked (an input file, a folder sembridge did not write, no room)."""


def cut(text: str, limit: int = 60) -> str:
    """`text` on one line, cut to `limit` characters (with `...`)."""
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def shown(value: object, limit: int = 60) -> str:
    """`repr(value)` cut to `limit` characters, for quoting user values in one-line messages."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."
