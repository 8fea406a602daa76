"""The corpus on disk and its manifest agree, and generation is deterministic."""

import hashlib
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from synthetic_studies.write import write_corpus

REQUIRED_FILE_COLUMNS = {"path", "sop_class_uid", "study", "defect"}
TRUTH_COLUMNS = {"dap_total_gy_cm2", "dlp_total_mgy_cm", "ctdivol_mgy", "dose_rp_total_mgy",
                 "agd_mgy", "fluoro_time_total_s"}


def _digests(root: Path) -> dict[str, str]:
    return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file()}


def test_every_file_on_disk_is_in_the_manifest_and_back(corpus, files_manifest):
    on_disk = {str(p.relative_to(corpus)) for p in corpus.rglob("*.dcm")}
    assert on_disk == set(files_manifest["path"])
    assert REQUIRED_FILE_COLUMNS <= set(files_manifest.columns)
    assert files_manifest["path"].is_unique


def test_every_study_has_files_and_truths(studies_manifest, files_manifest):
    assert studies_manifest["study"].is_unique
    assert set(studies_manifest["study"]) == set(files_manifest["study"].dropna())
    assert TRUTH_COLUMNS <= set(studies_manifest.columns)
    ct = studies_manifest[studies_manifest.modality == "CT"]
    assert ct["dlp_total_mgy_cm"].notna().all() and (ct["dlp_total_mgy_cm"] > 0).all()
    proj = studies_manifest[studies_manifest.modality.isin(["DX", "CR", "RF", "XA"])]
    assert proj["dap_total_gy_cm2"].notna().all() and (proj["dap_total_gy_cm2"] > 0).all()
    mg = studies_manifest[studies_manifest.modality == "MG"]
    assert mg["agd_mgy"].notna().all() and mg["dap_total_gy_cm2"].isna().all()
    fluoro = studies_manifest[studies_manifest.modality.isin(["RF", "XA"])]
    assert (fluoro["fluoro_time_total_s"] > 0).all()


def test_every_defect_kind_is_present_and_flagged(files_manifest):
    kinds = set(files_manifest["defect"].dropna())
    assert kinds == {"truncated", "not_dicom", "not_dose_sr", "missing_unit", "zero_dap",
                     "implausible_value", "duplicate_copy"}


def test_patients_look_real_enough(studies_manifest):
    s = studies_manifest
    assert set(s["patient_sex"]) <= {"F", "M"}
    assert (s.loc[s.modality == "MG", "patient_sex"] == "F").all()
    paediatric = s[s.patient_age_years < 16]
    assert 0 < len(paediatric) < 0.15 * len(s)
    assert 0.15 < s["patient_weight_kg"].isna().mean() < 0.45
    adults = s[(s.patient_age_years >= 18) & s.patient_weight_kg.notna()]
    assert 60 < adults["patient_weight_kg"].median() < 90
    # some patients come back (cumulative dose per patient needs them)
    assert s["patient_id"].duplicated().any()


def test_same_seed_gives_byte_identical_output_whatever_the_workers(tmp_path):
    a = tmp_path / "a"
    b = tmp_path / "b"
    write_corpus(a, seed=11, months=2, n_studies=60, workers=1)
    write_corpus(b, seed=11, months=2, n_studies=60, workers=2)
    assert _digests(a) == _digests(b)


def test_another_seed_gives_other_studies(tmp_path):
    write_corpus(tmp_path / "a", seed=11, months=1, n_studies=30, workers=1)
    write_corpus(tmp_path / "b", seed=12, months=1, n_studies=30, workers=1)
    ua = set(pd.read_parquet(tmp_path / "a" / "studies.parquet")["study_instance_uid"])
    ub = set(pd.read_parquet(tmp_path / "b" / "studies.parquet")["study_instance_uid"])
    assert not ua & ub


def test_months_span_the_requested_calendar(studies_manifest):
    months = sorted(studies_manifest["study_datetime"].dt.strftime("%Y-%m").unique())
    assert months == ["2026-09", "2026-10", "2026-11"]


def test_synth_command_writes_the_corpus(tmp_path):
    result = CliRunner().invoke(app, ["synth", "--out", str(tmp_path / "c"), "--seed", "3",
                                      "--months", "1", "--studies", "25"])
    assert result.exit_code == 0, result.output
    assert "25" in result.output
    assert len(pd.read_parquet(tmp_path / "c" / "studies.parquet")) == 25


@pytest.mark.parametrize("args", [["--studies", "0"], ["--months", "0"]])
def test_synth_rejects_empty_requests(tmp_path, args):
    result = CliRunner().invoke(app, ["synth", "--out", str(tmp_path / "c"), *args])
    assert result.exit_code != 0
