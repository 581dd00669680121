"""The frozen model description: the single input of the whole pipeline."""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from .vocabulary import Kind, Layout, Method, Missing, Paths, Residuals, Shape, Term, Variant, terms_of


@dataclass(frozen=True)
class DataSection:
    """Where the data are and which columns play which role."""

    path: Path
    layout: Layout
    person: str
    time: str | None = None
    outcome: str | None = None
    columns: tuple[tuple[str, float], ...] = ()
    outcomes: tuple[str, ...] = ()      # cross-lagged, long layout
    panel_columns: tuple[tuple[str, tuple[tuple[str, float], ...]], ...] = ()  # cross-lagged, wide layout

    @property
    def column_times(self) -> dict[str, float]:
        return dict(self.columns)


@dataclass(frozen=True)
class ModelSection:
    """The growth model, stated once for both frameworks."""

    kind: Kind = Kind.GROWTH
    shape: Shape = Shape.LINEAR
    random: tuple[Term, ...] = (Term.INTERCEPT, Term.SLOPE)
    predictors: tuple[str, ...] = ()
    categorical: tuple[str, ...] = ()   # predictors coded as categories even when their values are numbers
    residuals: Residuals = Residuals.EQUAL
    time_origin: float = 0.0
    reference_levels: tuple[tuple[str, str], ...] = ()
    variant: Variant = Variant.CLPM
    paths: Paths = Paths.TIME_INVARIANT

    @property
    def terms(self) -> tuple[Term, ...]:
        return terms_of(self.shape)


@dataclass(frozen=True)
class EstimationSection:
    """How both forms are estimated."""

    method: Method = Method.ML
    missing: Missing = Missing.FULL_INFORMATION
    waves: tuple[float, ...] | None = None


@dataclass(frozen=True)
class FormSettings:
    """Settings one form uses instead of the shared ones, to reproduce two separate analyses.

    The form's time is (time - time_origin) * time_scale; unset fields follow the shared setting.
    """

    missing: Missing | None = None
    time_origin: float | None = None
    time_scale: float | None = None


@dataclass(frozen=True)
class Description:
    """A complete, validated model description. Build it with :func:`bridge.load`."""

    data: DataSection
    model: ModelSection = field(default_factory=ModelSection)
    estimation: EstimationSection = field(default_factory=EstimationSection)
    sem_form: FormSettings = field(default_factory=FormSettings)
    mixed_form: FormSettings = field(default_factory=FormSettings)
    source: Path | None = None

    @property
    def label(self) -> str:
        return self.source.name if self.source else "<description>"
