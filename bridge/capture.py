"""Library messages (Python warnings and log records) collected instead of printed.

semopy reports problems with `logging.warning` on the root logger and numpy with `RuntimeWarning`s;
without a handler both would reach standard error as raw lines. Inside :func:`library_messages` they are
collected, one line each and without repeats, so that the caller can turn them into findings.
"""
from __future__ import annotations

import logging
import warnings
from contextlib import contextmanager
from typing import Iterator


class _Collector(logging.Handler):
    def __init__(self, into: list[str]):
        super().__init__(level=logging.WARNING)
        self.into = into

    def emit(self, record: logging.LogRecord) -> None:
        try:
            self.into.append(record.getMessage())
        except Exception:  # a malformed log call in a library must not stop the run
            self.into.append(str(record.msg))


def first_line(text: str) -> str:
    """The first non-empty line of a message (library messages can span many)."""
    return next((line.strip() for line in str(text).splitlines() if line.strip()), "")


@contextmanager
def library_messages() -> Iterator[list[str]]:
    """Collect warnings and root-logger records raised inside the block into the yielded list.

    The list is filled when the block ends: first lines only, in order, without repeats.
    """
    messages: list[str] = []
    root = logging.getLogger()
    collector = _Collector(messages)
    root.addHandler(collector)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            yield messages
    finally:
        root.removeHandler(collector)
        lines = [first_line(m) for m in messages] + [first_line(str(w.message)) for w in caught]
        messages[:] = list(dict.fromkeys(line for line in lines if line))
