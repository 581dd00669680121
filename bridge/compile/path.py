"""A path model written once as statements, turned into semopy text and into RAM matrices.

Every parameter is explicit: each variable's mean and variance, each covariance
that is free, and a zero for each covariance semopy would otherwise free on its
own. The same statements give the referee its implied mean and covariance.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Statement:
    """`op` is "~" (lhs regressed on rhs), "=~" (factor lhs measured by rhs), "~~" (covariance), "1" (mean of lhs)."""

    op: str
    lhs: str
    rhs: str = ""
    label: str | None = None   # a free parameter; None means fixed at `value`
    value: float = 0.0


@dataclass(frozen=True)
class PathModel:
    observed: tuple[str, ...]
    latent: tuple[str, ...]
    statements: tuple[Statement, ...]

    @property
    def labels(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys(s.label for s in self.statements if s.label))

    def text(self) -> str:
        """The semopy model text."""
        lines = []
        for s in self.statements:
            weight = s.label or f"{s.value:.12g}"
            if s.op == "1":
                lines.append(f"{s.lhs} ~ {weight}*1")
            else:
                lines.append(f"{s.lhs} {s.op} {weight}*{s.rhs}")
        means = [s.label for s in self.statements if s.op == "1" and s.label and s.lhs in self.latent]
        if means:
            lines.append("START(0.0) " + " ".join(dict.fromkeys(means)))
        return "\n".join(lines) + "\n"

    def moments(self, values: dict[str, float]) -> tuple[np.ndarray, np.ndarray]:
        """Implied mean and covariance of the observed variables at the given parameter values."""
        names = self.observed + self.latent
        at = {name: i for i, name in enumerate(names)}
        n = len(names)
        A, S, m = np.zeros((n, n)), np.zeros((n, n)), np.zeros(n)
        for s in self.statements:
            v = values[s.label] if s.label else s.value
            if s.op == "~":
                A[at[s.lhs], at[s.rhs]] = v
            elif s.op == "=~":
                A[at[s.rhs], at[s.lhs]] = v
            elif s.op == "~~":
                S[at[s.lhs], at[s.rhs]] = S[at[s.rhs], at[s.lhs]] = v
            else:
                m[at[s.lhs]] = v
        B = np.linalg.inv(np.eye(n) - A)
        k = len(self.observed)
        return (B @ m)[:k], (B @ S @ B.T)[:k, :k]
