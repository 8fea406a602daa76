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
from scipy.special import ndtr
from scipy.stats import mannwhitneyu, norm

__all__ = ["DRIFT_COLUMNS", "SERIES_KEYS", "best_change_points", "detect_drift", "drift_flags",
           "mann_whitney_z"]

SERIES_KEYS = ["device_key", "site", "exam_type", "quantity", "unit"]
METHOD = "Mann-Whitney split at month boundaries, max |z|, Bonferroni"
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
                "method": METHOD})
    return pd.DataFrame(rows, columns=DRIFT_COLUMNS)


def best_change_points(candidates: pd.DataFrame) -> pd.DataFrame:
    """The change point of each series from rank sums: `detect_drift` without the raw values.

    Parameters
    ----------
    candidates : pandas.DataFrame
        One row per series (`SERIES_KEYS`) x candidate boundary (``change_month``, YYYY-MM),
        sorted by series then month, with ``n_before``, ``n_after`` (both at least the minimum
        per side), ``rank2_after`` (twice the sum of the after side's average ranks over the
        whole series, an integer) and ``tie_term`` (sum of t^3 - t over groups of t tied
        values of the series); queries/audit/drift_candidates.sql.

    Returns
    -------
    pandas.DataFrame
        One row per series: the boundary with the largest |z| (the earliest on a tie), its
        ``n_before``, ``n_after``, ``statistic_z``, ``p_value``, ``n_candidates`` and
        ``p_value_bonferroni`` = min(1, p x n_candidates).

    Notes
    -----
    The same arithmetic as ``scipy.stats.mannwhitneyu(after, before, method="asymptotic",
    use_continuity=False)`` (normal approximation with tie correction; Hollander & Wolfe),
    vectorised over every boundary: U1 = R_after - n1 (n1 + 1) / 2, U = max(U1, n1 n2 - U1),
    z = (U - n1 n2 / 2) / sqrt(n1 n2 / 12 ((n + 1) - tie_term / (n (n - 1)))), p = 2 Phi(-z);
    the signed z is then Phi^-1(1 - p / 2) with the sign of U1 - n1 n2 / 2, as `detect_drift`.
    """
    columns = [*SERIES_KEYS, "change_month", "n_before", "n_after", "statistic_z", "p_value",
               "n_candidates", "p_value_bonferroni"]
    if candidates.empty:
        return pd.DataFrame(columns=columns)
    n1 = candidates["n_after"].to_numpy(np.int64)
    n2 = candidates["n_before"].to_numpy(np.int64)
    r1 = candidates["rank2_after"].to_numpy(np.float64) / 2.0
    tie_term = candidates["tie_term"].to_numpy(np.float64)
    u1 = r1 - n1 * (n1 + 1) / 2
    u = np.maximum(u1, n1 * n2 - u1)
    n = n1 + n2
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.sqrt(n1 * n2 / 12 * ((n + 1) - tie_term / (n * (n - 1))))
        z = (u - n1 * n2 / 2) / s
    p = np.clip(ndtr(-z) * 2, 0.0, 1.0)
    finite = np.isfinite(p)            # every value tied: no evidence either way
    shift = u1 - n2 * n1 / 2.0
    signed = np.where(finite & (shift != 0),
                      np.copysign(norm.isf(np.where(finite, p, 1.0) / 2.0), shift), 0.0)
    out = candidates[[*SERIES_KEYS, "change_month", "n_before", "n_after"]].copy()
    out["statistic_z"] = signed
    out["p_value"] = np.where(finite, p, 1.0)
    out["abs_z"] = np.abs(signed)
    out["row"] = np.arange(len(out))
    grouped = out.groupby(SERIES_KEYS, sort=False, dropna=False)
    out["n_candidates"] = grouped["row"].transform("size")
    # the first boundary with the largest |z| (detect_drift keeps a later one only if larger)
    best = out.loc[grouped["abs_z"].idxmax()].sort_values("row")
    best["p_value_bonferroni"] = np.minimum(1.0, best["p_value"] * best["n_candidates"])
    return best[columns].reset_index(drop=True)


def drift_flags(best: pd.DataFrame, medians: pd.DataFrame, *, alpha: float = 0.001,
                min_change: float = 0.2) -> pd.DataFrame:
    """Drift flags (`DRIFT_COLUMNS`) from `best_change_points` and the medians of each side.

    `medians` has one row per series x side: `SERIES_KEYS`, ``is_after`` and ``median`` (as
    numpy.median). A series is flagged when its Bonferroni-corrected p is below `alpha` and
    the medians differ by at least `min_change` (relative), as `detect_drift`.
    """
    if best.empty:
        return pd.DataFrame(columns=DRIFT_COLUMNS)
    keys = list(SERIES_KEYS)
    merged = best
    for flag, name in ((False, "median_before"), (True, "median_after")):
        side = medians.loc[medians["is_after"] == flag, [*keys, "median"]]
        merged = merged.merge(side.rename(columns={"median": name}), on=keys, how="left",
                              sort=False)   # pandas matches missing keys (None) with each other
    before = merged["median_before"].to_numpy(np.float64)
    after = merged["median_after"].to_numpy(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(before > 0, after / before, math.inf)
    merged["ratio_after_to_before"] = ratio
    merged["method"] = METHOD
    keep = (merged["p_value_bonferroni"] < alpha) & (np.abs(ratio - 1.0) >= min_change)
    out = merged.loc[keep, DRIFT_COLUMNS]
    return out.sort_values(keys, na_position="last", kind="stable").reset_index(drop=True)
