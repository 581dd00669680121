"""Stage 3: description + shaped data -> both generated specifications and their correspondence."""
from .growth import CompiledGrowth, Correspondence, FixedColumn, LongDesign, MixedArrays, compile_growth
from .parameters import GrowthParameters, Scaling
from .pair import CompiledPair, compile_pair
from .plan import Coding, Plan, TimeSource
from .quantities import Key, cov_key, effect_key, mean_key, residual_key, var_key

__all__ = ["CompiledGrowth", "Correspondence", "FixedColumn", "LongDesign", "MixedArrays", "compile_growth",
           "GrowthParameters", "Scaling", "Coding", "Plan", "TimeSource", "CompiledPair", "compile_pair", "Key", "cov_key", "effect_key", "mean_key", "residual_key", "var_key"]
