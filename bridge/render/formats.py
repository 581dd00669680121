"""How numbers are printed in figures and tables (one rule, so every output shows the same digits)."""
from __future__ import annotations

import math


def number(value: float | None) -> str:
    """Four significant digits (scientific notation for very small or large values); `n/a` when missing."""
    if value is None or not math.isfinite(value):
        return "n/a"
    if value == 0:
        return "0"
    if 1e-3 <= abs(value) < 1e5:
        return f"{value:.4g}"
    return f"{value:.3e}"


def p_value(value: float | None) -> str:
    """A p-value with three decimals, `<0.001` below that."""
    if value is None or not math.isfinite(value):
        return "n/a"
    return "<0.001" if value < 0.001 else f"{value:.3f}"


def exact(value: float | None) -> str:
    """Full precision for machine-readable files (CSV): the shortest text that reads back the same float."""
    if value is None or not math.isfinite(value):
        return ""
    return repr(float(value))


#: A text cell starting with one of these is run as a formula by spreadsheet programs.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def spreadsheet_text(text: str) -> str:
    """A CSV text cell that a spreadsheet shows instead of running: a leading `'` before `= + - @`
    (and tab or carriage return). Numbers are never passed here; they stay as they are."""
    return "'" + text if text.startswith(FORMULA_STARTS) else text


def spreadsheet_safe(frame):
    """A copy of a pandas frame with every text cell and heading made safe by :func:`spreadsheet_text`."""
    safe = frame.rename(columns=lambda c: spreadsheet_text(c) if isinstance(c, str) else c)
    for column in safe.columns:
        if safe[column].dtype == object or str(safe[column].dtype) in ("string", "str"):
            safe[column] = safe[column].map(lambda v: spreadsheet_text(v) if isinstance(v, str) else v)
    return safe
