"""The pipeline, stage by stage: description -> shaped data -> compiled -> fits -> referee -> reconciliation."""
from __future__ import annotations

from contextlib import AbstractContextManager, nullcontext
from pathlib import Path
from typing import Callable

from .compile import CompiledGrowth, compile_growth
from .data import shape_data
from .fit import fit_mixed, fit_sem
from .reconcile import Reconciliation, reconcile
from .referee.adjudicate import Adjudication, adjudicate
from .spec import Description, Method, load

Progress = Callable[[str], AbstractContextManager]


def _quiet(_: str) -> AbstractContextManager:
    return nullcontext()


def compile_description(description: Description | str | Path) -> CompiledGrowth:
    """Load (if given a path), shape and compile a description without fitting anything."""
    desc = description if isinstance(description, Description) else load(description)
    return compile_growth(shape_data(desc))


def fit_and_adjudicate(compiled: CompiledGrowth, progress: Progress = _quiet) -> Adjudication:
    """Fit both forms and let the referee settle which solutions are the maxima."""
    reml = compiled.shaped.description.estimation.method is Method.REML
    with progress("fitting the wide form (semopy)"):
        sem = fit_sem(compiled)
    with progress("fitting the long form (statsmodels)"):
        mixed = fit_mixed(compiled, reml)
    with progress("checking both solutions with the referee"):
        return adjudicate(compiled, sem, mixed, reml)


def run(description: Description | str | Path, progress: Progress = _quiet) -> Reconciliation:
    """The main job: one description in, one reconciliation out."""
    with progress("reading the description and data"):
        compiled = compile_description(description)
    adjudication = fit_and_adjudicate(compiled, progress)
    with progress("reconciling"):
        return reconcile(compiled, adjudication)
