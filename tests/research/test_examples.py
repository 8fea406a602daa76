"""queries/examples/*.sql: each worked question runs read-only on a demo-like audited warehouse
and returns rows with the columns its header comment documents; the numbers are recomputed
independently (pandas / numpy over the public views) for each question."""

from __future__ import annotations

import csv
import io
import re
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from pipeline.adhoc import read_only, run_query
from pipeline.cli import app
from queries import ROOT

EXAMPLES = sorted((ROOT / "examples").glob("*.sql"))
QUESTIONS = {"ct_dlp_yearly_median", "radiography_kvp_drift", "paediatric_above_reference",
             "fluoro_time_by_quarter", "cumulative_effective_dose"}


def header(path: Path) -> dict[str, str]:
    """The ``-- key: value`` lines of the leading comment; ``--   `` lines continue a value."""
    fields: dict[str, str] = {}
    key = None
    for line in path.read_text(encoding="utf-8").splitlines():
        if not line.startswith("--"):
            break
        if match := re.match(r"^-- (\w+): (.*)$", line):
            key = match.group(1)
            fields[key] = match.group(2).strip()
        elif key and line.startswith("--   "):
            fields[key] += " " + line[5:].strip()
    return fields


def documented_columns(path: Path) -> list[str]:
    return [c.strip() for c in header(path)["columns"].split(",")]


def documented_params(path: Path) -> dict[str, str]:
    text = header(path)["parameters"]
    return {} if text == "none" else dict(p.strip().split("=", 1) for p in text.split(","))


def frame(db: Path, path: Path) -> pd.DataFrame:
    with read_only(db) as con:
        return run_query(con, path.read_text(encoding="utf-8"), documented_params(path)).to_pandas()


def test_the_five_questions_of_the_issue_are_there():
    assert {p.stem for p in EXAMPLES} == QUESTIONS
    for path in EXAMPLES:
        fields = header(path)
        assert {"question", "grain", "columns", "parameters", "note", "run"} <= fields.keys(), path
        assert f"--file queries/examples/{path.name}" in fields["run"]
        assert path.read_text(encoding="utf-8").startswith("-- grain: ")   # STYLE A.9


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.stem)
def test_example_returns_rows_with_its_documented_columns(audited, path):
    result = frame(audited[0], path)
    assert list(result.columns) == documented_columns(path)
    assert len(result) > 0


def test_kerma_sql_runs_an_example_file_with_its_parameter(audited):
    path = ROOT / "examples" / "ct_dlp_yearly_median.sql"
    result = CliRunner().invoke(app, ["sql", "--warehouse", str(audited[0]), "--file", str(path),
                                      "--param", "adult_min_age=16", "--format", "csv"])
    assert result.exit_code == 0, result.output
    rows = list(csv.reader(io.StringIO(result.output)))
    assert rows[0] == documented_columns(path) and len(rows) > 1
    result = CliRunner().invoke(app, ["sql", "--warehouse", str(audited[0]), "--file", str(path)])
    assert result.exit_code == 2 and "no value for $adult_min_age" in result.output


@pytest.fixture(scope="module")
def studies(audited) -> pd.DataFrame:
    with read_only(audited[0]) as con:
        return con.sql("select * from study_dose").to_df()


def test_ct_dlp_yearly_median_recomputed(audited, studies):
    result = frame(audited[0], ROOT / "examples" / "ct_dlp_yearly_median.sql")
    ct = studies[(studies.modality == "CT") & studies.exam_type.notna()
                 & studies.dlp_total_mgy_cm.notna() & (studies.patient_age_years >= 16)]
    assert result.n_studies.sum() == len(ct) > 50
    row = result.sort_values("n_studies").iloc[-1]
    values = ct[(ct.device_key == row.device_key) & (ct.exam_type == row.exam_type)].dlp_total_mgy_cm
    # numpy's default percentile is the same linear interpolation (Hyndman & Fan type 7)
    assert row.median_dlp_mgy_cm == pytest.approx(np.percentile(values, 50))
    assert row.p75_dlp_mgy_cm == pytest.approx(np.percentile(values, 75))


