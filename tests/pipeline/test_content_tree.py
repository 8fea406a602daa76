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
