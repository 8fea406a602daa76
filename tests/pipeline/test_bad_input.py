"""The bad-input matrix: every case ends with an exact status and reason, nothing lost."""

import io
import math
import tarfile
import zipfile

import duckdb
import pydicom
import pydicom.config
import pytest
from pydicom.dataset import Dataset
from pydicom.sequence import Sequence
from pydicom.uid import (DeflatedExplicitVRLittleEndian, ExplicitVRBigEndian,
                         ImplicitVRLittleEndian)

from pipeline import concepts as C
from pipeline.ingest import ingest, process_file
from pipeline.models import IssueKind
from synthetic_studies.defects import find_num
from synthetic_studies.generator import make_basic_text_sr
from synthetic_studies.scenario import load_scenario
from tests.helpers import KEY, demo_dataset, encode, pseudonymiser


@pytest.fixture
def lenient_writing():
    """Some cases need values pydicom's strict writer refuses (NaN, over-long strings)."""
    settings = pydicom.config.settings
    before = settings.writing_validation_mode, settings.reading_validation_mode
    settings.writing_validation_mode = settings.reading_validation_mode = pydicom.config.IGNORE
    yield
    settings.writing_validation_mode, settings.reading_validation_mode = before


def _outcome(data: bytes, name="x.dcm"):
    return process_file(name, data, pseudonymiser())


def _ct():
    return demo_dataset("tgh-ct1")


def _dx():
    return demo_dataset("ovh-dx1")


def test_not_dicom():
    o = _outcome(b"Dose summary exported as text.\nNot a DICOM file.\n")
    assert (o.status, o.reason) == ("quarantined", "not_dicom")


def test_empty_file():
    o = _outcome(b"")
    assert (o.status, o.reason) == ("quarantined", "empty_file")


