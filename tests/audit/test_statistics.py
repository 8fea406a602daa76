"""Medians, percentiles, CIs and the drift test against independent implementations."""

import duckdb
import numpy as np
import pytest
from scipy.stats import mannwhitneyu, quantile_test

from pipeline.metrics import detect_drift, median_ci_ranks
from pipeline.metrics.drift import mann_whitney_z


@pytest.mark.parametrize("n", [6, 7, 10, 20, 30, 51, 100, 333, 1000, 1001, 1500, 4000])
def test_median_ci_ranks_match_scipy_quantile_test(n):
    """scipy.stats.quantile_test gives the exact distribution-free interval (Conover 1999)."""
    x = np.arange(1, n + 1, dtype=float)
    ci = quantile_test(x, q=np.median(x), p=0.5).confidence_interval(0.95)
    row = median_ci_ranks(n)[n - 1]
    got = (x[row["lower_rank"] - 1], x[row["upper_rank"] - 1])
    assert got == (ci.low, ci.high)   # exact binomial for every n (scipy.stats.binom)


def test_median_ci_undefined_for_tiny_samples():
    # with n <= 5 even [min, max] covers the median with < 95 % (1 - 2 * 0.5**5 = 0.9375)
    assert [r["lower_rank"] for r in median_ci_ranks(6)] == [None] * 5 + [1]


def test_duckdb_quantile_cont_is_numpy_linear_percentile():
    rng = np.random.default_rng(3)
    values = rng.lognormal(3.0, 0.5, 101)
    con = duckdb.connect()
    got = con.execute("select quantile_cont(v, 0.25), quantile_cont(v, 0.5), quantile_cont(v, 0.75) "
                      "from (select unnest(?) as v)", [values.tolist()]).fetchall()[0]
    expected = np.percentile(values, [25, 50, 75], method="linear")  # Hyndman & Fan type 7
    assert np.allclose(got, expected, rtol=1e-12)


def test_mann_whitney_z_matches_scipy_normal_approximation():
    rng = np.random.default_rng(5)
    a, b = rng.normal(0, 1, 40).round(1), rng.normal(0.5, 1, 55).round(1)  # rounding makes ties
    z = mann_whitney_z(a, b)
    p_scipy = mannwhitneyu(b, a, alternative="two-sided", method="asymptotic", use_continuity=False).pvalue
    from statistics import NormalDist
    assert 2 * (1 - NormalDist().cdf(abs(z))) == pytest.approx(p_scipy, rel=1e-9)


def _series(values_by_month):
    import pandas as pd
    rows = [{"device_key": "d", "site": "s", "exam_type": "e", "quantity": "dap", "unit": "Gy.cm2",
             "period": month, "value": v} for month, values in values_by_month.items() for v in values]
    return pd.DataFrame(rows)


def test_drift_finds_a_step_change_at_its_month():
    rng = np.random.default_rng(11)
    data = {"2026-01": rng.lognormal(0, 0.3, 40), "2026-02": rng.lognormal(0, 0.3, 40),
            "2026-03": rng.lognormal(np.log(0.65), 0.3, 40), "2026-04": rng.lognormal(np.log(0.65), 0.3, 40)}
    (flag,) = detect_drift(_series(data)).to_dict("records")
    assert flag["change_month"] == "2026-03"
    assert flag["ratio_after_to_before"] == pytest.approx(0.65, rel=0.15)
    assert flag["statistic_z"] < 0


def test_drift_stays_quiet_on_a_stable_series():
    rng = np.random.default_rng(12)
    data = {f"2026-0{m}": rng.lognormal(0, 0.3, 60) for m in range(1, 7)}
    assert detect_drift(_series(data)).empty


def test_drift_ignores_a_tiny_but_significant_shift():
    rng = np.random.default_rng(13)
    data = {"2026-01": rng.lognormal(0, 0.05, 400), "2026-02": rng.lognormal(np.log(0.95), 0.05, 400)}
    assert detect_drift(_series(data)).empty  # 5 % is below the 20 % practical threshold
