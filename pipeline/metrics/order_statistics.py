"""Distribution-free confidence interval for a median from order statistics.

For a sample of n, the interval [x_(l), x_(n-l+1)] covers the population median with
probability 1 - 2 P(B <= l - 1), B ~ Binomial(n, 1/2) (Conover, Practical Nonparametric
Statistics, 3rd ed. 1999, section 3.2; Hollander & Wolfe). We take the largest l whose
coverage is at least the requested level (exact for n <= 1000, normal approximation above).
"""

from __future__ import annotations

import math

__all__ = ["median_ci_ranks"]


def _lower_rank(n: int, level: float) -> int | None:
    alpha = (1.0 - level) / 2.0
    if n > 1000:
        z = 1.959963984540054 if abs(level - 0.95) < 1e-12 else _z(level)
        rank = math.floor(n / 2.0 - z * math.sqrt(n) / 2.0)
        return rank if rank >= 1 else None
    total = 2 ** n
    cumulative = 0
    best = None
    for l in range(1, n // 2 + 1):
        cumulative += math.comb(n, l - 1)     # P(B <= l - 1) * 2**n
        if cumulative / total <= alpha:  # int / int: exact rounding, no float overflow
            best = l
        else:
            break
    return best


def _z(level: float) -> float:
    from statistics import NormalDist
    return NormalDist().inv_cdf(0.5 + level / 2.0)


def median_ci_ranks(max_n: int, level: float = 0.95) -> list[dict]:
    """Rows (n, lower_rank, upper_rank) for n = 1..max_n; ranks are 1-based, None if n is too
    small for the level (n <= 5 at 95 %)."""
    rows = []
    for n in range(1, max_n + 1):
        l = _lower_rank(n, level)
        rows.append({"n": n, "lower_rank": l, "upper_rank": None if l is None else n - l + 1})
    return rows
