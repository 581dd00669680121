"""Closed vocabularies of the model description, as enums.

Each enum's values are the exact words a user writes in the YAML file.
"""
from __future__ import annotations

from enum import Enum


class Words(str, Enum):
    """An enum whose values are the words users and the JSON see."""

    @classmethod
    def words(cls) -> tuple[str, ...]:
        return tuple(member.value for member in cls)

    def __str__(self) -> str:
        return self.value


class Layout(Words):
    LONG = "long"
    WIDE = "wide"


class Kind(Words):
    GROWTH = "growth"
    CROSS_LAGGED = "cross-lagged"


class Variant(Words):
    """The cross-lagged family's three models."""

    CLPM = "clpm"
    DYNAMIC_PANEL = "dynamic-panel"
    RI_CLPM = "ri-clpm"


class Paths(Words):
    TIME_INVARIANT = "time-invariant"
    WAVE_SPECIFIC = "wave-specific"


class Shape(Words):
    LINEAR = "linear"
    QUADRATIC = "quadratic"


class Term(Words):
    """A growth term: the power of time it multiplies."""

    INTERCEPT = "intercept"
    SLOPE = "slope"
    QUADRATIC = "quadratic"

    @property
    def power(self) -> int:
        return list(Term).index(self)


class Residuals(Words):
    EQUAL = "equal"
    PER_WAVE = "per-wave"


class Method(Words):
    ML = "ml"
    REML = "reml"


class Missing(Words):
    FULL_INFORMATION = "full-information"
    COMPLETE_CASES = "complete-cases"


def terms_of(shape: Shape) -> tuple[Term, ...]:
    """The growth terms a shape uses, in order of the power of time."""
    return (Term.INTERCEPT, Term.SLOPE) if shape is Shape.LINEAR else tuple(Term)
