"""Pure numeric helpers that are awkward in SQL (order-statistic ranks, change points)."""

from .dose_check import accumulated_ctdivol_by_position
from .drift import detect_drift
from .order_statistics import median_ci_ranks

__all__ = ["accumulated_ctdivol_by_position", "detect_drift", "median_ci_ranks"]
