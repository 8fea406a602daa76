"""Cumulative CT effective-dose estimate per pseudonymous patient over 12 months."""

import datetime as dt

import duckdb

from pipeline.audit import run_audit
from pipeline.ingest import ingest
from synthetic_studies.defects import find_num
from synthetic_studies.generator import make_dataset
from synthetic_studies.sampling import make_study
from synthetic_studies.scenario import load_scenario
from pipeline import concepts as C
from tests.helpers import KEY, encode


def _cap_studies(n):
    scenario = load_scenario()
    found = []
    for index in range(3000):
        spec = make_study(scenario, 7, index, 3000, 3)
        if spec.exam == "ct_chest_abdomen_pelvis" and spec.age_years >= 18 and len(spec.reports) == 1:
            found.append(make_dataset(scenario, spec, spec.reports[0]))
        if len(found) == n:
            return found
    raise LookupError


def test_repeated_ct_of_one_patient_raises_the_cumulative_alert(tmp_path):
    inbox = tmp_path / "in"
    inbox.mkdir()
    for n, ds in enumerate(_cap_studies(4)):
        if n < 3:  # three studies of one patient with a high DLP each (E ~ 0.015 x 3000 = 45 mSv)
            ds.PatientID, ds.IssuerOfPatientID = "REPEAT-1", "TEST"
            find_num(ds, C.DLP).MeasuredValueSequence[0].NumericValue = "3000"
        (inbox / f"cap{n}.dcm").write_bytes(encode(ds))
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
    con = duckdb.connect(str(db), read_only=True)
    rows = con.execute("select patient_key, value, threshold, unit, source from dose_alerts "
                       "where rule = 'cumulative_effective_dose_12m'").fetchall()
    assert len(rows) == 1
    _, value, threshold, unit, source = rows[0]
    assert value > 100 and (threshold, unit) == (100.0, "mSv")
    assert "3 CT studies in 12 months" in source and "population-average" in source
