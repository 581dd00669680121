"""A plan: the settings each form is fitted with.

The description gives the plan as written; explaining a difference means
fitting a harmonised plan, the same plan with one difference removed.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

from ..spec import Description, Method, Missing, Residuals, Term
from ..spec.vocabulary import Words


class TimeSource(Words):
    EXACT = "exact"   # each occasion at its own time
    WAVES = "waves"   # each occasion at the time of its nearest wave



@dataclass(frozen=True)
class Coding:
    """Which occasions a form uses and how it codes time: form time = (time - origin) * scale."""

    missing: Missing
    origin: float
    scale: float = 1.0


@dataclass(frozen=True)
class Plan:
    method: Method                 # the mixed model's criterion (the SEM always uses ML)
    sem_residuals: Residuals       # the mixed model always has one residual variance
    mixed_times: TimeSource        # the SEM always uses wave times
    random: tuple[Term, ...]
    sem: Coding
    mixed: Coding

    @classmethod
    def from_description(cls, desc: Description) -> "Plan":
        def coding(form) -> Coding:
            return Coding(missing=form.missing or desc.estimation.missing,
                          origin=desc.model.time_origin if form.time_origin is None else form.time_origin,
                          scale=1.0 if form.time_scale is None else form.time_scale)
        return cls(method=desc.estimation.method, sem_residuals=desc.model.residuals,
                   mixed_times=TimeSource.EXACT, random=desc.model.random,
                   sem=coding(desc.sem_form), mixed=coding(desc.mixed_form))

    @property
    def reml(self) -> bool:
        return self.method is Method.REML

    def with_(self, **changes) -> "Plan":
        return replace(self, **changes)
