"""Stage 6: alignment, tolerance rules, the catalogue of causes, harmonise-and-refit, verdicts.

The package namespace holds the light result types; the stage's functions, which
need both fitting libraries, are imported from their modules:
`bridge.reconcile.evaluation.evaluate` and `bridge.reconcile.build.reconcile` (also reachable
as `bridge.reconcile.evaluate` and `bridge.reconcile.reconcile`, loaded on first use).
"""
from .causes import CATALOGUE, Cause
from .result import Estimate, Explanation, Finding, QuantityRow, Reconciliation, Verdict
from .tolerance import DEFAULT_TOLERANCE, Tolerance

__all__ = ["CATALOGUE", "Cause", "Estimate", "Explanation", "Finding", "QuantityRow", "Reconciliation", "Verdict",
           "DEFAULT_TOLERANCE", "Tolerance"]


def __getattr__(name: str):
    if name == "evaluate":
        from .evaluation import evaluate
        return evaluate
    if name == "reconcile":
        from .build import reconcile
        return reconcile
    raise AttributeError(f"module 'bridge.reconcile' has no attribute {name!r}")
