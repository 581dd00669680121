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
