"""When two estimates of one quantity count as the same number."""
from __future__ import annotations

import math
from dataclasses import dataclass


@dataclass(frozen=True)
class Tolerance:
    """Two estimates agree when their gap is within either bound.

    - `relative`: a fraction of the larger absolute estimate (optimiser noise);
    - `se_fraction`: a fraction of the smaller standard error (a gap far below
      the sampling uncertainty cannot change any conclusion).
    """

    relative: float = 1e-3
    se_fraction: float = 0.05

    def allowed_gap(self, a: float, b: float, se_a: float, se_b: float) -> float:
        ses = [s for s in (se_a, se_b) if s is not None and math.isfinite(s) and s > 0]
        by_se = self.se_fraction * min(ses) if ses else 0.0
        return max(self.relative * max(abs(a), abs(b)), by_se)

    def agree(self, a: float, b: float, se_a: float, se_b: float) -> bool:
        return abs(a - b) <= self.allowed_gap(a, b, se_a, se_b)

    def describe(self) -> str:
        return (f"estimates agree when they differ by at most {self.relative:g} of the larger estimate "
                f"or {self.se_fraction:g} of the smaller standard error, whichever is larger")


DEFAULT_TOLERANCE = Tolerance()
