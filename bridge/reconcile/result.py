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
    UNDECIDED = "undecided"     # a solution could not be certified as a maximum: nothing can be compared


EXIT_CODES = {Verdict.AGREE: 0, Verdict.EXPLAINED: 0, Verdict.UNEXPLAINED: 3, Verdict.UNDECIDED: 4}


@dataclass(frozen=True)
class Estimate:
    estimate: float
    se: float
    se_flag: str = ""   # "boundary": the solution is on the boundary of its space; the SE is not an ordinary one


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
    note: bool = False  # a cause that no refit can remove: reported beside the gap, never changes a verdict


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
    # cross-lagged family: every parameter of both forms on the user's scale (`families.cross_lagged.fit.PanelSolution`)
    solution: Any = field(default=None, compare=False, repr=False)
    certificates: tuple = ()    # `referee.certificate.Certificate` of every library solution
    undecided_reason: str = ""  # one line with the next step, when the verdict is undecided
    absolute_fit: Any = None    # `referee.absolute_fit.AbsoluteFit`: both forms against the saturated model

    @property
    def exit_code(self) -> int:
        """0 agree or explained, 3 unexplained, 4 undecided (docs/commands.md)."""
        return EXIT_CODES[self.verdict]

    def row(self, key: Key) -> QuantityRow:
        return next(r for r in self.quantities if r.key == key)
