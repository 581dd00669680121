"""The uniform result both library adapters return."""
from __future__ import annotations

from dataclasses import dataclass, field

from ..compile import GrowthParameters


@dataclass(frozen=True)
class FitOutcome:
    """One library's solution, translated into the shared parameter space (internal scale)."""

    library: str                    # "semopy" or "statsmodels"
    params: GrowthParameters
    own_log_likelihood: float       # the library's own value, on the user's scale (REML criterion under REML)
    reported_success: bool
    messages: tuple[str, ...] = ()  # the library's warnings and convergence notes, captured
    fits: int = 1                   # optimiser runs, including refits from its own last point
    seconds: float = 0.0
    start: str = "library default"
    notes: tuple[str, ...] = field(default=())
