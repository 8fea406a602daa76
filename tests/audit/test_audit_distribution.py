"""audit_distribution: the period's order statistics per room group, written by the audit for the
dashboards' distribution plots (issue 14: the site build no longer sorts every observation).

Checked against numpy over the audited values themselves: numpy.quantile's default "linear"
method is Hyndman & Fan (1996) definition 7, the definition DuckDB's quantile_cont computes.
The groups' populations follow the audit's own adult age, not the default one."""

from __future__ import annotations

import dataclasses
import datetime as dt
import shutil

import duckdb
import numpy as np
import pandas as pd

from pipeline.audit import AuditSettings, run_audit

PERIOD = {"date_from": dt.date(2026, 9, 1), "date_to": dt.date(2026, 10, 31)}
KEYS = ["device_key", "exam_type", "quantity", "unit", "population", "phantom"]
PROBS = {"p05": 0.05, "p25": 0.25, "median": 0.5, "p75": 0.75, "p95": 0.95}


def _population(row, adult_min_age: float) -> str:
    if row.modality == "MG":
        return "all"
    if pd.isna(row.patient_age_years):
        return "unknown_age"
    return "adult" if row.patient_age_years >= adult_min_age else "paediatric"


def _audit(warehouse, tmp_path, adult_min_age: float) -> tuple[pd.DataFrame, pd.DataFrame]:
    db = tmp_path / f"audit-{adult_min_age:g}.duckdb"
    shutil.copyfile(warehouse[0], db)
    settings = dataclasses.replace(AuditSettings(), adult_min_age_years=adult_min_age)
    run_audit(db, settings=settings, **PERIOD)
    with duckdb.connect(str(db), read_only=True) as con:
        table = con.execute("select * from audit_distribution").df()
        obs = con.execute(
            "select device_key, exam_type, quantity, unit, phantom, modality, patient_age_years, value"
            " from audit_observation where study_date >= ? and study_date < ?",
            [PERIOD["date_from"], PERIOD["date_to"] + dt.timedelta(days=1)]).df()
    obs["population"] = [_population(r, adult_min_age) for r in obs.itertuples()]
    return table, obs


def _expected(obs: pd.DataFrame) -> pd.DataFrame:
    rows = []
    for key, group in obs.groupby(KEYS, dropna=False, sort=False):
        values = np.round(group["value"].to_numpy(), 9)
        row = dict(zip(KEYS, key))
        row.update(n=len(values), value_min=values.min(), value_max=values.max(),
                   **{name: np.quantile(values, p) for name, p in PROBS.items()})
        rows.append(row)
    return pd.DataFrame(rows)


def _same(table: pd.DataFrame, expected: pd.DataFrame) -> None:
    got = table.astype({k: object for k in KEYS}).fillna({k: "<null>" for k in KEYS})
    want = expected.astype({k: object for k in KEYS}).fillna({k: "<null>" for k in KEYS})
    merged = got.merge(want, on=KEYS, how="outer", suffixes=("", "_numpy"), indicator=True)
    assert (merged["_merge"] == "both").all(), merged[merged["_merge"] != "both"][KEYS].head()
    assert (merged["n"] == merged["n_numpy"]).all()
    for column in ("value_min", "value_max", *PROBS):
        assert np.allclose(merged[column], merged[f"{column}_numpy"], rtol=1e-12, atol=1e-12), column


def test_order_statistics_equal_numpy_type_7_over_the_audited_values(warehouse, tmp_path):
    table, obs = _audit(warehouse, tmp_path, AuditSettings().adult_min_age_years)
    assert len(table) > 50 and set(table["population"]) >= {"adult", "all"}
    _same(table, _expected(obs))


def test_populations_follow_the_audits_adult_age(warehouse, tmp_path):
    """An audit with adults from 40 years puts more groups' values under 'paediatric' (the
    dashboards used the default age before, whatever the audit had used)."""
    default, _ = _audit(warehouse, tmp_path, AuditSettings().adult_min_age_years)
    table, obs = _audit(warehouse, tmp_path, 40.0)
    _same(table, _expected(obs))
    paediatric = table.loc[table["population"] == "paediatric", "n"].sum()
    assert paediatric > default.loc[default["population"] == "paediatric", "n"].sum()
