"""The audit's grouping statements (audit_medians, audit_distribution, monthly_medians,
dose_alerts) run over parts of the rooms when a period holds many observations, so their
in-memory quantile and list states stay within the audit's memory limit (issue 14). Run in many parts, the audit must give the same
tables as in one: every row equal (floats to 1e-12), whatever the order parts leave them in."""

from __future__ import annotations

import datetime as dt
import shutil

import duckdb
import numpy as np
import pandas as pd

import pipeline.audit as audit_module
from pipeline.audit import run_audit

TABLES = {"audit_medians": ["site", "device_key", "exam_type", "quantity", "population", "stratum",
                            "phantom"],
          "monthly_medians": ["device_key", "exam_type", "quantity", "unit", "phantom", "month"],
          "audit_distribution": ["device_key", "exam_type", "quantity", "population", "phantom"],
          "dose_alerts": ["study_key", "device_key", "rule", "quantity"],
          "network_reference": ["exam_type", "quantity", "population", "stratum", "phantom"],
          "drift_flags": ["device_key", "exam_type", "quantity", "unit"]}


def _tables(db) -> dict[str, pd.DataFrame]:
    con = duckdb.connect(str(db), read_only=True)
    try:
        return {t: con.execute(f"select * from {t}").df()
                   .sort_values(keys, na_position="first").reset_index(drop=True)
                for t, keys in TABLES.items()}
    finally:
        con.close()


def test_an_audit_in_many_parts_equals_the_audit_in_one(warehouse, tmp_path, monkeypatch):
    db, _ = warehouse
    one, many = tmp_path / "one.duckdb", tmp_path / "many.duckdb"
    shutil.copyfile(db, one)
    shutil.copyfile(db, many)
    period = {"date_from": dt.date(2026, 9, 1), "date_to": dt.date(2026, 11, 30)}
    run_audit(one, **period)
    with duckdb.connect(str(one), read_only=True) as con:
        (n_obs,) = con.execute("select count(*) from audit_observation").fetchone()
    monkeypatch.setattr(audit_module, "ROWS_PER_PART", n_obs // 7)   # 7 or 8 parts
    run_audit(many, **period)
    a, b = _tables(one), _tables(many)
    assert len(a["audit_medians"]) > 50 and len(a["dose_alerts"]) > 10
    for table in TABLES:
        x, y = a[table], b[table]
        assert list(x.columns) == list(y.columns) and len(x) == len(y), table
        for column in x.columns:
            if pd.api.types.is_float_dtype(x[column]):
                same = np.isclose(x[column], y[column], rtol=1e-12, atol=0, equal_nan=True)
            else:
                same = ((x[column].isna() & y[column].isna())
                        | (x[column].astype(str) == y[column].astype(str))).to_numpy()
            assert same.all(), f"{table}.{column}: {int((~same).sum())} rows differ"
