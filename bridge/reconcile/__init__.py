"""Stage 6: alignment, tolerance rules and verdicts."""
from .compare import CAUTION, reconcile
from .result import Estimate, Finding, QuantityRow, Reconciliation, Verdict
from .tolerance import DEFAULT_TOLERANCE, Tolerance

__all__ = ["CAUTION", "reconcile", "Estimate", "Finding", "QuantityRow", "Reconciliation", "Verdict",
           "DEFAULT_TOLERANCE", "Tolerance"]
