"""Change-point test over a unit's monthly dose series (pure).

For each device x exam type x quantity, every boundary between calendar months is a candidate
change point; the exams before and after it are compared with the Wilcoxon-Mann-Whitney rank
test (normal approximation with tie correction; Hollander & Wolfe, Nonparametric Statistical
Methods). The boundary with the largest |z| is kept. A drift flag needs both statistical
evidence (two-sided p, Bonferroni-corrected over the candidate boundaries, below `alpha`)
and a practical size (medians differ by at least `min_change`, relative), so a large stable
unit does not flag trivial shifts.
"""

from __future__ import annotations

import math
from statistics import NormalDist

import numpy as np
import pandas as pd

__all__ = ["DRIFT_COLUMNS", "detect_drift", "mann_whitney_z"]

DRIFT_COLUMNS = ["device_key", "site", "exam_type", "quantity", "unit", "change_month",
                 "median_before", "median_after", "ratio_after_to_before", "n_before",
                 "n_after", "statistic_z", "p_value", "p_value_bonferroni", "n_candidates",
                 "method"]


def mann_whitney_z(before: np.ndarray, after: np.ndarray) -> float:
    """z of the Mann-Whitney U statistic of `after` vs `before` (positive: after is larger)."""
    n1, n2 = len(before), len(after)
    values = np.concatenate([before, after])
    order = values.argsort(kind="mergesort")
    ranks = np.empty(len(values))
    sorted_values = values[order]
    i = 0
    tie_term = 0.0
    while i < len(values):
        j = i
        while j + 1 < len(values) and sorted_values[j + 1] == sorted_values[i]:
            j += 1
        ranks[order[i:j + 1]] = (i + j) / 2.0 + 1.0
        t = j - i + 1
        tie_term += t ** 3 - t
        i = j + 1
    u_after = ranks[n1:].sum() - n2 * (n2 + 1) / 2.0
    n = n1 + n2
    mean = n1 * n2 / 2.0
    var = n1 * n2 / 12.0 * ((n + 1) - tie_term / (n * (n - 1)))
    return 0.0 if var <= 0 else (u_after - mean) / math.sqrt(var)


def detect_drift(obs: pd.DataFrame, *, alpha: float = 0.001, min_change: float = 0.2,
                 min_n_side: int = 10) -> pd.DataFrame:
    """Drift flags from observations with columns device_key, site, exam_type, quantity, unit,
    period (YYYY-MM) and value. Returns one row per flagged series (DRIFT_COLUMNS)."""
    rows = []
    normal = NormalDist()
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
            z = mann_whitney_z(before, after)
            if best is None or abs(z) > abs(best[1]):
                best = (boundary, z, before, after)
        if best is None:
            continue
        boundary, z, before, after = best
        p = 2.0 * (1.0 - normal.cdf(abs(z)))
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
