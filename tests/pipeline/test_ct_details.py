"""CT details a real report may carry: SSDE, dose-check details, enhanced SOP class, images
that repeat an event's CTDIvol, calibration of projection units."""

import datetime as dt

import duckdb
import pytest

from pipeline import concepts as C
from pipeline.ingest import ingest, process_file
from synthetic_studies.sr import HAS_CONCEPT_MOD, code_item, container, datetime_item, num_item, text_item
from tests.helpers import KEY, demo_dataset, encode, pseudonymiser


def _first_event(ds, concept):
    return next(i for i in ds.ContentSequence if i.ConceptNameCodeSequence[0].CodeValue == concept.value)


def test_ssde_and_dose_check_details_are_read():
    _, ds = demo_dataset("tgh-ct1", exam="ct_head")
    event = [i for i in ds.ContentSequence if i.ConceptNameCodeSequence[0].CodeValue == "113819"][-1]
    dose = next(i for i in event.ContentSequence if i.ConceptNameCodeSequence[0].CodeValue == "113829")
    dose.ContentSequence.append(num_item(C.SIZE_SPECIFIC_DOSE_ESTIMATE, 21.5, C.UNIT_MGY))
    dose.ContentSequence.append(num_item(C.WATER_EQUIVALENT_DIAMETER, 172.0, C.UNIT_MM))
    event.ContentSequence.append(container(C.DOSE_CHECK_NOTIFICATION_DETAILS, [
        num_item(C.CTDIVOL_NOTIFICATION_VALUE, 80.0, C.UNIT_MGY),
        num_item(C.DLP_NOTIFICATION_VALUE, 1500.0, C.UNIT_MGY_CM),
    ]))
    o = process_file("ct.dcm", encode(ds), pseudonymiser())
    spiral = o.obj.ct_events[-1]
    assert (spiral.ssde_mgy, spiral.water_equivalent_diameter_mm) == (21.5, 172.0)
    assert spiral.dose_check_notification_ctdivol_mgy == 80.0
    assert spiral.dose_check_notification_dlp_mgy_cm == 1500.0
    assert spiral.dose_check_alert_ctdivol_mgy is None


def test_enhanced_sop_class_with_classic_structure_loads():
    spec, ds = demo_dataset("tgh-ct1")
    ds.SOPClassUID = ds.file_meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.88.76"
    o = process_file("enh.dcm", encode(ds), pseudonymiser())
    assert o.status == "loaded" and o.obj.kind.value == "rdsr_enhanced"
    assert len(o.obj.ct_events) == len(spec.ct_events)


def test_enhanced_report_without_classic_structure_is_quarantined_with_reason():
    _, ds = demo_dataset("tgh-ct1")
    ds.SOPClassUID = ds.file_meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.88.76"
    ds.ContentSequence = [text_item(C.COMMENT, "TID 10040 content would be here")]
    o = process_file("enh.dcm", encode(ds), pseudonymiser())
    assert (o.status, o.reason) == ("quarantined", "enhanced_rdsr_unsupported")


def test_calibration_factor_is_stored_not_applied():
    spec, ds = demo_dataset("tgh-xa1")
    acc = _first_event(ds, C.ACCUMULATED_XRAY_DOSE_DATA)
    acc.ContentSequence.append(container(C.CALIBRATION, [
        code_item(C._dcm("113794", "Dose Measurement Device"), ("15869005", "SCT", "Dosimeter"),
                  HAS_CONCEPT_MOD),
        datetime_item(C.CALIBRATION_DATETIME, dt.datetime(2026, 3, 2, 9, 0)),
        num_item(C.CALIBRATION_FACTOR, 1.08, C.UNIT_NONE),
        num_item(C.CALIBRATION_UNCERTAINTY, 5.0, C._ucum("%")),
        text_item(C._dcm("113724", "Calibration Responsible Party"), "Physics service"),
    ]))
    o = process_file("xa.dcm", encode(ds), pseudonymiser())
    plane_a = next(a for a in o.obj.accumulated if a.plane == "A")
    assert (plane_a.calibration_factor, plane_a.calibration_uncertainty_pct) == (1.08, 5.0)
    events_a = [e for e in spec.projection_events if e.plane == "A"]
    assert plane_a.dap_total_gy_cm2 == pytest.approx(sum(e.dap_gy_cm2 for e in events_a), rel=1e-9)


def test_ct_images_repeating_an_event_are_one_event(tmp_path):
    """Per-image CTDIvol repeats the event's value (PS3.3): two images of one event are one event."""
    spec, image = demo_dataset("mph-cr1")  # any header object; re-dressed as a CT image
    del image.ImageAndFluoroscopyAreaDoseProduct
    inbox = tmp_path / "in"
    inbox.mkdir()
    for n in (1, 2):
        image.SOPClassUID = image.file_meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.2"
        image.Modality = "CT"
        image.SOPInstanceUID = image.file_meta.MediaStorageSOPInstanceUID = f"2.25.99{n}"
        image.IrradiationEventUID = "2.25.4242"
        image.CTDIvol = 12.5
        (inbox / f"ct{n}.dcm").write_bytes(encode(image))
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    con = duckdb.connect(str(db), read_only=True)
    assert con.execute("select event_count, source_kind, ctdivol_max_mgy from study_dose").fetchall() == \
        [(1, "image_header", 12.5)]


def test_scanning_length_z_locations_are_read_as_table_positions(tmp_path):
    """TID 10014 Top / Bottom Z Location of Scanning Length (DCM 113897 / 113898, mm, PS3.16):
    table positions, so a negative value is kept (unlike a length); cm converts to mm."""
    _, ds = demo_dataset("tgh-ct1", exam="ct_head")
    events = [i for i in ds.ContentSequence if i.ConceptNameCodeSequence[0].CodeValue == "113819"]
    params = next(i for i in events[-1].ContentSequence
                  if i.ConceptNameCodeSequence[0].CodeValue == "113822")
    params.ContentSequence.append(num_item(C.TOP_Z_SCANNING_LENGTH, -12.5, C.UNIT_MM))
    params.ContentSequence.append(num_item(C.BOTTOM_Z_SCANNING_LENGTH, -14.75, C.UNIT_CM))
    inbox = tmp_path / "in"
    inbox.mkdir()
    (inbox / "ct.dcm").write_bytes(encode(ds))
    db = tmp_path / "k.duckdb"
    ingest([inbox], db, KEY)
    with duckdb.connect(str(db), read_only=True) as con:
        rows = con.execute("select top_z_scanning_length_mm, bottom_z_scanning_length_mm "
                           "from irradiation_event where top_z_scanning_length_mm is not null"
                           ).fetchall()
    assert rows == [(-12.5, -147.5)]
