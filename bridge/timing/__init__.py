"""The timing lab: what a design's timing is, what rounding it onto waves costs, and simulations of both forms."""
from .advice import Recommendation
from .inspect import TimingReport, WaveSpread, inspect_file, inspect_frame, summarise

__all__ = ["Recommendation", "TimingReport", "WaveSpread", "inspect_file", "inspect_frame", "summarise"]
