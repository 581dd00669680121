"""What a model family supplies: the one contract every family fulfils.

A family owns what differs between model families: turning a description into shaped
data and compiled models (the wide text, the long design, the quantity map), fitting and
refereeing them through the shared machinery (`bridge.fit`, `bridge.referee`), its own
causes, and the parts of the report only it can compute (its long-form table and graph).
Everything downstream (the reconciliation record, JSON, tables, report, CLI) is shared and
receives the family object from the registry (`bridge.families.family_of`); shared code
never imports a family module.
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any, Protocol

from ..progress import Progress
from ..spec import Description, Kind

if TYPE_CHECKING:
    import networkx as nx

    from ..reconcile.result import Reconciliation


class Family(Protocol):
    """A model family (growth, cross-lagged, ...)."""

    kind: Kind
    name: str

    def shape(self, description: Description) -> Any:
        """Read and check the description's data into the family's shaped data."""

    def compile(self, shaped: Any) -> Any:
        """Both forms of the shaped data as written (nothing fitted)."""

    def run(self, shaped: Any, progress: Progress) -> "Reconciliation":
        """Fit both forms, let the referee certify them, reconcile and explain."""

    def specifications(self, compiled: Any) -> tuple[list[tuple[str, str]], tuple]:
        """The generated texts with their titles, and the correspondence map, for `sembridge compile`."""

    def structure_graph(self, compiled: Any) -> "nx.MultiDiGraph":
        """The graph of the wide form before fitting."""

    def report_parts(self, rec: "Reconciliation") -> dict:
        """The family's own report content (fields of `bridge.reconcile.summary.ReportContent`)."""


def description_of(description: Description | str | Path) -> Description:
    """A description, loaded when given a path."""
    from ..spec import load

    return description if isinstance(description, Description) else load(description)
