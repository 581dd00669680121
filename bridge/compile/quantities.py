"""The identifiers of reconciled quantities, shared by every stage.

Keys are plain strings with a fixed grammar (documented in docs/json.md):
`mean.<term>`, `effect.<predictor>.<term>`, `var.<term>`, `cov.<term>.<term>`,
`var.residual` and `var.residual.<wave>`.
"""
from __future__ import annotations

from ..spec import Term

Key = str


def mean_key(term: Term) -> Key:
    return f"mean.{term.value}"


def effect_key(predictor: str, term: Term) -> Key:
    return f"effect.{predictor}.{term.value}"


def var_key(term: Term) -> Key:
    return f"var.{term.value}"


def cov_key(first: Term, second: Term) -> Key:
    return f"cov.{first.value}.{second.value}"


def residual_key(wave: float | None = None) -> Key:
    return "var.residual" if wave is None else f"var.residual.{wave:g}"
