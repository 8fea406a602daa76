"""Files read back with pydicom and highdicom, and carry the manifest's values in DICOM units.

Unit factors (exact): 1 Gy.m2 = 1e4 Gy.cm2 (UCUM "Gy.m2", PS3.16 TID 10003 / TID 10007);
(0018,115E) Image and Fluoroscopy Area Dose Product is in dGy.cm2 (PS3.3 C.8.7.8), and
1 dGy.cm2 = 0.1 Gy.cm2; Dose (RP) is in Gy (UCUM "Gy", PS3.16 TID 10003B).
"""

import io
import math

import highdicom as hd
import pydicom
import pytest
from pydicom.sr.coding import Code

DOSE_SR = "1.2.840.10008.5.1.4.1.1.88.67"
DAP = Code("122130", "DCM", "Dose Area Product")
DAP_TOTAL = Code("113722", "DCM", "Dose Area Product Total")
DOSE_RP = Code("113738", "DCM", "Dose (RP)")
DLP = Code("113838", "DCM", "DLP")
DLP_TOTAL = Code("113813", "DCM", "CT Dose Length Product Total")
AGD = Code("111631", "DCM", "Average Glandular Dose")


def _clean_single_report(files, studies, modalities):
    s = studies[studies.modality.isin(modalities) & studies.defect.isna() & (studies.n_reports == 1)]
    f = files[files.defect.isna() & files.study.isin(s.study)]
    return f.merge(s, on="study", suffixes=("", "_study"))


def _nums(ds, concept):
    """(value, unit code) of every NUM named `concept`, found by highdicom (not our code)."""
    items = hd.sr.utils.find_content_items(ds, name=concept, recursive=True)
    return [(float(i.MeasuredValueSequence[0].NumericValue),
             i.MeasuredValueSequence[0].MeasurementUnitsCodeSequence[0].CodeValue) for i in items]


def test_pydicom_round_trip_is_lossless(corpus, files_manifest):
    clean = files_manifest[files_manifest.defect.isna()]
    for rel in clean.path:
        original = (corpus / rel).read_bytes()
        ds = pydicom.dcmread(io.BytesIO(original))
        buffer = io.BytesIO()
        ds.save_as(buffer, enforce_file_format=True)
        assert buffer.getvalue() == original, rel


def test_highdicom_parses_every_content_tree(corpus, files_manifest):
    clean = files_manifest[files_manifest.defect.isna() & (files_manifest.sop_class_uid == DOSE_SR)]
    assert len(clean) > 50
    for rel in clean.path:
        ds = pydicom.dcmread(corpus / rel)
        tree = hd.sr.ContentSequence.from_sequence(ds.ContentSequence)
        assert len(tree) == len(ds.ContentSequence)


def test_sr_dap_in_gy_m2_matches_manifest_gy_cm2(corpus, files_manifest, studies_manifest):
    rows = _clean_single_report(files_manifest, studies_manifest, ["DX", "RF", "XA"])
    rows = rows[rows.kind == "rdsr"]
    assert len(rows) > 20
    for row in rows.itertuples():
        ds = pydicom.dcmread(corpus / row.path)
        events = _nums(ds, DAP)
        totals = _nums(ds, DAP_TOTAL)  # one per plane (TID 10002)
        assert {unit for _, unit in events + totals} == {"Gy.m2"}
        assert math.isclose(sum(v for v, _ in events) * 1e4, row.dap_total_gy_cm2, rel_tol=1e-9)
        assert math.isclose(sum(v for v, _ in totals) * 1e4, row.dap_total_gy_cm2, rel_tol=1e-6)
        rp = _nums(ds, DOSE_RP)
        assert {unit for _, unit in rp} == {"Gy"}
        assert math.isclose(sum(v for v, _ in rp) * 1e3, row.dose_rp_total_mgy, rel_tol=1e-9)


def test_header_dap_in_dgy_cm2_matches_manifest_gy_cm2(corpus, files_manifest, studies_manifest):
    rows = _clean_single_report(files_manifest, studies_manifest, ["CR"])
    assert (rows.kind == "image_header").all() and len(rows) > 5
    for study, group in rows.groupby("study"):
        dap_dgy_cm2 = [float(pydicom.dcmread(corpus / p).ImageAndFluoroscopyAreaDoseProduct)
                       for p in group.path]
        assert len(dap_dgy_cm2) == group.event_count.iloc[0]
        assert math.isclose(sum(dap_dgy_cm2) * 0.1, group.dap_total_gy_cm2.iloc[0], rel_tol=1e-9)


def test_worked_unit_examples():
    """PS3.16/PS3.3 units with a worked value: 0.0042 Gy.m2 = 42 Gy.cm2 = 420 dGy.cm2."""
    from synthetic_studies.generator import _gy_m2
    assert math.isclose(_gy_m2(42.0), 0.0042, rel_tol=1e-15)
    assert math.isclose(420 * 0.1, 42.0)


def test_ct_dlp_events_sum_to_total_and_manifest(corpus, files_manifest, studies_manifest):
    rows = _clean_single_report(files_manifest, studies_manifest, ["CT"])
    assert len(rows) > 20
    for row in rows.itertuples():
        ds = pydicom.dcmread(corpus / row.path)
        (total, unit), = _nums(ds, DLP_TOTAL)
        assert unit == "mGy.cm"
        events = _nums(ds, DLP)
        assert math.isclose(sum(v for v, _ in events), row.dlp_total_mgy_cm, rel_tol=1e-9)
        assert math.isclose(total, row.dlp_total_mgy_cm, rel_tol=1e-6)


def test_mammography_agd_in_mgy_matches_manifest(corpus, files_manifest, studies_manifest):
    rows = _clean_single_report(files_manifest, studies_manifest, ["MG"])
    assert len(rows) > 10
    for row in rows.itertuples():
        values = _nums(pydicom.dcmread(corpus / row.path), AGD)
        assert len(values) == 4 and {u for _, u in values} == {"mGy"}
        assert math.isclose(sum(v for v, _ in values), row.agd_mgy, rel_tol=1e-9)


@pytest.mark.parametrize("value", [0.075, 7.5e-06, 1234.5678, 0.001920149, 42.0, 6.339e-06])
def test_decimal_strings_fit_and_read_back_exactly(value):
    from synthetic_studies.sr import format_ds
    text = format_ds(value)
    assert len(text) <= 16 and float(text) == value
