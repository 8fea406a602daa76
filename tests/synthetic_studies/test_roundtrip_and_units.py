"""Files read back with pydicom and highdicom, and carry the manifest's values in DICOM units.

Unit factors (exact): 1 Gy.m2 = 1e4 Gy.cm2 (UCUM "Gy.m2", PS3.16 TID 10003 / TID 10007);
(0018,115E) Image and Fluoroscopy Area Dose Product is in dGy.cm2 (PS3.3 C.8.7.8), and
1 dGy.cm2 = 0.1 Gy.cm2; Dose (RP) is in Gy (UCUM "Gy", PS3.16 TID 10003B).
Header images beside an RDSR: Organ Dose (0040,0316) is in dGy (PS3.3 C.8.7.8), and
1 dGy = 100 mGy, against Average Glandular Dose in mGy (UCUM "mGy", PS3.16 TID 10003);
CTDIvol (0018,9345) is in mGy (PS3.3 C.8.2.1), as is Mean CTDIvol (UCUM "mGy",
PS3.16 TID 10013).
"""

import io
import math

import highdicom as hd
import pydicom
import pytest

from pydicom.sr.coding import Code

from synthetic_studies.scenario import load_scenario

DOSE_SR = "1.2.840.10008.5.1.4.1.1.88.67"
DAP = Code("122130", "DCM", "Dose Area Product")
DAP_TOTAL = Code("113722", "DCM", "Dose Area Product Total")
DOSE_RP = Code("113738", "DCM", "Dose (RP)")
DLP = Code("113838", "DCM", "DLP")
DLP_TOTAL = Code("113813", "DCM", "CT Dose Length Product Total")
AGD = Code("111631", "DCM", "Average Glandular Dose")
EVENT_UID = Code("113769", "DCM", "Irradiation Event UID")
CT_ACQUISITION = Code("113819", "DCM", "CT Acquisition")
MEAN_CTDIVOL = Code("113830", "DCM", "Mean CTDIvol")
CTDIW_PHANTOM_TYPE = Code("113835", "DCM", "CTDIw Phantom Type")
PITCH_FACTOR = Code("113828", "DCM", "Pitch Factor")
IRRADIATION_EVENT_XRAY_DATA = Code("113706", "DCM", "Irradiation Event X-Ray Data")
COMPRESSION_THICKNESS = Code("111633", "DCM", "Compression Thickness")
CT_IMAGE = "1.2.840.10008.5.1.4.1.1.2"
MG_IMAGE = "1.2.840.10008.5.1.4.1.1.1.2"


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
    rows = rows[rows.kind == "rdsr"]  # header images of ovh-ct1 are checked below
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
    rows = rows[rows.kind == "rdsr"]  # header images of ovh-mg1 are checked below
    assert len(rows) > 10
    views = {exam: len(spec.events) for exam, spec in load_scenario().exams.items()}
    assert views["mg_screening"] == 4 and views["mg_diagnostic"] == 2  # the demo's archetypes
    for row in rows.itertuples():
        values = _nums(pydicom.dcmread(corpus / row.path), AGD)
        assert len(values) == views[row.exam] and {u for _, u in values} == {"mGy"}
        assert math.isclose(sum(v for v, _ in values), row.agd_mgy, rel_tol=1e-9)


@pytest.mark.parametrize("value", [0.075, 7.5e-06, 1234.5678, 0.001920149, 42.0, 6.339e-06])
def test_decimal_strings_fit_and_read_back_exactly(value):
    from synthetic_studies.sr import format_ds
    text = format_ds(value)
    assert len(text) <= 16 and float(text) == value


# --- header images beside the RDSR (units with header_images: ovh-ct1, ovh-mg1) ------------

def _study_files(files, studies, device):
    """Clean studies of `device`: {study: (rdsr dataset, [image datasets])}."""
    s = studies[(studies.device == device) & studies.defect.isna()]
    f = files[files.defect.isna() & files.study.isin(s.study)]
    return s, f


def _event_items(rdsr, container_concept):
    """{Irradiation Event UID: event container} of an RDSR, found by highdicom."""
    out = {}
    for item in hd.sr.utils.find_content_items(rdsr, name=container_concept, recursive=True):
        (uid_item,) = hd.sr.utils.find_content_items(item, name=EVENT_UID)
        out[uid_item.UID] = item
    return out


