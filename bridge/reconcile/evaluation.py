"""Fit one plan end to end: compile both forms, fit them, let the referee adjudicate, compare."""
from __future__ import annotations

from dataclasses import dataclass

from ..compile import CompiledPair, Plan, compile_pair
from ..data import ShapedData
from ..fit import fit_mixed, fit_sem
from ..progress import Progress, quiet
from ..referee.adjudicate import Adjudication, adjudicate
from .compare import compare_adjudicated
from .result import QuantityRow

@dataclass(frozen=True)
class Evaluation:
    plan: Plan
    pair: CompiledPair
    adjudication: Adjudication
    rows: tuple[QuantityRow, ...]

    def row(self, key: str) -> QuantityRow | None:
        """The row of a key; a per-wave residual key falls back to the single residual variance."""
        found = next((r for r in self.rows if r.key == key), None)
        if found is None and key.startswith("var.residual."):
            return self.row("var.residual")
        return found


def evaluate(shaped: ShapedData, plan: Plan, progress: Progress = quiet) -> Evaluation:
    """Both fits of one plan, adjudicated and compared."""
    pair = compile_pair(shaped, plan)
    with progress("fitting the wide form (semopy)"):
        sem = fit_sem(pair.sem)
    with progress("fitting the long form (statsmodels)"):
        mixed = fit_mixed(pair.mixed, plan.reml)
    with progress("checking both solutions with the referee"):
        adj = adjudicate(pair, sem, mixed)
    return Evaluation(plan=plan, pair=pair, adjudication=adj, rows=compare_adjudicated(pair, adj))
