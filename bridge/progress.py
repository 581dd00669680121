"""How long stages report progress: a callable that returns a context manager per stage name."""
from __future__ import annotations

from contextlib import AbstractContextManager, nullcontext
from typing import Callable

Progress = Callable[[str], AbstractContextManager]


def quiet(_: str) -> AbstractContextManager:
    """Report nothing."""
    return nullcontext()
