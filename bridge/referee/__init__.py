"""Stage 5: the independent log-likelihood that decides which solution is the maximum."""
from .hessian import fixed_standard_errors, variance_standard_errors
from .likelihood import LOG_2PI, Referee

__all__ = ["LOG_2PI", "Referee", "fixed_standard_errors", "variance_standard_errors"]
