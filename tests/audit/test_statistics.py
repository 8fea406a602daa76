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


def test_robust_outliers_match_numpy_median_and_mad_of_log_dose(audited):
    """The audit's robust-outlier alerts equal an independent computation with numpy over the
    audited values: per exam type x room x quantity with at least outlier_min_n positive values,
    the modified z-score M = 0.6745 (ln x - median) / MAD on log dose, |M| > 3.5 (Iglewicz &
    Hoaglin 1993, modified z-score; pipeline/alert_rules.toml, from memory); the reported
    threshold is the value at which |M| equals 3.5 on that side of the median."""
    from pipeline.audit import AuditSettings, load_alert_rules

    db, _, _ = audited
    (rule,) = [r for r in load_alert_rules() if r["family"] == "robust_outlier"]
    z_threshold, min_n = rule["threshold"], AuditSettings().outlier_min_n
    con = duckdb.connect(str(db), read_only=True)
    obs = con.execute("select study_key, device_key, exam_type, quantity, value from audit_observation "
                      "where study_date between date '2026-09-01' and date '2026-11-30' "   # the audited days
                      "and value > 0").df()
    got = con.execute("select study_key, device_key, quantity, rule, threshold from dose_alerts "
                      "where family = 'robust_outlier'").fetchall()
    con.close()
    expected = {}
    # unmapped studies (no exam type) form no group: the SQL joins on exam_type
    for _, group in obs.dropna(subset=["exam_type"]).groupby(["exam_type", "device_key", "quantity"]):
        if len(group) < min_n:
            continue
        logs = np.log(group["value"].to_numpy())
        med = np.median(logs)
        mad = np.median(np.abs(logs - med))
        if mad == 0:
            continue
        for row, x in zip(group.itertuples(), logs):
            if abs(0.6745 * (x - med) / mad) > z_threshold:
                side = 1.0 if x > med else -1.0
                expected[(row.study_key, row.device_key, row.quantity)] = (
                    "robust_outlier_high" if x > med else "robust_outlier_low",
                    float(np.exp(med + side * z_threshold * mad / 0.6745)))
    assert len(expected) >= 5   # the demo-like network has outliers of both kinds
    assert {r for r, _ in expected.values()} == {"robust_outlier_high", "robust_outlier_low"}
    assert sorted((s, d, q, r) for s, d, q, r, _ in got) == \
        sorted((s, d, q, r) for (s, d, q), (r, _) in expected.items())
    for s, d, q, r, t in got:
        assert t == pytest.approx(expected[(s, d, q)][1], rel=1e-12)
