"""Stage 3: description + shaped data -> both generated specifications and their correspondence."""
from .growth import CompiledGrowth, Correspondence, FixedColumn, LongDesign, MixedArrays, compile_growth
from .parameters import GrowthParameters, Scaling
from .quantities import Key, cov_key, effect_key, mean_key, residual_key, var_key

__all__ = ["CompiledGrowth", "Correspondence", "FixedColumn", "LongDesign", "MixedArrays", "compile_growth",
           "GrowthParameters", "Scaling", "Key", "cov_key", "effect_key", "mean_key", "residual_key", "var_key"]
