"""sembridge: one longitudinal model, fitted as a wide-format SEM and a long-format mixed model, reconciled.

The public API follows the pipeline's stages::

    desc = bridge.load("model.yaml")          # the frozen description
    pair = bridge.compile_description(desc)   # shaped data + both generated forms (pair.sem, pair.mixed)
    result = bridge.run(desc)                 # fits, referee, explanations, reconciliation
    result.verdict, result.quantities, result.explanations
    bridge.to_dict(result)                    # the JSON contract (docs/json.md)
"""
from .compile import CompiledGrowth, CompiledPair, Plan, compile_growth, compile_pair
from .data import ShapedData, shape_data
from .errors import DataError, DescriptionError, FitError, SembridgeError, SembridgeWarning
from .pipeline import compile_description, evaluate_description, run, shape
from .reconcile import Reconciliation, Verdict
from .render.json import to_dict
from .spec import Description, load

__version__ = "0.1.0"
__all__ = ["CompiledGrowth", "CompiledPair", "Plan", "compile_growth", "compile_pair", "shape",
           "evaluate_description", "ShapedData", "shape_data", "DataError", "DescriptionError",
           "FitError", "SembridgeError", "SembridgeWarning", "compile_description", "run",
           "Reconciliation", "Verdict", "to_dict", "Description", "load", "__version__"]