def test_mammography_header_organ_dose_in_dgy_matches_rdsr_and_manifest(
        corpus, files_manifest, studies_manifest):
    studies, files = _study_files(files_manifest, studies_manifest, "ovh-mg1")
    assert len(studies) > 10
    views = {exam: len(spec.events) for exam, spec in load_scenario().exams.items()}
    for study in studies.itertuples():
        mine = files[files.study == study.study]
        (rdsr_path,) = mine.loc[mine.kind == "rdsr", "path"]
        events = _event_items(pydicom.dcmread(corpus / rdsr_path), IRRADIATION_EVENT_XRAY_DATA)
        images = [pydicom.dcmread(corpus / p) for p in mine.loc[mine.kind == "image_header", "path"]]
        n_views = views[study.exam]  # 4 for screening, 2 for the unmapped diagnostic archetype
        assert len(images) == len(events) == study.event_count == study.n_header_images == n_views
        assert {ds.SOPClassUID for ds in images} == {MG_IMAGE}
        # PS3.3 C.8.7.8: Organ Dose (0040,0316) in dGy; 1 dGy = 100 mGy
        agd_mgy = [float(ds.OrganDose) * 100.0 for ds in images]
        assert math.isclose(sum(agd_mgy), study.agd_mgy, rel_tol=1e-9)
        assert all(ds.OrganExposed == "BREAST" for ds in images)
        uids = [ds.IrradiationEventUID for ds in images]
        assert len(set(uids)) == n_views and set(uids) <= set(events)
        for ds, agd in zip(images, agd_mgy):
            event = events[ds.IrradiationEventUID]
            ((sr_agd, unit),) = _nums(event, AGD)  # PS3.16 TID 10003: mGy
            assert unit == "mGy" and math.isclose(agd, sr_agd, rel_tol=1e-9)
            # PS3.3 C.8.11.5: Body Part Thickness (0018,11A0) in mm; TID 10003C: mm
            ((thickness, unit),) = _nums(event, COMPRESSION_THICKNESS)
            assert unit == "mm" and float(ds.BodyPartThickness) == thickness


def test_ct_header_ctdivol_in_mgy_matches_the_rdsr_event(corpus, files_manifest,
                                                         studies_manifest):
    studies, files = _study_files(files_manifest, studies_manifest, "ovh-ct1")
    assert len(studies) > 10
    checked = 0
    for study in studies.itertuples():
        mine = files[files.study == study.study]
        (rdsr_path,) = mine.loc[mine.kind == "rdsr", "path"]
        events = _event_items(pydicom.dcmread(corpus / rdsr_path), CT_ACQUISITION)
        images = [pydicom.dcmread(corpus / p) for p in mine.loc[mine.kind == "image_header", "path"]]
        # one image per acquisition with a CT Dose container (ovh-ct1 reports none for
        # its localizers), and no image of a localizer
        with_dose = {u for u, item in events.items() if _nums(item, MEAN_CTDIVOL)}
        assert {ds.IrradiationEventUID for ds in images} == with_dose
        assert len(images) == study.n_header_images == study.event_count - 1
        for ds in images:
            assert ds.SOPClassUID == CT_IMAGE
            event = events[ds.IrradiationEventUID]
            ((ctdivol, unit),) = _nums(event, MEAN_CTDIVOL)
            assert unit == "mGy" and float(ds.CTDIvol) == ctdivol  # PS3.3 C.8.2.1: mGy
            (phantom,) = hd.sr.utils.find_content_items(event, name=CTDIW_PHANTOM_TYPE,
                                                        recursive=True)
            header_phantom = ds.CTDIPhantomTypeCodeSequence[0].CodeValue
            assert header_phantom == phantom.ConceptCodeSequence[0].CodeValue
            assert header_phantom in {"113690", "113691"}  # PS3.16 CID 4052 IEC phantoms
            if "SpiralPitchFactor" in ds:
                ((pitch, _),) = _nums(event, PITCH_FACTOR)
                assert ds.SpiralPitchFactor == pitch
                assert math.isclose(ds.TableFeedPerRotation,
                                    pitch * ds.TotalCollimationWidth, rel_tol=1e-12)
            checked += 1
    assert checked >= len(studies)


def test_header_images_do_not_change_what_a_study_reports(studies_manifest, files_manifest):
    """Images beside an RDSR add no events and no reports: the study stays an RDSR study."""
    s = studies_manifest
    with_images = s[s.device.isin(["ovh-ct1", "ovh-mg1"])]
    assert (with_images.source_kind == "rdsr").all() and (with_images.n_reports == 1).all()
    assert (with_images.n_header_images > 0).all()
    assert (s.loc[~s.device.isin(["ovh-ct1", "ovh-mg1", "mph-cr1"]), "n_header_images"] == 0).all()
    cr = s[s.device == "mph-cr1"]
    assert (cr.n_header_images == cr.n_reports).all() and (cr.n_reports == cr.event_count).all()
    images = files_manifest[files_manifest.kind == "image_header"]
    assert images.irradiation_event_uid.notna().all() and images.irradiation_event_uid.is_unique
    assert files_manifest.loc[files_manifest.kind != "image_header",
                              "irradiation_event_uid"].isna().all()


def test_worked_organ_dose_example():
    """PS3.3 C.8.7.8: Organ Dose in dGy; an AGD of 1.25 mGy is written "0.0125" (dGy)."""
    from synthetic_studies.sr import format_ds
    assert format_ds(1.25 / 100.0) == "0.0125"
    assert math.isclose(float("0.0125") * 100.0, 1.25, rel_tol=1e-12)
