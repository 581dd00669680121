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
