"""Stage 4: thin adapters around semopy and statsmodels returning one uniform result type."""
from .mixed import fit_mixed
from .result import FitOutcome
from .sem import fit_sem

__all__ = ["FitOutcome", "fit_mixed", "fit_sem"]
