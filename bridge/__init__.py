"""sembridge: one longitudinal model, fitted as a wide-format SEM and a long-format mixed model, reconciled.

The public API follows the pipeline's stages::

    desc = bridge.load("model.yaml")          # the frozen description
    compiled = bridge.compile_description(desc)  # shaped data + both generated specifications
    result = bridge.run(desc)                 # fits, referee, reconciliation
    result.verdict, result.quantities
"""
from .compile import CompiledGrowth, compile_growth
from .data import ShapedData, shape_data
from .errors import DataError, DescriptionError, FitError, SembridgeError, SembridgeWarning
from .pipeline import compile_description, fit_and_adjudicate, run
from .reconcile import Reconciliation, Verdict, reconcile
from .render.json import to_dict
from .spec import Description, load

__version__ = "0.1.0"
__all__ = ["CompiledGrowth", "compile_growth", "ShapedData", "shape_data", "DataError", "DescriptionError",
           "FitError", "SembridgeError", "SembridgeWarning", "compile_description", "fit_and_adjudicate", "run",
           "Reconciliation", "Verdict", "reconcile", "to_dict", "Description", "load", "__version__"]
