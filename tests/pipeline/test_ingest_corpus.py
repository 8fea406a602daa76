"""The synthetic corpus ingests with every file accounted for and totals equal to the manifest."""

import hashlib
import hmac
import re
import subprocess

import duckdb
import numpy as np
import pandas as pd
import pytest

from pipeline.ingest import ingest
from tests.helpers import KEY, require_tool

DEFECT_STATUS = {
    "truncated": ("quarantined", "truncated"),
    "not_dicom": ("quarantined", "not_dicom"),
    "not_dose_sr": ("not_dose", "not_a_dose_class"),
    "duplicate_copy": ("duplicate", "sop_instance_already_loaded"),
    "missing_unit": ("loaded", None),
    "zero_dap": ("loaded", None),
    "implausible_value": ("loaded", None),
}


@pytest.fixture(scope="module")
def con(warehouse):
    db, _ = warehouse
    connection = duckdb.connect(str(db), read_only=True)
    yield connection
    connection.close()


def _study_key(uid: str) -> str:
    return hmac.new(KEY, f"study\x1f{uid}".encode(), hashlib.sha256).hexdigest()[:32]


def test_every_file_is_accounted_for_exactly_once(corpus, con, files_manifest):
    on_disk = sorted(str(p.resolve()) for p in corpus.rglob("*") if p.is_file())
    recorded = con.execute("select path from source_object order by path").fetchall()
    assert [r[0] for r in recorded] == on_disk
    statuses = dict(con.execute("select status, count(*) from source_object group by 1").fetchall())
    assert set(statuses) == {"loaded", "duplicate", "not_dose", "quarantined"}


def test_each_defect_ends_with_its_status_and_reason(corpus, con, files_manifest):
    rows = con.execute("select path, status, reason from source_object").df()
    rows["rel"] = [p[len(str(corpus.resolve())) + 1:] for p in rows.path]
    merged = files_manifest.merge(rows, left_on="path", right_on="rel", suffixes=("", "_wh"))
    assert len(merged) == len(files_manifest)
    for row in merged.itertuples():
        expected = DEFECT_STATUS.get(row.defect, ("loaded", None)) if row.defect else ("loaded", None)
        assert (row.status, row.reason if isinstance(row.reason, str) else None) == expected, row.path
    # the manifest parquet files are not DICOM, and are said so
    parquet = rows[rows.path.str.endswith(".parquet")]
    assert set(parquet.reason) == {"not_dicom"} and len(parquet) == 2


def test_study_totals_equal_the_manifest(con, studies_manifest):
    truth = studies_manifest[studies_manifest.defect.isna()].copy()
    truth["study_key"] = truth.study_instance_uid.map(_study_key)
    got = con.execute("select * from study_dose").df()
    merged = truth.merge(got, on="study_key", suffixes=("_true", ""), how="left", indicator=True)
    assert (merged._merge == "both").all()
    assert len(got) == len(studies_manifest)  # one row per study: one unit per study here
    for q in ["dap_total_gy_cm2", "dose_rp_total_mgy", "fluoro_time_total_s", "dlp_total_mgy_cm",
              "ctdivol_mgy", "event_count", "entrance_dose_total_mgy"]:
        a, b = merged[f"{q}_true"].astype(float), merged[q].astype(float)
        assert np.allclose(a, b, rtol=1e-9, equal_nan=True), q
    assert np.allclose(merged.agd_mgy, merged.agd_total_mgy, rtol=1e-9, equal_nan=True)
    assert (merged.modality_true == merged.modality).all()
    assert (merged.source_kind_true == merged.source_kind).all()
    assert np.allclose(merged.patient_weight_kg_true, merged.patient_weight_kg, equal_nan=True)
    assert set(got.patient_sex.dropna()) <= {"F", "M", "O"}


def test_defects_become_value_issues(con, studies_manifest):
    kinds = dict(con.execute("select kind, count(*) from value_issue group by 1").fetchall())
    n = studies_manifest.defect.value_counts()
    assert kinds["missing_unit"] == n["missing_unit"]
    assert kinds["implausible_value"] == n["implausible_value"]
    assert kinds["zero_value"] == n["zero_dap"]
    # a zero or absurd event breaks the report's own sum: recorded as total_mismatch
    assert kinds["total_mismatch"] >= n["zero_dap"] + n["implausible_value"]


def test_the_absurd_dlp_does_not_reach_the_study_total(con, studies_manifest):
    bad = studies_manifest[studies_manifest.defect == "implausible_value"]
    for row in bad.itertuples():
        (dlp,) = con.execute("select dlp_total_mgy_cm from study_dose where study_key = ?",
                             [_study_key(row.study_instance_uid)]).fetchone()
        assert dlp == pytest.approx(row.dlp_total_mgy_cm, rel=1e-6)  # the stated total is used


def test_public_views_have_their_grain(con):
    for view, key in [("irradiation_event", "event_uid"), ("device", "device_key"),
                      ("study_dose", "study_key || device_key"),
                      ("source_object", "path || sha256")]:
        n, n_keys = con.execute(f"select count(*), count(distinct {key}) from {view}").fetchone()
        assert n > 0 and n == n_keys, view


