"""Stage 2: data reading, checking, long/wide shaping and timing classification."""
from .prepare import PredictorColumn, ShapedData, complete_cases, shape_data, shape_frame
from .timing import Design, GridSource, Timing, classify, nearest_wave

__all__ = ["PredictorColumn", "ShapedData", "complete_cases", "shape_data", "shape_frame", "Design", "GridSource", "Timing", "classify",
           "nearest_wave"]