def test_truncated_file():
    _, ds = _ct()
    data = encode(ds)
    o = _outcome(data[: len(data) * 2 // 3])
    assert (o.status, o.reason) == ("quarantined", "truncated")
    assert "truncated" in o.detail


def test_dicom_without_preamble_loads():
    spec, ds = _ct()
    o = _outcome(encode(ds)[132:])  # file meta group kept, no preamble and no 'DICM'
    assert (o.status, o.reason) == ("loaded", None)
    assert sum(e.dlp_mgy_cm for e in o.obj.ct_events) == pytest.approx(
        sum(e.dlp_mgy_cm for e in spec.ct_events))


def test_bare_dataset_without_file_meta_loads():
    spec, ds = _ct()
    from pydicom.filebase import DicomBytesIO
    from pydicom.filewriter import write_dataset
    del ds.file_meta
    buffer = DicomBytesIO()
    buffer.is_little_endian, buffer.is_implicit_VR = True, True
    write_dataset(buffer, ds)  # a bare implicit-VR dataset: no preamble, no file meta
    data = buffer.getvalue()
    assert data[128:132] != b"DICM"
    o = _outcome(data)
    assert o.status == "loaded"
    assert len(o.obj.ct_events) == len(spec.ct_events)


@pytest.mark.parametrize("syntax", [ImplicitVRLittleEndian, DeflatedExplicitVRLittleEndian,
                                    ExplicitVRBigEndian])
def test_other_transfer_syntaxes_load(syntax):
    spec, ds = _dx()
    ds.file_meta.TransferSyntaxUID = syntax
    kwargs = {}
    if syntax == ExplicitVRBigEndian:
        kwargs = {"little_endian": False, "implicit_vr": False}
    buffer = io.BytesIO()
    ds.save_as(buffer, enforce_file_format=True, **kwargs)
    o = _outcome(buffer.getvalue())
    assert (o.status, o.reason) == ("loaded", None), o.detail
    dap = sum(e.dap_gy_cm2 for e in o.obj.projection_events)
    assert dap == pytest.approx(sum(e.dap_gy_cm2 for e in spec.projection_events), rel=1e-9)


def test_sr_that_is_not_a_dose_report_is_not_dose():
    spec, _ = _ct()
    ds = make_basic_text_sr(load_scenario(), spec, "2.25.1234567")
    o = _outcome(encode(ds))
    assert (o.status, o.reason) == ("not_dose", "not_a_dose_class")
    assert "Basic Text SR" in o.detail


def test_dose_sr_class_with_another_root_concept_is_quarantined():
    _, ds = _ct()
    ds.ConceptNameCodeSequence[0].CodeValue = "18748-4"
    ds.ConceptNameCodeSequence[0].CodingSchemeDesignator = "LN"
    o = _outcome(encode(ds))
    assert (o.status, o.reason) == ("quarantined", "not_a_dose_report")


def test_dose_sr_with_no_content_is_quarantined():
    _, ds = _ct()
    ds.ContentSequence = Sequence()
    o = _outcome(encode(ds))
    assert (o.status, o.reason) == ("quarantined", "empty_content_tree")


def test_dose_sr_without_device_context_loads_with_a_note():
    spec, ds = _ct()
    ds.ContentSequence = Sequence([i for i in ds.ContentSequence
                                   if i.RelationshipType != "HAS OBS CONTEXT"
                                   or i.ConceptNameCodeSequence[0].CodeValue == "113705"])
    o = _outcome(encode(ds))
    assert (o.status, o.reason) == ("loaded", "loaded_with_note")
    assert o.obj.device.device_observer_uid is None
    assert o.obj.device.serial_number == "VX128-00417"  # from the equipment module
    assert [i.kind for i in o.obj.issues] == [IssueKind.NO_DEVICE_CONTEXT]


def test_missing_unit_is_a_recorded_issue_and_null():
    _, ds = _dx()
    item = find_num(ds, C.DOSE_AREA_PRODUCT)
    del item.MeasuredValueSequence[0].MeasurementUnitsCodeSequence
    o = _outcome(encode(ds))
    assert o.status == "loaded"
    assert o.obj.projection_events[0].dap_gy_cm2 is None
    (issue,) = [i for i in o.obj.issues if i.kind == IssueKind.MISSING_UNIT]
    assert issue.concept_code == "DCM:122130"
    assert "no Measurement Units Code Sequence" in issue.detail


def test_unknown_unit_is_a_recorded_issue_and_null():
    _, ds = _ct()
    item = find_num(ds, C.DLP)
    item.MeasuredValueSequence[0].MeasurementUnitsCodeSequence[0].CodeValue = "mGy*cm"
    o = _outcome(encode(ds))
    assert o.obj.ct_events[0].dlp_mgy_cm is None
    (issue,) = [i for i in o.obj.issues if i.kind == IssueKind.UNKNOWN_UNIT]
    assert issue.raw_unit == "mGy*cm"


def test_negative_value_is_a_recorded_issue_and_null():
    _, ds = _dx()
    find_num(ds, C.DOSE_AREA_PRODUCT).MeasuredValueSequence[0].NumericValue = "-0.0001"
    o = _outcome(encode(ds))
    assert o.obj.projection_events[0].dap_gy_cm2 is None
    assert [i.kind for i in o.obj.issues] == [IssueKind.NEGATIVE_VALUE]


def test_nan_value_is_a_recorded_issue_and_null(lenient_writing):
    _, ds = _ct()
    find_num(ds, C.MEAN_CTDIVOL).MeasuredValueSequence[0].NumericValue = "NaN"
    o = _outcome(encode(ds))
    assert o.status == "loaded"
    assert IssueKind.NOT_A_NUMBER in [i.kind for i in o.obj.issues]
    assert o.obj.ct_events[0].ctdivol_mgy is None


def test_absurd_magnitude_is_a_recorded_issue_and_null():
    _, ds = _ct()
    find_num(ds, C.DLP).MeasuredValueSequence[0].NumericValue = "1000000"
    o = _outcome(encode(ds))
    assert o.obj.ct_events[0].dlp_mgy_cm is None
    assert [i.kind for i in o.obj.issues] == [IssueKind.IMPLAUSIBLE_VALUE]


def test_deeply_nested_content_tree_is_quarantined():
    from synthetic_studies.sr import container
    _, ds = _ct()
    node = container(C.COMMENT, [])
    for _ in range(80):
        node = container(C.COMMENT, [node])
    ds.ContentSequence.append(node)
    o = _outcome(encode(ds))
    assert (o.status, o.reason) == ("quarantined", "content_tree_too_deep")


def test_enormous_content_tree_is_quarantined():
    from pipeline.parsing import parse_dose_object
    from pipeline.errors import MalformedReportError
    _, ds = demo_dataset("tgh-xa1")
    with pytest.raises(MalformedReportError) as err:
        parse_dose_object(ds, pseudonymiser(), max_items=100)
    assert err.value.reason == "content_tree_too_large"


@pytest.mark.parametrize("charset, text", [
    ("ISO_IR 100", "Thorax, contrasté Å"),
    ("ISO_IR 192", "Rœntgen Brustkorb 胸部 — протокол"),
])
def test_non_ascii_character_sets(charset, text):
    _, ds = _dx()
    ds.SpecificCharacterSet = charset
    ds.StudyDescription = text
    for item in ds.ContentSequence:
        if item.get("ValueType") == "CONTAINER":
            for child in item.ContentSequence:
                if child.ValueType == "TEXT":
                    child.TextValue = text
    o = _outcome(encode(ds))
    assert o.status == "loaded"
    assert o.obj.study.study_description == text
    assert o.obj.projection_events[0].acquisition_protocol == text


def _ingest(tmp_path, inputs, name="w.duckdb"):
    db = tmp_path / name
    summary = ingest(inputs, db, KEY)
    con = duckdb.connect(str(db), read_only=True)
    return summary, con


def test_duplicate_sop_instance_under_another_name(tmp_path):
    _, ds = _ct()
    data = encode(ds)
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "a.dcm").write_bytes(data)
    (tmp_path / "in" / "b_copy.dcm").write_bytes(data)
    summary, con = _ingest(tmp_path, [tmp_path / "in"])
    rows = con.execute("select regexp_extract(path, '[^/]+$'), status, reason from source_object "
                       "order by 1").fetchall()
    assert rows == [("a.dcm", "loaded", None),
                    ("b_copy.dcm", "duplicate", "sop_instance_already_loaded")]
    assert con.execute("select count(*) from study_dose").fetchone() == (1,)


def test_two_cumulative_reports_count_each_event_once(tmp_path):
    spec, first = demo_dataset("mph-ct1", 1, cumulative=True)
    _, second = demo_dataset("mph-ct1", 2, cumulative=True)
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "r1.dcm").write_bytes(encode(first))
    (tmp_path / "in" / "r2.dcm").write_bytes(encode(second))
    _, con = _ingest(tmp_path, [tmp_path / "in"])
    n_events, dlp, n_reports = con.execute(
        "select event_count, dlp_total_mgy_cm, n_reports from study_dose").fetchone()
    assert n_events == len(spec.ct_events)
    assert dlp == pytest.approx(sum(e.dlp_mgy_cm for e in spec.ct_events), rel=1e-9)
    # every event taken from the later, complete report
    assert n_reports == 1
    assert con.execute("select count(*) from raw_ct_event").fetchone()[0] > n_events


