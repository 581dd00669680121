"""Stage 1: the model description, its vocabulary and the YAML loader."""
from .description import DataSection, Description, EstimationSection, FormSettings, ModelSection
from .loader import load
from .vocabulary import Kind, Layout, Method, Missing, Paths, Residuals, Shape, Term, Variant, terms_of

__all__ = ["DataSection", "Description", "EstimationSection", "FormSettings", "ModelSection", "load", "Kind", "Layout",
           "Method", "Missing", "Paths", "Residuals", "Variant", "Shape", "Term", "terms_of"]
