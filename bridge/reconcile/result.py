"""The reconciliation: the one object every renderer reads."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..compile import Key
from ..spec.vocabulary import Words


class Verdict(Words):
    AGREE = "agree"
    EXPLAINED = "explained"
    UNEXPLAINED = "unexplained"



@dataclass(frozen=True)
class Estimate:
    estimate: float
    se: float


@dataclass(frozen=True)
class QuantityRow:
    key: Key
    wide_name: str
    long_name: str
    sem: Estimate
    mixed: Estimate
    allowed_gap: float
    verdict: Verdict
    causes: tuple[str, ...] = ()

    @property
    def difference(self) -> float:
        return self.sem.estimate - self.mixed.estimate


@dataclass(frozen=True)
class Explanation:
    """One cause of difference, with the refit that proves it."""

    cause: str
    title: str
    quantities: tuple[Key, ...]
    gap_before: dict[Key, float]
    gap_after: dict[Key, float]
    evidence: str
    why: str
    details: dict


@dataclass(frozen=True)
class Finding:
    """Something the tool noticed on the way: a refit, a captured library message, a note."""

    code: str
    library: str | None
    message: str


@dataclass(frozen=True)
class Reconciliation:
    """Everything the tool concluded about one description."""

    description: str
    verdict: Verdict
    quantities: tuple[QuantityRow, ...]
    timing: dict
    log_likelihood: dict[str, float]
    referee_checks: tuple[dict, ...]
    refits: tuple[dict, ...]
    findings: tuple[Finding, ...]
    explanations: tuple[Explanation, ...]
    data: dict
    tolerance: str
    specifications: dict[str, str]
    caution: str
    pair: Any = field(default=None, compare=False, repr=False)  # the CompiledPair: model structure and data
    # cross-lagged family: every parameter of both forms on the user's scale (`reconcile.panel_fit.PanelSolution`)
    solution: Any = field(default=None, compare=False, repr=False)


    @property
    def exit_code(self) -> int:
        return 3 if self.verdict is Verdict.UNEXPLAINED else 0

    def row(self, key: Key) -> QuantityRow:
        return next(r for r in self.quantities if r.key == key)
