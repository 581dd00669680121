"""Simulate longitudinal growth data from known population values."""
from __future__ import annotations

from .growth import GrowthTruth, simulate_growth

__all__ = ["GrowthTruth", "simulate_growth"]