def test_zip_with_path_traversal_member(tmp_path):
    _, ds = _ct()
    archive = tmp_path / "batch.zip"
    with zipfile.ZipFile(archive, "w") as z:
        z.writestr("reports/ok.dcm", encode(ds))
        z.writestr("../../etc/evil.dcm", encode(ds))
        z.writestr("/abs/evil2.dcm", b"x")
    summary, con = _ingest(tmp_path, [archive])
    rows = dict(con.execute("select regexp_extract(path, '!(.*)$', 1), status || ':' || "
                            "coalesce(reason, '') from source_object").fetchall())
    assert rows == {"reports/ok.dcm": "loaded:", "../../etc/evil.dcm": "quarantined:unsafe_archive_path",
                    "/abs/evil2.dcm": "quarantined:unsafe_archive_path"}
    assert not (tmp_path.parent / "etc" / "evil.dcm").exists()


def test_tar_gz_archive_loads(tmp_path):
    _, ds = _dx()
    data = encode(ds)
    archive = tmp_path / "batch.tar.gz"
    with tarfile.open(archive, "w:gz") as t:
        info = tarfile.TarInfo("day1/dx.dcm")
        info.size = len(data)
        t.addfile(info, io.BytesIO(data))
    summary, con = _ingest(tmp_path, [archive])
    assert summary.by_status["loaded"] == 1
    assert con.execute("select status from source_object").fetchall() == [("loaded",)]


def test_header_image_units(tmp_path):
    """(0018,115E) 420 dGy.cm2 in a CR header is 42 Gy.cm2 (PS3.3 C.8.7.8)."""
    spec, ds = demo_dataset("mph-cr1")
    ds.ImageAndFluoroscopyAreaDoseProduct = "420"
    o = _outcome(encode(ds))
    (event,) = o.obj.projection_events
    assert event.dap_gy_cm2 == pytest.approx(42.0, rel=1e-12)
    assert event.source_kind == "image_header"
    # (0040,8302) Entrance Dose in mGy is a surface dose (PS3.3 C.8.7.8), never Ka,r
    assert math.isclose(event.entrance_dose_mgy, spec.projection_events[0].dose_rp_mgy)
    assert event.dose_rp_mgy is None
