"""`kerma survey`: one CSV per exam type with the per-room figures of national dose surveys."""

from __future__ import annotations

import shutil

import duckdb
import numpy as np
import pandas as pd
from typer.testing import CliRunner

from pipeline.cli import app


def test_survey_writes_one_csv_per_exam_type_with_room_medians(warehouse, tmp_path):
    db = tmp_path / "kerma.duckdb"
    shutil.copyfile(warehouse[0], db)
    out = tmp_path / "survey"
    result = CliRunner().invoke(app, ["survey", "--warehouse", str(db), "--period", "2026-09",
                                      "--out", str(out)], terminal_width=200)
    assert result.exit_code == 0, result.output
    ct_head = pd.read_csv(out / "ct_head.csv")
    assert {"room", "n_dlp", "median_dlp_mgy_cm", "mean_dlp_mgy_cm", "median_ctdivol_mgy",
            "median_age_years", "median_weight_kg", "median_kvp", "reference_sets"} <= set(ct_head.columns)
    # independent check: numpy's median and mean of the study DLPs of each adult room
    with duckdb.connect(str(db), read_only=True) as con:
        raw = con.execute("select device_key, dlp_total_mgy_cm, patient_age_years from study_dose "
                          "where exam_type = 'ct_head' and study_date >= '2026-09-01' "
                          "and study_date < '2026-10-01' and dlp_total_mgy_cm is not null").df()
    adult = raw[raw.patient_age_years >= 16]
    rows = ct_head[ct_head.population == "adult"].set_index("device_key")
    assert len(rows) == adult.device_key.nunique() > 0
    for device, values in adult.groupby("device_key")["dlp_total_mgy_cm"]:
        assert rows.loc[device, "n_dlp"] == len(values)
        assert np.isclose(rows.loc[device, "median_dlp_mgy_cm"], np.median(values), rtol=1e-5)
        assert np.isclose(rows.loc[device, "mean_dlp_mgy_cm"], np.mean(values), rtol=1e-5)
    assert (rows["reference_sets"] == "ukhsa_adult_ct_2022").all()
    assert (out / "dx_chest_pa.csv").exists()