def test_public_interface_columns(con):
    expected = {
        "source_object": ["path", "sha256", "sop_instance_uid", "sop_class_uid", "status", "reason", "run_id"],
        "study_dose": ["study_key", "patient_key", "device_key", "site", "modality", "study_date",
                       "study_description", "patient_age_years", "patient_sex", "patient_weight_kg",
                       "patient_height_m", "event_count", "dap_total_gy_cm2", "dose_rp_total_mgy",
                       "fluoro_time_total_s", "dlp_total_mgy_cm", "ctdivol_mgy", "source_kind",
                       "entrance_dose_total_mgy", "dlp_method"],
        "irradiation_event": ["event_uid", "study_key", "device_key", "event_type",
                              "acquisition_protocol", "target_region", "kvp", "tube_current_ma",
                              "exposure_time_s", "dap_gy_cm2", "dose_rp_mgy", "ctdivol_mgy",
                              "dlp_mgy_cm", "ctdi_phantom", "scanning_length_mm", "pitch_factor",
                              "agd_mgy", "compressed_breast_thickness_mm", "entrance_dose_mgy",
                              "positioner_primary_angle_deg", "positioner_secondary_angle_deg",
                              "distance_source_to_isocenter_mm", "distance_source_to_detector_mm",
                              "table_longitudinal_mm", "table_lateral_mm", "table_height_mm",
                              "collimated_field_area_m2"],
        "device": ["device_key", "site", "modality", "manufacturer", "model", "serial_number",
                   "station_name", "device_observer_uid"],
    }
    for view, columns in expected.items():
        have = [r[0] for r in con.execute(f"describe {view}").fetchall()]
        assert set(columns) <= set(have), (view, set(columns) - set(have))


def test_devices_match_the_scenario(con):
    devices = con.execute("select site, modality, serial_number from device order by 3").fetchall()
    from synthetic_studies.scenario import load_scenario
    scenario = load_scenario()
    expected = sorted((scenario.sites[d.site].institution, d.modality, d.serial)
                      for d in scenario.devices)
    assert sorted(devices, key=lambda r: r[2]) == sorted(expected, key=lambda r: r[2])


def test_no_direct_identifiers_and_no_key_in_the_warehouse(warehouse, studies_manifest):
    db, _ = warehouse
    blob = db.read_bytes()
    assert KEY not in blob
    for pid in studies_manifest.patient_id.head(50):
        assert pid.encode() not in blob
    assert b"Synthetic^Patient" not in blob


def test_rerun_changes_nothing(corpus, warehouse, tmp_path):
    db, first = warehouse
    copy = tmp_path / "again.duckdb"
    copy.write_bytes(db.read_bytes())
    con = duckdb.connect(str(copy), read_only=True)
    before = {t: con.execute(f"select count(*) from {t}").fetchone()[0]
              for t in ("raw_source_object", "raw_dose_object", "raw_ct_event",
                        "raw_projection_event", "raw_value_issue")}
    con.close()
    again = ingest([corpus], copy, KEY)
    assert again.unchanged == again.seen == first.seen
    assert sum(again.by_status.values()) == 0
    con = duckdb.connect(str(copy), read_only=True)
    after = {t: con.execute(f"select count(*) from {t}").fetchone()[0] for t in before}
    assert after == before


_NUM = re.compile(r'<contains NUM:\(,,"(?P<name>[^"]+)"\)="(?P<value>[^"]+)" \((?P<unit>[^,]+),UCUM')


def test_values_agree_with_dcmtk_dsrdump(corpus, con, files_manifest):
    """DCMTK dsrdump, an independent reader, sees the same DLP, CTDIvol, DAP and Dose (RP)."""
    tool = require_tool("dsrdump")
    factors = {("DLP", "mGy.cm"): ("dlp_mgy_cm", 1.0), ("Mean CTDIvol", "mGy"): ("ctdivol_mgy", 1.0),
               ("Dose Area Product", "Gy.m2"): ("dap_gy_cm2", 1e4),
               ("Dose (RP)", "Gy"): ("dose_rp_mgy", 1e3),
               # TID 10003B/C geometry, as the skin-dose model reads it
               ("Positioner Primary Angle", "deg"): ("positioner_primary_angle_deg", 1.0),
               ("Positioner Secondary Angle", "deg"): ("positioner_secondary_angle_deg", 1.0),
               ("Distance Source to Isocenter", "mm"): ("source_to_isocenter_mm", 1.0),
               ("Table Longitudinal Position", "mm"): ("table_longitudinal_mm", 1.0),
               ("Table Lateral Position", "mm"): ("table_lateral_mm", 1.0),
               ("Table Height Position", "mm"): ("table_height_mm", 1.0),
               ("Collimated Field Area", "m2"): ("collimated_field_area_cm2", 1e4)}
    clean = files_manifest[files_manifest.defect.isna() & (files_manifest.kind == "rdsr")]
    sample = pd.concat([g.head(3) for _, g in clean.groupby(clean.path.str.split("/").str[1])])
    checked = 0
    for rel in sample.path:
        out = subprocess.run([tool, str(corpus / rel)], capture_output=True, text=True, check=True).stdout
        sop = files_manifest.loc[files_manifest.path == rel, "sop_instance_uid"].iloc[0]
        for (name, unit), (column, factor) in factors.items():
            dumped = sorted(float(m["value"]) * factor for m in _NUM.finditer(out)
                            if m["name"] == name and m["unit"] == unit)
            if not dumped:
                continue
            table = "raw_ct_event" if column in ("dlp_mgy_cm", "ctdivol_mgy") else "raw_projection_event"
            stored = sorted(r[0] for r in con.execute(
                f"select {column} from {table} where sop_instance_uid = ? and {column} is not null",
                [sop]).fetchall())
            assert np.allclose(dumped, stored, rtol=1e-12), (rel, name)
            checked += 1
    assert checked > 20
