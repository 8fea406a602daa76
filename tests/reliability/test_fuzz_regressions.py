"""Crashes the fuzzer found, each pinned by a deterministic case (fixed in the parser)."""

from __future__ import annotations

import datetime as dt

from pipeline import concepts as C
from pipeline.ingest import _batch_tables, process_file
from pipeline.models import IssueKind
from synthetic_studies.defects import find_num
from tests.helpers import demo_dataset, encode, pseudonymiser
from tests.reliability.test_fuzz import lenient_pydicom_io, set_raw  # noqa: F401 (fixture)


def _outcome(data: bytes):
    return process_file("case.dcm", data, pseudonymiser())


def test_damaged_transfer_syntax_uid_is_quarantined():
    data = encode(demo_dataset("tgh-ct1")[1])
    ts = b"1.2.840.10008.1.2.1\x00"
    at = data.index(ts)
    o = _outcome(data[:at + 1] + b"\xd1" + data[at + 2:])  # '1.2...' -> '1\xd12...'
    assert (o.status, o.reason) == ("quarantined", "unsupported_transfer_syntax")
    assert "(0002,0010)" in o.detail and "not a transfer syntax" in o.detail


def test_backslash_in_a_concept_code_is_not_a_crash():
    spec, ds = demo_dataset("tgh-ct1")
    item = find_num(ds, C.DLP)
    set_raw(item.ConceptNameCodeSequence[0], "CodingSchemeDesignator", "DCM\\DCM")
    o = _outcome(encode(ds))
    assert o.status == "loaded"
    # the item no longer names DLP (113838, DCM), so that event's DLP is absent, not guessed
    assert o.obj.ct_events[0].dlp_mgy_cm is None
    assert o.obj.ct_events[1].dlp_mgy_cm == spec.ct_events[1].dlp_mgy_cm


def test_undecodable_element_deep_in_the_tree_is_quarantined():
    data = bytearray(encode(demo_dataset("tgh-rf1")[1]))
    at = data.index(b"\x08\x00\x00\x01SH", len(data) // 2)  # a Code Value deep in the tree
    data[at + 4:at + 6] = b"RH"  # no such VR
    o = _outcome(bytes(data))
    assert (o.status, o.reason) == ("quarantined", "malformed_dicom")
    assert "(0008,0100)" in o.detail and "cannot be decoded" in o.detail


def test_absurd_number_of_sources_and_instance_number_still_load(lenient_pydicom_io):
    _, ds = demo_dataset("tgh-ct1")
    find_num(ds, C.NUMBER_OF_XRAY_SOURCES).MeasuredValueSequence[0].NumericValue = "1e308"
    set_raw(ds, "InstanceNumber", "99999999999")
    o = _outcome(encode(ds))
    assert o.status == "loaded"
    assert o.obj.ct_events[0].number_of_sources == 1  # the source containers counted instead
    assert o.obj.instance_number is None
    assert IssueKind.IMPLAUSIBLE_VALUE in [i.kind for i in o.obj.issues]
    tables = _batch_tables([o], "run-x", dt.datetime(2026, 1, 1))  # overflowed Arrow before
    assert tables["ct_event"].num_rows == len(o.obj.ct_events)


def test_sequence_cut_by_an_overwrite_is_quarantined_not_a_crash():
    """Found in CI: b'\\x00\\x01' written mid-file makes pydicom raise OSError ('No tag to read')
    while the parser decodes a sequence lazily."""
    from tests.reliability.test_fuzz import apply_byte_ops
    data = encode(demo_dataset("tgh-ct1")[1])
    o = _outcome(apply_byte_ops(data, [("overwrite", 0.4991018259303336, b"\x00\x01", 0)]))
    assert o.status in ("loaded", "not_dose", "quarantined")
