"""Distribution-free confidence interval for a median from order statistics.

For a sample of n, the interval [x_(l), x_(n-l+1)] covers the population median with
probability 1 - 2 P(B <= l - 1), B ~ Binomial(n, 1/2) (Conover, Practical Nonparametric
Statistics, 3rd ed. 1999, section 3.2; Hollander & Wolfe). We take the largest l whose
coverage is at least the requested level, from scipy's exact binomial distribution
(``scipy.stats.binom``) for every n.
"""

from __future__ import annotations

import numpy as np
from scipy.stats import binom

__all__ = ["median_ci_ranks"]


def _lower_ranks(ns: np.ndarray, level: float) -> np.ndarray:
    """Largest l with P(B <= l - 1) <= (1 - level) / 2 for each n; 0 where none exists."""
    alpha = (1.0 - level) / 2.0
    k = binom.ppf(alpha, ns, 0.5)            # smallest k with P(B <= k) >= alpha
    at_k = binom.cdf(k, ns, 0.5)
    return np.where(at_k <= alpha, k + 1, k).astype(int)


def median_ci_ranks(max_n: int, level: float = 0.95) -> list[dict]:
    """Rows (n, lower_rank, upper_rank) for n = 1..max_n; ranks are 1-based, None if n is too
    small for the level (n <= 5 at 95 %)."""
    ns = np.arange(1, max_n + 1)
    lower = _lower_ranks(ns, level)
    return [{"n": int(n), "lower_rank": int(l) if l >= 1 else None,
             "upper_rank": int(n - l + 1) if l >= 1 else None} for n, l in zip(ns, lower)]
