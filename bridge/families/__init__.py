"""Model families and their registry: `model.kind` -> the family object (`contract.Family`).

Each family lives in its own folder (`growth/`, `cross_lagged/`) and imports shared
machinery; shared stages get the family from here and never import family modules.
Adding a family is one new folder and one line below.
"""
from __future__ import annotations

from ..spec import Kind
from .contract import Family


def family_of(kind: Kind) -> Family:
    """The family object for a model kind."""
    if kind is Kind.CROSS_LAGGED:
        from .cross_lagged import FAMILY
    else:
        from .growth import FAMILY
    return FAMILY


__all__ = ["Family", "family_of"]
