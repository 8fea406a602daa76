"""Change-point test over a unit's monthly dose series (pure).

For each device x exam type x quantity, every boundary between calendar months is a candidate
change point; the exams before and after it are compared with the Wilcoxon-Mann-Whitney rank
test (normal approximation with tie correction, no continuity correction; Hollander & Wolfe,
Nonparametric Statistical Methods), computed by ``scipy.stats.mannwhitneyu``. The boundary with the largest |z| is kept. A drift flag needs both statistical
evidence (two-sided p, Bonferroni-corrected over the candidate boundaries, below `alpha`)
and a practical size (medians differ by at least `min_change`, relative), so a large stable
unit does not flag trivial shifts.
"""

from __future__ import annotations

import math
import numpy as np
import pandas as pd
from scipy.stats import mannwhitneyu, norm

__all__ = ["DRIFT_COLUMNS", "detect_drift", "mann_whitney_z"]

DRIFT_COLUMNS = ["device_key", "site", "exam_type", "quantity", "unit", "change_month",
                 "median_before", "median_after", "ratio_after_to_before", "n_before",
                 "n_after", "statistic_z", "p_value", "p_value_bonferroni", "n_candidates",
                 "method"]


def _mann_whitney(before: np.ndarray, after: np.ndarray) -> tuple[float, float]:
    """(z, two-sided p) of the Mann-Whitney U test of `after` vs `before`: scipy's normal
    approximation with tie correction, no continuity correction (z > 0: after is larger)."""
    result = mannwhitneyu(after, before, alternative="two-sided", method="asymptotic",
                          use_continuity=False)
    p = float(result.pvalue)
    if not math.isfinite(p):          # every value tied: no evidence either way
        return 0.0, 1.0
    shift = float(result.statistic) - len(before) * len(after) / 2.0
    return math.copysign(float(norm.isf(p / 2.0)), shift) if shift else 0.0, p


def mann_whitney_z(before: np.ndarray, after: np.ndarray) -> float:
    """z of the Mann-Whitney U statistic of `after` vs `before` (positive: after is larger)."""
    return _mann_whitney(before, after)[0]


def detect_drift(obs: pd.DataFrame, *, alpha: float = 0.001, min_change: float = 0.2,
                 min_n_side: int = 10) -> pd.DataFrame:
    """Drift flags from observations with columns device_key, site, exam_type, quantity, unit,
    period (YYYY-MM) and value. Returns one row per flagged series (DRIFT_COLUMNS)."""
    rows = []
    keys = ["device_key", "site", "exam_type", "quantity", "unit"]
    for key, series in obs.groupby(keys, sort=True, dropna=False):
        months = sorted(series["period"].unique())
        if len(months) < 2:
            continue
        best = None
        candidates = 0
        for boundary in months[1:]:
            before = series.loc[series.period < boundary, "value"].to_numpy(float)
            after = series.loc[series.period >= boundary, "value"].to_numpy(float)
            if len(before) < min_n_side or len(after) < min_n_side:
                continue
            candidates += 1
            z, p = _mann_whitney(before, after)
            if best is None or abs(z) > abs(best[1]):
                best = (boundary, z, p, before, after)
        if best is None:
            continue
        boundary, z, p, before, after = best
        p_adj = min(1.0, p * candidates)
        m_before, m_after = float(np.median(before)), float(np.median(after))
        ratio = m_after / m_before if m_before > 0 else math.inf
        if p_adj < alpha and abs(ratio - 1.0) >= min_change:
            rows.append(dict(zip(keys, key)) | {
                "change_month": boundary, "median_before": m_before, "median_after": m_after,
                "ratio_after_to_before": ratio, "n_before": len(before), "n_after": len(after),
                "statistic_z": z, "p_value": p, "p_value_bonferroni": p_adj,
                "n_candidates": candidates,
                "method": "Mann-Whitney split at month boundaries, max |z|, Bonferroni"})
    return pd.DataFrame(rows, columns=DRIFT_COLUMNS)
