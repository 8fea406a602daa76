"""Pure numeric helpers that are awkward in SQL (order-statistic ranks, change points)."""

from .drift import detect_drift
from .order_statistics import median_ci_ranks

__all__ = ["detect_drift", "median_ci_ranks"]
