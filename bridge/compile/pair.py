"""Compile a plan into the two forms it asks for."""
from __future__ import annotations

from dataclasses import dataclass

from ..data import ShapedData
from ..spec import Residuals
from .growth import CompiledGrowth, compile_growth
from .plan import Plan


@dataclass(frozen=True)
class CompiledPair:
    """The wide form is fitted from `sem`, the long form from `mixed`.

    When both forms use the same occasions and time coding, their parameters live
    in one space (`comparable`), so each solution can be scored under the other's model.
    """

    plan: Plan
    sem: CompiledGrowth
    mixed: CompiledGrowth

    @property
    def family(self):
        """The growth family object (`bridge.families.contract.Family`)."""
        from ..families.growth import FAMILY

        return FAMILY

    @property
    def comparable(self) -> bool:
        return self.plan.sem == self.plan.mixed


def compile_pair(shaped: ShapedData, plan: Plan) -> CompiledPair:
    """Both forms of one plan."""
    sem = compile_growth(shaped, plan.sem, plan.sem_residuals, plan.random)
    mixed = compile_growth(shaped, plan.mixed, Residuals.EQUAL, plan.random, plan.mixed_times)
    return CompiledPair(plan=plan, sem=sem, mixed=mixed)