def test_radiography_kvp_drift_recomputed(audited, studies):
    result = frame(audited[0], ROOT / "examples" / "radiography_kvp_drift.sql")
    assert set(result.modality) == {"DX", "CR"}
    assert (result.kvp_change_from_first_month
            == result.median_kvp - result.first_month_median_kvp).all()
    first = result.groupby(["device_key", "exam_type"]).first()
    assert (first.kvp_change_from_first_month == 0).all()
    with read_only(audited[0]) as con:
        events = con.sql("select device_key, study_key, kvp from irradiation_event "
                         "where modality in ('DX', 'CR') and kvp is not null").to_df()
    mapped = events.merge(studies[studies.exam_type.notna()][["study_key", "device_key"]])
    assert result.n_exposures.sum() == len(mapped) > 100


def test_fluoro_time_by_quarter_recomputed(audited, studies):
    result = frame(audited[0], ROOT / "examples" / "fluoro_time_by_quarter.sql")
    fl = studies[studies.modality.isin(["XA", "RF"]) & studies.exam_type.notna()
                 & studies.fluoro_time_total_s.notna()]
    assert result.n_studies.sum() == len(fl) > 20
    assert set(result.quarter) <= {"2026-Q3", "2026-Q4"}   # the demo corpus runs Sep-Nov 2026
    q3 = fl[(pd.to_datetime(fl.study_date).dt.quarter == 3) & (fl.exam_type == "xa_coronary_angiography")]
    row = result[(result.quarter == "2026-Q3") & (result.exam_type == "xa_coronary_angiography")].iloc[0]
    assert row.median_fluoro_time_s == pytest.approx(np.percentile(q3.fluoro_time_total_s, 50))
    assert row.max_fluoro_time_s == pytest.approx(q3.fluoro_time_total_s.max())


def test_cumulative_effective_dose_recomputed(audited):
    result = frame(audited[0], ROOT / "examples" / "cumulative_effective_dose.sql")
    with read_only(audited[0]) as con:
        estimates = con.sql("select patient_key, effective_dose_msv from study_estimate "
                            "where patient_key is not null and effective_dose_msv is not null").to_df()
    per_patient = estimates.groupby("patient_key").effective_dose_msv.agg(["sum", "count", "max"])
    assert len(result) == len(per_patient) > 50
    assert result.cumulative_effective_dose_msv.is_monotonic_decreasing
    top = result.iloc[0]
    assert top.cumulative_effective_dose_msv == pytest.approx(per_patient["sum"].max())
    assert top.n_ct_studies == per_patient.loc[top.patient_key, "count"]
    assert result.effective_dose_basis.str.contains("ICRP").all()


def test_paediatric_share_without_and_with_a_paediatric_reference(audited, tmp_path):
    """The demo ships no paediatric reference: every row says so and the share is NULL. With an
    imported paediatric set (an invented test value, not a published level) the share is the
    fraction of paediatric exams above it, recomputed here."""
    path = ROOT / "examples" / "paediatric_above_reference.sql"
    before = frame(audited[0], path)
    assert set(before.band) == {"no reference"} and before.share_above_reference.isna().all()
    assert before.n_exams.sum() > 10

    with read_only(audited[0]) as con:
        head = con.sql("select value from audit_observation where exam_type = 'ct_head' and "
                       "quantity = 'dlp' and patient_age_years < 16").to_df().value
    assert len(head) >= 3
    level = float(np.percentile(head, 50))
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(audited[0], copy)
    levels = tmp_path / "test_paediatric.csv"
    levels.write_text(
        "set_id,issuing_body,country,version,effective_date,exam_type,quantity,value,unit,"
        "population,age_min_years,age_max_years,citation_title,note\n"
        f"test_paediatric_ct,Invented test body,XX,test,2020,ct_head,dlp,{level},mGy.cm,"
        "paediatric,0,16,Invented test value,not a published level\n", encoding="utf-8")
    result = CliRunner().invoke(app, ["reference", "import", str(levels), "--warehouse", str(copy)])
    assert result.exit_code == 0, result.output

    after = frame(copy, path)
    (row,) = after[(after.exam_type == "ct_head") & (after.quantity == "dlp")].itertuples()
    assert row.band == "age 0.0 to <16.0" and row.reference_sets == "test_paediatric_ct"
    assert (row.n_exams, row.n_with_reference) == (len(head), len(head))
    assert row.n_above_reference == int((head > level).sum())
    assert row.share_above_reference == pytest.approx((head > level).mean())
    assert 0 < row.share_above_reference < 1
