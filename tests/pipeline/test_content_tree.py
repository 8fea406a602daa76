"""The walker matches concepts by (scheme, value), maps legacy codes, never uses meaning text."""

from pydicom.dataset import Dataset
from pydicom.sequence import Sequence

from pipeline import concepts as C
from pipeline.parsing.content_tree import code_key, find, first, parse_dt


def _item(value, scheme, meaning, value_type="CODE"):
    ds = Dataset()
    ds.ValueType = value_type
    name = Dataset()
    name.CodeValue, name.CodingSchemeDesignator, name.CodeMeaning = value, scheme, meaning
    ds.ConceptNameCodeSequence = Sequence([name])
    return ds


def _parent(*items):
    ds = Dataset()
    ds.ContentSequence = Sequence(list(items))
    return ds


def test_legacy_srt_codes_map_to_snomed_ct():
    # PS3.16 legacy SNOMED-RT codes (2011/2013 editions): P5-08000 CT, G-C0E8 Has Intent
    assert code_key("SRT", "P5-08000") == ("SCT", "77477000")
    assert code_key("SRT", "G-C0E8") == ("SCT", "363703001")
    assert code_key("SRT", "P5-06000") == ("SCT", "44491008")


def test_retired_dcm_codes_map_to_their_successors():
    # PS3.16: (113853, DCM) retired Irradiation Event UID -> (113769, DCM)
    assert code_key("DCM", "113853") == ("DCM", "113769")
    assert code_key("DCM", "113735") == ("DCM", "113824")


def test_find_ignores_meaning_text_and_matches_legacy_scheme():
    legacy = _item("P5-06000", "SRT", "Something else entirely")
    other = _item("113611", "DCM", "Fluoroscopy")  # right meaning, wrong code
    parent = _parent(other, legacy)
    assert find(parent, C.FLUOROSCOPY) == [legacy]


def test_find_filters_by_value_type():
    num = _item("113838", "DCM", "DLP", "NUM")
    text = _item("113838", "DCM", "DLP", "TEXT")
    parent = _parent(text, num)
    assert first(parent, C.DLP, "NUM") is num


def test_dicom_datetime_parsing():
    assert parse_dt("20240305101000.123456+0100").isoformat() == "2024-03-05T10:10:00.123456"
    assert parse_dt("20240305").isoformat() == "2024-03-05T00:00:00"
    assert parse_dt("2024030") is None


def test_a_warning_in_a_code_sequence_is_recorded_by_every_file_that_has_it():
    # Code sequences are decoded once per distinct bytes (content_tree._from_sequence); one
    # whose decoding warns must still warn for each file. A unit Code Value of 18 characters
    # exceeds the 16 of VR SH (PS3.5 6.2), which pydicom reports as a warning on reading.
    import pydicom.config

    from pipeline.ingest import process_file
    from pipeline.models import IssueKind
    from synthetic_studies.defects import find_num
    from tests.helpers import demo_dataset, encode, pseudonymiser

    settings = pydicom.config.settings
    before = settings.writing_validation_mode, settings.reading_validation_mode
    settings.writing_validation_mode = settings.reading_validation_mode = pydicom.config.IGNORE
    try:
        _, ds = demo_dataset("tgh-ct1")
        unit = find_num(ds, C.DLP).MeasuredValueSequence[0].MeasurementUnitsCodeSequence[0]
        unit.CodeValue = "mGy.cm" + " " * 12
        data = encode(ds)
    finally:
        settings.writing_validation_mode, settings.reading_validation_mode = before
    warned = []
    for name in ("a.dcm", "b.dcm", "c.dcm"):
        o = process_file(name, data, pseudonymiser())
        assert o.status == "loaded"
        assert o.obj.ct_events[0].dlp_mgy_cm is not None  # the unit still reads as mGy.cm
        warned.append(sorted(i.detail for i in o.obj.issues
                             if i.kind == IssueKind.PARSER_WARNING and "SH" in i.detail))
    assert warned[0] and warned[0] == warned[1] == warned[2]
