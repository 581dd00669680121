"""The pipeline, stage by stage: description -> shaped data -> compiled -> fits -> referee -> reconciliation.

The description's `model.kind` picks the family (`bridge.families.family_of`); the family
supplies what differs and the shared stages do the rest. The fitting stages are imported
when first needed, so reading and checking a description stays quick (bad input is
reported before semopy and statsmodels load).
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from .compile import CompiledPair, Plan, compile_pair
from .data import ShapedData, shape_data
from .errors import DescriptionError
from .families import family_of
from .families.contract import description_of as _description
from .progress import Progress, quiet
from .spec import Description, Kind

if TYPE_CHECKING:
    from .reconcile import Reconciliation
    from .reconcile.evaluation import Evaluation


def shape(description: Description | str | Path) -> ShapedData:
    """Load (if given a path) and shape a growth description's data."""
    desc = _description(description)
    if desc.model.kind is Kind.CROSS_LAGGED:
        raise DescriptionError(f"{desc.label}: model.kind is cross-lagged; this step is for growth models")
    return shape_data(desc)


def compile_description(description: Description | str | Path) -> CompiledPair:
    """Both generated forms of a growth description as written, without fitting anything."""
    shaped = shape(description)
    return compile_pair(shaped, Plan.from_description(shaped.description))


def compile_model(description: Description | str | Path):
    """Both generated forms of any description as written (its family's compiled object), without fitting."""
    desc = _description(description)
    family = family_of(desc.model.kind)
    return family.compile(family.shape(desc))


def compile_cross_lagged(description: Description | str | Path):
    """The wide path model(s) and long lagged regressions of a cross-lagged description, without fitting."""
    return compile_model(description)


def specifications(description: Description | str | Path):
    """The generated texts with their titles and the correspondence map (`sembridge compile`)."""
    desc = _description(description)
    family = family_of(desc.model.kind)
    return family.specifications(family.compile(family.shape(desc)))


def structure_graph(description: Description | str | Path):
    """The wide form's graph before fitting (`sembridge draw --structure-only`)."""
    desc = _description(description)
    family = family_of(desc.model.kind)
    return family.structure_graph(family.compile(family.shape(desc)))


def is_cross_lagged(description: Description | str | Path) -> bool:
    return _description(description).model.kind is Kind.CROSS_LAGGED


def evaluate_description(description: Description | str | Path, progress: Progress = quiet) -> "Evaluation":
    """Fit both forms of a growth description as described and let the referee adjudicate (no explanations)."""
    from .reconcile.evaluation import evaluate

    shaped = shape(description)
    return evaluate(shaped, Plan.from_description(shaped.description), progress)


def run(description: Description | str | Path, progress: Progress = quiet) -> "Reconciliation":
    """The main job: one description in, one reconciliation with explanations out."""
    with progress("reading the description and data"):
        desc = _description(description)
        family = family_of(desc.model.kind)
        shaped = family.shape(desc)
    return family.run(shaped, progress)


def run_shaped(shaped: ShapedData, progress: Progress = quiet) -> "Reconciliation":
    """The main job on growth data already shaped (for example simulated in memory with `data.shape_frame`)."""
    return family_of(Kind.GROWTH).run(shaped, progress)
