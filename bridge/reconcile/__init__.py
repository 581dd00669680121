"""Stage 6: alignment, tolerance rules, the catalogue of causes, harmonise-and-refit, verdicts."""
from .build import CAUTION, reconcile
from .causes import CATALOGUE, Cause
from .compare import compare, compare_adjudicated
from .evaluate import Evaluation, evaluate
from .result import Estimate, Explanation, Finding, QuantityRow, Reconciliation, Verdict
from .tolerance import DEFAULT_TOLERANCE, Tolerance

__all__ = ["CAUTION", "reconcile", "CATALOGUE", "Cause", "compare", "compare_adjudicated", "Evaluation",
           "evaluate", "Estimate", "Explanation", "Finding", "QuantityRow", "Reconciliation", "Verdict",
           "DEFAULT_TOLERANCE", "Tolerance"]
