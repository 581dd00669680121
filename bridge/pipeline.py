"""The pipeline, stage by stage: description -> shaped data -> compiled -> fits -> referee -> reconciliation.

The fitting stages are imported when first needed, so reading and checking a
description stays quick (bad input is reported before semopy and statsmodels load).
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from .compile import CompiledPair, Plan, compile_pair
from .data import ShapedData, shape_data, shape_panel
from .errors import DescriptionError
from .progress import Progress, quiet
from .spec import Description, Kind, load

if TYPE_CHECKING:
    from .reconcile import Reconciliation
    from .reconcile.evaluation import Evaluation


def _description(description: Description | str | Path) -> Description:
    return description if isinstance(description, Description) else load(description)


def shape(description: Description | str | Path) -> ShapedData:
    """Load (if given a path) and shape a growth description's data."""
    desc = _description(description)
    if desc.model.kind is Kind.CROSS_LAGGED:
        raise DescriptionError(f"{desc.label}: model.kind is cross-lagged; this step is for growth models")
    return shape_data(desc)


def compile_description(description: Description | str | Path) -> CompiledPair:
    """Both generated forms of a description as written, without fitting anything."""
    shaped = shape(description)
    return compile_pair(shaped, Plan.from_description(shaped.description))


def compile_cross_lagged(description: Description | str | Path):
    """The wide path model(s) and long lagged regressions of a cross-lagged description, without fitting."""
    from .compile.panel import compile_panel

    return compile_panel(shape_panel(_description(description)))


def is_cross_lagged(description: Description | str | Path) -> bool:
    return _description(description).model.kind is Kind.CROSS_LAGGED


def evaluate_description(description: Description | str | Path, progress: Progress = quiet) -> "Evaluation":
    """Fit both forms as described and let the referee adjudicate (no explanations)."""
    from .reconcile.evaluation import evaluate

    shaped = shape(description)
    return evaluate(shaped, Plan.from_description(shaped.description), progress)


def run(description: Description | str | Path, progress: Progress = quiet) -> "Reconciliation":
    """The main job: one description in, one reconciliation with explanations out."""
    with progress("reading the description and data"):
        desc = _description(description)
        if desc.model.kind is Kind.CROSS_LAGGED:
            panel = shape_panel(desc)
    if desc.model.kind is Kind.CROSS_LAGGED:
        from .reconcile.panel import run_panel

        return run_panel(panel, progress)
    with progress("reading the description and data"):
        shaped = shape_data(desc)
    return run_shaped(shaped, progress)


def run_shaped(shaped: ShapedData, progress: Progress = quiet) -> "Reconciliation":
    """The main job on data already shaped (for example simulated in memory with `data.shape_frame`)."""
    from .reconcile.build import reconcile
    from .reconcile.evaluation import evaluate

    base = evaluate(shaped, Plan.from_description(shaped.description), progress)
    return reconcile(shaped, base, progress)
