"""The audit's set-based steps (DuckDB + numpy) against the per-series reference implementations.

The drift test runs as rank sums in SQL (queries/audit/create_drift_observation.sql,
drift_candidates.sql, drift_medians.sql) and numpy (pipeline.metrics.drift.best_change_points);
its reference is `detect_drift`, which calls scipy.stats.mannwhitneyu per series and boundary
(an independent implementation of the Mann-Whitney test). The accumulated CTDIvol of the CT
dose-check alert runs in SQL (queries/audit/create_ct_accumulated.sql); its reference is the
plain-Python `accumulated_ctdivol_by_position`.
"""

from __future__ import annotations

import datetime as dt
import math

import duckdb
import numpy as np
import pandas as pd
import pytest

from pipeline.audit import AuditSettings, _drift_flags
from pipeline.metrics import accumulated_ctdivol_by_position, detect_drift
from pipeline.metrics.dose_check import METHOD_BY_POSITION, METHOD_UPPER_BOUND
from queries import sql


def _observations(seed: int) -> pd.DataFrame:
    """Several adult monthly series: shifted, stable, tied, tiny, one with no site."""
    rng = np.random.default_rng(seed)
    rows = []
    months = ["2026-01", "2026-02", "2026-03", "2026-04", "2026-05"]

    def series(device, site, exam, quantity, unit, per_month, shift_from, factor, decimals):
        for i, month in enumerate(months):
            n = per_month if isinstance(per_month, int) else per_month[i]
            scale = factor if i >= shift_from else 1.0
            for v in np.round(rng.lognormal(3.0, 0.3, n) * scale, decimals):
                rows.append({"device_key": device, "site": site, "exam_type": exam,
                             "quantity": quantity, "unit": unit, "period": month,
                             "value": float(v)})

    series("dev-a", "North", "ct_head", "dlp", "mGy.cm", 30, 3, 1.6, 0)     # shift, ties
    series("dev-a", "North", "ct_head", "ctdivol", "mGy", 25, 9, 1.0, 1)    # stable
    series("dev-b", None, "ct_chest", "dlp", "mGy.cm", [8, 8, 40, 40, 40], 2, 0.6, 0)  # no site
    series("dev-c", "South", "dx_chest", "dap", "Gy.cm2", 12, 1, 2.0, 2)
    series("dev-d", "South", "dx_chest", "dap", "Gy.cm2", 4, 2, 3.0, 2)     # too few per side
    series("dev-e", "South", "rf_barium", "dap", "Gy.cm2", 20, 2, 1.0, -1)  # heavy ties
    return pd.DataFrame(rows)


def _set_based(obs: pd.DataFrame) -> pd.DataFrame:
    con = duckdb.connect()
    table = obs.assign(study_date=dt.date(2026, 1, 15), patient_age_years=50.0, phantom="body_32cm")
    con.register("obs_frame", table)
    con.execute("create table audit_observation as select * from obs_frame")
    return _drift_flags(con, dt.date(2026, 6, 1), AuditSettings())


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_set_based_drift_equals_scipy_per_series(seed):
    obs = _observations(seed)
    expected = detect_drift(obs, alpha=0.001, min_change=0.2, min_n_side=10)
    got = _set_based(obs)
    assert len(expected) >= 1   # the shifted series are flagged: the check is not vacuous
    assert list(got.columns) == list(expected.columns)
    assert len(got) == len(expected)
    for (_, g), (_, e) in zip(got.iterrows(), expected.iterrows()):
        for column in expected.columns:
            a, b = g[column], e[column]
            if isinstance(b, float) and not (b is None or (isinstance(a, float) and math.isnan(b))):
                assert a == pytest.approx(b, rel=1e-12, abs=0), column
            elif not (pd.isna(a) and pd.isna(b)):
                assert a == b, column


def test_set_based_drift_of_no_history_is_empty():
    assert _set_based(_observations(1).iloc[0:0]).empty


def _accumulated_sql(acquisitions: list[tuple[str, float, float | None, float | None]]):
    con = duckdb.connect()
    events = pd.DataFrame(
        [{"event_uid": f"e{n}", "study_key": s, "device_key": "dev", "event_type": "spiral",
          "ctdivol_mgy": c, "ctdi_phantom": "body_32cm", "acquisition_protocol": None,
          "top_z_scanning_length_mm": a, "bottom_z_scanning_length_mm": b}
         for n, (s, c, a, b) in enumerate(acquisitions)])
    studies = pd.DataFrame({"study_key": sorted({s for s, *_ in acquisitions}), "device_key": "dev",
                            "study_date": dt.date(2026, 1, 10), "exam_type": "ct_chest",
                            "patient_age_years": 50.0})
    con.register("events_frame", events)
    con.register("studies_frame", studies)
    con.execute("create table irradiation_event as select * from events_frame")
    con.execute("create table study_dose as select * from studies_frame")
    con.execute("create table exam_stratum_basis (exam_type varchar, region varchar)")
    con.execute("create table raw_ct_event (event_uid varchar, "
                "dose_check_notification_ctdivol_mgy double, dose_check_alert_ctdivol_mgy double)")
    con.execute(sql("create_ct_acquisition"), {
        "date_from": dt.date(2026, 1, 1), "date_to": dt.date(2026, 2, 1)})
    con.execute(sql("create_ct_accumulated"), {
        "method_by_position": METHOD_BY_POSITION, "method_upper_bound": METHOD_UPPER_BOUND})
    return {s: (v, m) for s, v, m in con.execute(
        "select study_key, accumulated_ctdivol_mgy, method from ct_accumulated").fetchall()}


def test_set_based_accumulated_ctdivol_equals_the_python_reference():
    rng = np.random.default_rng(11)
    acquisitions = []
    for n in range(60):
        study = f"s{n:02d}"
        for _ in range(int(rng.integers(1, 6))):
            low = float(rng.integers(-400, 200))
            length = float(rng.choice([0.0, 50.0, 120.0, 300.0]))
            a, b = (low, low + length) if rng.random() < 0.5 else (low + length, low)
            if n % 7 == 0 and rng.random() < 0.5:
                a = None   # a missing range: the upper bound for the whole study
            acquisitions.append((study, float(np.round(rng.uniform(1, 60), 2)), a, b))
    acquisitions += [("touch", 10.0, 0.0, 100.0), ("touch", 20.0, 100.0, 200.0),   # touching
                     ("point", 5.0, 50.0, 50.0), ("point", 7.0, 0.0, 100.0)]       # zero length
    got = _accumulated_sql(acquisitions)
    for study in {s for s, *_ in acquisitions}:
        value, method = accumulated_ctdivol_by_position(
            (c, a, b) for s, c, a, b in acquisitions if s == study)
        assert got[study][1] == method
        assert got[study][0] == pytest.approx(value, rel=1e-12)
    assert got["touch"] == (20.0, METHOD_BY_POSITION)   # ranges that only touch do not add up
    assert got["point"] == (12.0, METHOD_BY_POSITION)   # a zero-length range covers its position
