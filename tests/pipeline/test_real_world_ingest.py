"""Objects in the shapes real devices send, written by an independent writer where one exists.

Each object is built here: with pydicom (its own encapsulation helpers for compressed pixel
data) and with DCMTK as the independent writer (``dcmcjpeg`` / ``dcmcjpls`` compress the
pixel data, ``dcmconv`` changes the transfer syntax, adds group lengths and trailing padding or
drops the file meta (``-F``), ``dump2dcm`` encodes dose screens from text). For every object the
value ingest stores is compared with what DCMTK's ``dcmdump`` prints for the same file.
Units of the header attributes are those of PS3.3 C.8.7.8 (X-Ray Acquisition Dose), C.4.16
(Radiation Dose) and C.8.15.3.8 (CT Exposure Macro). Nothing here names a real device,
person or place.
"""

from __future__ import annotations

import contextlib
import io
import math
import re
import subprocess
from pathlib import Path

import numpy as np
import pydicom
import pydicom.config
import pytest
from pydicom.dataset import Dataset, FileMetaDataset
from pydicom.encaps import encapsulate
from pydicom.filewriter import write_dataset, write_file_meta_info
from pydicom.sequence import Sequence
from pydicom.uid import (CTImageStorage, ExplicitVRLittleEndian, JPEG2000Lossless,
                         SecondaryCaptureImageStorage)

from pipeline.ingest import ingest, process_file
from tests.helpers import KEY, demo_dataset, encode, pseudonymiser, require_tool

pytestmark = pytest.mark.external

ENHANCED_CT = "1.2.840.10008.5.1.4.1.1.2.1"
DX_PRESENTATION = "1.2.840.10008.5.1.4.1.1.1.1"
STUDY_UID = "2.25.31400000000000000000000000000000001"


@contextlib.contextmanager
def lenient_writing():
    """Write values a real device writes and a strict writer refuses (over-long, odd)."""
    settings = pydicom.config.settings
    before = settings.writing_validation_mode, settings.reading_validation_mode
    # a new element is validated with the reading mode, its encoding with the writing mode
    settings.writing_validation_mode = settings.reading_validation_mode = pydicom.config.IGNORE
    try:
        yield
    finally:
        settings.writing_validation_mode, settings.reading_validation_mode = before


def _uid(n: int) -> str:
    return f"2.25.3140000000000000000000000000{n:07d}"


def ct_image(n: int = 1, *, ctdivol: str = "12.5", z: float = 0.0, series: int = 1,
             series_description: str = "Helical 5mm", image_type=("ORIGINAL", "PRIMARY", "AXIAL"),
             event_uid: str | None = None, study_uid: str = STUDY_UID) -> Dataset:
    """A small classic CT Image (PS3.3 A.3) with 16 x 16 pixels and CTDIvol in its header."""
    ds = Dataset()
    ds.SpecificCharacterSet = "ISO_IR 100"
    ds.ImageType = list(image_type)
    ds.SOPClassUID = CTImageStorage
    ds.SOPInstanceUID = _uid(series * 1000 + n)
    ds.StudyDate = ds.ContentDate = ds.AcquisitionDate = "20261104"
    ds.StudyTime = ds.ContentTime = ds.AcquisitionTime = "101500"
    ds.Modality = "CT"
    ds.Manufacturer = "Invented Imaging Works"
    ds.ManufacturerModelName = "Model Q"
    ds.DeviceSerialNumber = "SN-0001"
    ds.StationName = "LABCT9"
    ds.InstitutionName = "Nowhere Test Hospital"
    ds.StudyDescription = "CT HEAD"
    ds.SeriesDescription = series_description
    ds.PatientName = "Test^Realworld"
    ds.PatientID = "RW-0001"
    ds.PatientBirthDate = "19700101"
    ds.PatientSex = "F"
    ds.BodyPartExamined = "HEAD"
    ds.SliceThickness = "5"
    ds.KVP = "120"
    ds.ExposureTime = "1000"
    ds.XRayTubeCurrent = "200"
    ds.CTDIvol = float(ctdivol)
    phantom = Dataset()
    phantom.CodeValue, phantom.CodingSchemeDesignator = "113690", "DCM"
    phantom.CodeMeaning = "IEC Head Dosimetry Phantom"
    ds.CTDIPhantomTypeCodeSequence = Sequence([phantom])
    if event_uid:
        ds.IrradiationEventUID = event_uid
    ds.StudyInstanceUID = study_uid
    ds.SeriesInstanceUID = f"{study_uid}.{series}"
    ds.StudyID = "1"
    ds.SeriesNumber = str(series)
    ds.InstanceNumber = str(n)
    ds.ImagePositionPatient = ["0", "0", f"{z:g}"]
    ds.ImageOrientationPatient = ["1", "0", "0", "0", "1", "0"]
    ds.FrameOfReferenceUID = f"{study_uid}.99"
    ds.SamplesPerPixel = 1
    ds.PhotometricInterpretation = "MONOCHROME2"
    ds.Rows = ds.Columns = 16
    ds.PixelSpacing = ["0.5", "0.5"]
    ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 12, 11, 0
    ds.RescaleIntercept, ds.RescaleSlope = "-1024", "1"
    ds.PixelData = (np.arange(256, dtype="<u2").reshape(16, 16) * 7).tobytes()
    return ds


def part10(ds: Dataset, transfer_syntax=ExplicitVRLittleEndian) -> bytes:
    ds.file_meta = FileMetaDataset()
    ds.file_meta.TransferSyntaxUID = transfer_syntax
    ds.file_meta.MediaStorageSOPClassUID = ds.SOPClassUID
    ds.file_meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    return encode(ds)


def dcmtk(tool: str, *args: str) -> None:
    subprocess.run([require_tool(tool), *args], check=True, capture_output=True, text=True)


def dcmdump_values(path: Path, tag: str) -> list[str]:
    """Every value DCMTK's dcmdump prints for `tag` (searched in sequences too)."""
    out = subprocess.run([require_tool("dcmdump"), "-q", "+P", tag, "+s", str(path)],
                         check=True, capture_output=True, text=True).stdout
    values = []
    for line in out.splitlines():
        match = re.match(r"\s*\([0-9a-f,]+\)\s+\w\w\s+(\[(?P<t>[^\]]*)\]|(?P<n>\S+))", line)
        if match:
            values.append(match["t"] if match["t"] is not None else match["n"])
    return values


def outcome(data: bytes, path: str = "test.dcm"):
    return process_file(path, data, pseudonymiser())


def issue_kinds(o) -> list[str]:
    return [i.kind.value for i in o.obj.issues] if o.obj is not None else []


# --- compressed pixel data, transfer syntaxes, bare data sets --------------------------------

@pytest.fixture(scope="module")
def ct_file(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("rw") / "ct.dcm"
    path.write_bytes(part10(ct_image()))
    return path


DCMTK_VARIANTS = {
    "jpeg_lossless": ("dcmcjpeg", "+e1"),          # JPEG Lossless SV1, encapsulated
    "jpeg_ls": ("dcmcjpls", "+el"),                 # JPEG-LS lossless, encapsulated
    "bare_explicit_le": ("dcmconv", "-F", "+te"),   # no preamble, no file meta
    "bare_implicit_le": ("dcmconv", "-F", "+ti"),
    "big_endian": ("dcmconv", "+tb"),
    "deflated": ("dcmconv", "+td"),
    "group_lengths": ("dcmconv", "+g"),
    "trailing_padding": ("dcmconv", "+p", "512", "16"),  # (FFFC,FFFC) padding
}


@pytest.mark.parametrize("variant", sorted(DCMTK_VARIANTS))
def test_dcmtk_written_variants_load_with_dcmdump_values(variant, ct_file, tmp_path):
    tool, *args = DCMTK_VARIANTS[variant]
    path = tmp_path / f"{variant}.dcm"
    dcmtk(tool, *args, str(ct_file), str(path))
    o = outcome(path.read_bytes(), str(path))
    assert (o.status, o.reason) == ("loaded", None), o.detail
    assert "pixel_data_truncated" not in issue_kinds(o)
    (event,) = o.obj.ct_events
    (printed,) = dcmdump_values(path, "0018,9345")
    assert event.ctdivol_mgy == pytest.approx(float(printed), rel=1e-12)
    assert o.sop_instance_uid == dcmdump_values(path, "0008,0018")[0]
    assert o.obj.modality == "CT" and event.ctdi_phantom == "head_16cm"
    if variant.startswith("bare"):
        assert path.read_bytes()[128:132] != b"DICM"


def test_pydicom_encapsulated_jpeg2000_with_offset_table_loads(tmp_path):
    """Encapsulated pixel data (undefined length, Basic Offset Table, two fragments) made with
    pydicom's own helper; the fragments are never decoded, so any bytes will do."""
    ds = ct_image()
    ds.PixelData = encapsulate([b"\xff\x4f\xff\x51" + bytes(301), b"\xff\x4f\xff\x51" + bytes(64)],
                               has_bot=True)
    ds["PixelData"].VR = "OB"
    data = part10(ds, JPEG2000Lossless)
    path = tmp_path / "j2k.dcm"
    path.write_bytes(data)
    o = outcome(data)
    assert (o.status, o.reason) == ("loaded", None), o.detail
    assert o.obj.ct_events[0].ctdivol_mgy == pytest.approx(float(dcmdump_values(path, "0018,9345")[0]))


def test_implicit_data_set_behind_explicit_file_meta_loads():
    """File meta says Explicit VR Little Endian, the data set is Implicit VR (a writer's bug
    seen in the field); pydicom detects the switch and reads it."""
    ds = ct_image()
    meta = FileMetaDataset()
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    meta.MediaStorageSOPClassUID = ds.SOPClassUID
    meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    meta.ImplementationClassUID = "2.25.314000000001"
    buffer = io.BytesIO()
    buffer.write(b"\x00" * 128 + b"DICM")
    write_file_meta_info(buffer, meta, enforce_standard=True)
    from pydicom.filebase import DicomFileLike
    fp = DicomFileLike(buffer)
    fp.is_little_endian, fp.is_implicit_VR = True, True
    write_dataset(fp, ds)
    o = outcome(buffer.getvalue())
    assert (o.status, o.reason) == ("loaded", None), o.detail
    assert o.obj.ct_events[0].ctdivol_mgy == 12.5


def test_private_sequence_odd_and_overlong_values_load():
    """A private sequence of undefined length, an odd-length value and a value longer than its
    VR allows: readable by dcmdump and pydicom, so loaded; the oddities become issues."""
    ds = ct_image()
    block = ds.private_block(0x0029, "INVENTED PRIVATE 1", create=True)
    inner = Dataset()
    inner.add_new(0x00291010, "LO", "abc")
    block.add_new(0x10, "SQ", Sequence([inner]))
    ds.ProtocolName = "HEAD ROUTINE"
    with lenient_writing():
        ds.add_new(0x00081090, "LO", "Model Q " * 12)    # 96 characters in an LO (max 64)
        data = part10(ds)
    # an odd-length value as some writers send it: "HEAD ROUTINE" (12) cut to 11, with the
    # length field saying 11 (explicit VR LE: tag, VR, 2-byte length)
    head = b"\x18\x00\x30\x10LO\x0c\x00HEAD ROUTINE"
    assert head in data
    data = data.replace(head, b"\x18\x00\x30\x10LO\x0b\x00HEAD ROUTIN")
    o = outcome(data)
    assert (o.status, o.reason) == ("loaded", None), o.detail
    assert o.obj.ct_events[0].ctdivol_mgy == 12.5
    assert o.obj.device.model.startswith("Model Q Model Q")


def test_header_only_stub_without_pixel_data_loads():
    ds = ct_image()
    del ds.PixelData
    o = outcome(part10(ds))
    assert (o.status, o.reason) == ("loaded", None), o.detail
    assert "pixel_data_truncated" not in issue_kinds(o)


def test_pixel_data_cut_short_loads_with_an_issue(ct_file, tmp_path):
    """The dose is what we audit: complete dose attributes with cut pixel data load."""
    jpeg = tmp_path / "jpeg.dcm"
    dcmtk("dcmcjpeg", "+e1", str(ct_file), str(jpeg))
    for data in (ct_file.read_bytes()[:-100], jpeg.read_bytes()[:-40]):
        o = outcome(data)
        assert o.status == "loaded", o.detail
        assert "pixel_data_truncated" in issue_kinds(o)
        assert o.obj.ct_events[0].ctdivol_mgy == 12.5
        detail = next(i.detail for i in o.obj.issues if i.kind.value == "pixel_data_truncated")
        assert "pixel data" in detail and "dose attributes before it are complete" in detail


def _cuts(data: bytes, full_dose, dose_of):
    """Status of every cut at a multiple of 97 bytes."""
    seen = {}
    for cut in range(97, len(data), 97):
        o = outcome(data[:cut])
        key = (o.status, o.reason, "pixel_data_truncated" in issue_kinds(o))
        seen[key] = seen.get(key, 0) + 1
        if o.status == "loaded":
            assert "pixel_data_truncated" in issue_kinds(o), cut
            assert dose_of(o) == full_dose, cut  # never a smaller dose
    return seen


def test_every_97th_byte_cut_of_a_dose_report_is_truncated():
    _, ds = demo_dataset("tgh-xa1")
    data = encode(ds)
    full = outcome(data)
    dap = sum(e.dap_gy_cm2 for e in full.obj.projection_events)
    seen = _cuts(data, dap, lambda o: sum(e.dap_gy_cm2 for e in o.obj.projection_events))
    assert set(seen) == {("quarantined", "truncated", False)}
    assert sum(seen.values()) == (len(data) - 1) // 97


def test_every_97th_byte_cut_of_a_compressed_ct_image(ct_file, tmp_path):
    """Cut in the header: truncated. Cut in the pixel data: loaded, same CTDIvol, with the
    issue. A cut exactly at an element boundary before CTDIvol leaves a valid header without
    dose (no reader can tell it from a stub): not a dose object, never a smaller dose."""
    jpeg = tmp_path / "jpeg.dcm"
    dcmtk("dcmcjpeg", "+e1", str(ct_file), str(jpeg))
    data = jpeg.read_bytes()
    seen = _cuts(data, 12.5, lambda o: o.obj.ct_events[0].ctdivol_mgy)
    assert seen[("quarantined", "truncated", False)] >= 1
    assert seen[("loaded", None, True)] >= 1
    assert set(seen) <= {("quarantined", "truncated", False), ("loaded", None, True),
                         ("not_dose", "image_without_dose_attributes", False)}


def test_cut_inside_the_header_is_truncated(ct_file):
    data = ct_file.read_bytes()
    for cut in (100, 140, 400, 700):
        o = outcome(data[:cut])
        assert (o.status, o.reason) == ("quarantined", "truncated"), (cut, o.detail)


def test_cut_deflated_file_is_truncated(ct_file, tmp_path):
    path = tmp_path / "deflated.dcm"
    dcmtk("dcmconv", "+td", str(ct_file), str(path))
    o = outcome(path.read_bytes()[:-30])
    assert (o.status, o.reason) == ("quarantined", "truncated"), o.detail


# --- character sets ---------------------------------------------------------------------------

@pytest.mark.parametrize("charset", [None, b"ISO_IR 192", b"ISO_IR 999"])
def test_text_outside_its_character_set_loads_with_replacement(charset):
    """Bytes a Latin-1 writer sends (e-acute, 0xEA) under no Specific Character Set (ASCII),
    under UTF-8 (where 0xEA starts a sequence that never completes) and under a name no
    decoder knows: loaded, the text with a replacement character, never quarantined."""
    ds = ct_image()
    ds.StudyDescription = "CT TETE"
    if charset is None:
        del ds.SpecificCharacterSet
    data = part10(ds)
    if charset is not None:
        data = data.replace(b"ISO_IR 100", charset)
    data = data.replace(b"CT TETE ", b"CT T\xeaTE ")
    o = outcome(data)
    assert (o.status, o.reason) == ("loaded", None), o.detail
    text = o.obj.study.study_description
    assert text.startswith("CT T") and text.endswith("TE")
    assert "\ufffd" in text or "\xea" in text
    assert o.obj.ct_events[0].ctdivol_mgy == 12.5


# --- entrance dose, organ dose, modality from content ------------------------------------------

def dx_image(**attributes) -> Dataset:
    ds = ct_image()
    for name in ("CTDIvol", "CTDIPhantomTypeCodeSequence", "SliceThickness",
                 "ImagePositionPatient", "ImageOrientationPatient", "FrameOfReferenceUID",
                 "RescaleIntercept", "RescaleSlope", "XRayTubeCurrent"):
        delattr(ds, name)
    ds.SOPClassUID = DX_PRESENTATION
    ds.Modality = "DX"
    ds.ImageType = ["ORIGINAL", "PRIMARY"]
    ds.BodyPartExamined = "CHEST"
    for name, value in attributes.items():
        setattr(ds, name, value)
    return ds


@pytest.mark.parametrize("attributes, expected_mgy, issue", [
    ({"EntranceDoseInmGy": "1.23", "EntranceDose": 0}, 1.23, None),   # 0 dGy beside mGy: ignored
    ({"EntranceDose": 2}, 200.0, None),                                 # 2 dGy = 200 mGy
    ({"EntranceDose": 0}, None, "below_resolution"),                    # only "below 1 dGy"
    ({"EntranceDoseInmGy": "0.456"}, 0.456, None),
])
def test_entrance_dose_is_its_own_quantity(attributes, expected_mgy, issue, tmp_path):
    """(0040,8302) Entrance Dose in mGy, else (0040,0302) Entrance Dose in dGy (PS3.3 C.8.7.8):
    a dose at the entrance surface, stored in entrance_dose_mgy and never as Ka,r."""
    data = part10(dx_image(ImageAndFluoroscopyAreaDoseProduct="1.5", **attributes))
    path = tmp_path / "dx.dcm"
    path.write_bytes(data)
    o = outcome(data)
    assert o.status == "loaded", o.detail
    (event,) = o.obj.projection_events
    assert event.dose_rp_mgy is None
    if expected_mgy is None:
        assert event.entrance_dose_mgy is None
    else:
        printed = dcmdump_values(path, "0040,8302") or [str(100 * int(dcmdump_values(path, "0040,0302")[0]))]
        assert event.entrance_dose_mgy == pytest.approx(float(printed[0]), rel=1e-12)
        assert event.entrance_dose_mgy == pytest.approx(expected_mgy, rel=1e-12)
    assert (issue in issue_kinds(o)) if issue else ("below_resolution" not in issue_kinds(o))
    # 1.5 dGy.cm2 = 0.15 Gy.cm2
    assert event.dap_gy_cm2 == pytest.approx(0.15, rel=1e-12)


def tomo_under_ct_class() -> Dataset:
    """A breast tomosynthesis projection set stored under CT Image Storage (seen from real
    units): no CTDIvol, Organ Exposed BREAST, Organ Dose in dGy, Body Part Thickness in mm."""
    ds = ct_image()
    for name in ("CTDIvol", "CTDIPhantomTypeCodeSequence"):
        delattr(ds, name)
    ds.BodyPartExamined = "BREAST"
    ds.OrganExposed = "BREAST"
    ds.OrganDose = "0.0152"              # dGy -> 1.52 mGy AGD
    ds.BodyPartThickness = "52"
    ds.ImageLaterality = "L"
    ds.ViewPosition = "CC"
    return ds


def test_tomosynthesis_under_ct_image_storage_is_mammography(tmp_path):
    data = part10(tomo_under_ct_class())
    path = tmp_path / "tomo.dcm"
    path.write_bytes(data)
    o = outcome(data)
    assert o.status == "loaded", o.detail
    assert o.obj.modality == "MG" and not o.obj.ct_events
    (event,) = o.obj.projection_events
    (organ_dgy,) = dcmdump_values(path, "0040,0316")
    assert event.agd_mgy == pytest.approx(100 * float(organ_dgy), rel=1e-12)
    assert event.compressed_breast_thickness_mm == 52.0
    assert event.laterality == "L"


def test_ct_image_without_ctdivol_is_not_a_dose_object():
    ds = ct_image()
    del ds.CTDIvol
    o = outcome(part10(ds))
    assert (o.status, o.reason) == ("not_dose", "image_without_dose_attributes")


# --- enhanced CT ----------------------------------------------------------------------------

def enhanced_ct(per_frame_ctdivol: list[float] | None, shared_ctdivol: float | None,
                top_ctdivol: float | None, event_uid: str = "2.25.3141000001") -> Dataset:
    ds = ct_image()
    ds.SOPClassUID = ENHANCED_CT
    ds.SOPInstanceUID = _uid(9001)
    for name in ("CTDIvol", "CTDIPhantomTypeCodeSequence", "ImagePositionPatient",
                 "ImageOrientationPatient", "SliceThickness", "PixelSpacing"):
        delattr(ds, name)
    if top_ctdivol is not None:
        ds.CTDIvol = top_ctdivol
    n = len(per_frame_ctdivol) if per_frame_ctdivol else 3
    ds.NumberOfFrames = str(n)
    ds.PixelData = ds.PixelData * n

    def exposure(value):
        item = Dataset()
        item.CTDIvol = value
        item.ExposureTimeInms = 500.0
        item.XRayTubeCurrentInmA = 150.0
        return Sequence([item])

    shared = Dataset()
    measures = Dataset()
    measures.SliceThickness = "2"
    measures.PixelSpacing = ["0.5", "0.5"]
    shared.PixelMeasuresSequence = Sequence([measures])
    event = Dataset()
    event.IrradiationEventUID = event_uid
    shared.IrradiationEventIdentificationSequence = Sequence([event])
    if shared_ctdivol is not None:
        shared.CTExposureSequence = exposure(shared_ctdivol)
    ds.SharedFunctionalGroupsSequence = Sequence([shared])
    frames = []
    for i in range(n):
        frame = Dataset()
        position = Dataset()
        position.ImagePositionPatient = ["0", "0", f"{10.0 * i:g}"]
        frame.PlanePositionSequence = Sequence([position])
        if per_frame_ctdivol:
            frame.CTExposureSequence = exposure(per_frame_ctdivol[i])
        frames.append(frame)
    ds.PerFrameFunctionalGroupsSequence = Sequence(frames)
    return ds


def test_enhanced_ct_shared_and_top_level_value_is_one_event(tmp_path):
    """CTDIvol at the top level and in the shared CT Exposure Sequence of the same object is
    one event (PS3.3 C.8.15.3.8), with the event UID of the functional groups."""
    data = part10(enhanced_ct(None, 21.5, 21.5))
    path = tmp_path / "enh.dcm"
    path.write_bytes(data)
    o = outcome(data)
    assert o.status == "loaded", o.detail
    (event,) = o.obj.ct_events
    assert set(dcmdump_values(path, "0018,9345")) == {"21.5"}
    assert event.ctdivol_mgy == 21.5 and event.event_uid == "2.25.3141000001"
    assert (event.image_z_min_mm, event.image_z_max_mm, event.n_images) == (0.0, 20.0, 3)
    assert event.slice_thickness_mm == 2.0 and event.exposure_time_s == 0.5


def test_enhanced_ct_per_frame_values_average_to_the_event():
    o = outcome(part10(enhanced_ct([10.0, 20.0, 30.0, 40.0], None, None)))
    (event,) = o.obj.ct_events
    assert event.ctdivol_mgy == pytest.approx(25.0)      # mean of the frames' CTDIvol
    assert event.n_images == 4 and event.image_z_max_mm == 30.0


# --- dose screens (DCMTK dump2dcm) ---------------------------------------------------------------

def _dump_line(tag: str, vr: str, value: str) -> str:
    return f"({tag}) {vr} [{value}]"


def dose_screen_dump(items: list[dict], total_comment: str | None, *, sop: str,
                     study_uid: str = STUDY_UID, description: str = "Dose Report") -> str:
    """A Secondary Capture dose screen in dcmdump text: Exposure Dose Sequence (0040,030E)."""
    lines = [
        _dump_line("0008,0005", "CS", "ISO_IR 100"),
        _dump_line("0008,0008", "CS", "DERIVED\\SECONDARY\\OTHER"),
        _dump_line("0008,0016", "UI", SecondaryCaptureImageStorage),
        _dump_line("0008,0018", "UI", sop),
        _dump_line("0008,0020", "DA", "20261104"), _dump_line("0008,0030", "TM", "101500"),
        _dump_line("0008,0060", "CS", "CT"),
        _dump_line("0008,0064", "CS", "WSD"),
        _dump_line("0008,0070", "LO", "Invented Imaging Works"),
        _dump_line("0008,0080", "LO", "Nowhere Test Hospital"),
        _dump_line("0008,1010", "SH", "LABCT9"),
        _dump_line("0008,1030", "LO", "CT ABDOMEN PELVIS"),
        _dump_line("0008,103e", "LO", description),
        _dump_line("0008,1090", "LO", "Model Q"),
        _dump_line("0010,0010", "PN", "Test^Screen"), _dump_line("0010,0020", "LO", "RW-0002"),
        _dump_line("0010,0040", "CS", "M"),
        _dump_line("0018,1000", "LO", "SN-0001"),
        _dump_line("0020,000d", "UI", study_uid), _dump_line("0020,000e", "UI", sop + ".1"),
        _dump_line("0020,0011", "IS", "999"), _dump_line("0020,0013", "IS", "1"),
        _dump_line("0028,0002", "US", "1"), _dump_line("0028,0004", "CS", "MONOCHROME2"),
        _dump_line("0028,0010", "US", "8"), _dump_line("0028,0011", "US", "8"),
        _dump_line("0028,0100", "US", "8"), _dump_line("0028,0101", "US", "8"),
        _dump_line("0028,0102", "US", "7"), _dump_line("0028,0103", "US", "0"),
    ]
    if items:
        lines.append(_dump_line("0040,0301", "US", str(len(items))))
        lines.append("(0040,030e) SQ (Sequence with undefined length)")
        for item in items:
            lines.append("(fffe,e000) na (Item with undefined length)")
            for tag, vr, value in item["elements"]:
                lines.append("  " + _dump_line(tag, vr, value))
            lines.append("(fffe,e00d) na (ItemDelimitationItem)")
        lines.append("(fffe,e0dd) na (SequenceDelimitationItem)")
    if total_comment is not None:
        lines.append(_dump_line("0040,0310", "ST", total_comment))
    lines.append("(7fe0,0010) OB " + "\\".join(["00"] * 64))
    return "\n".join(lines) + "\n"


def screen_item(ctdivol: str, comment: str, kvp: str = "120", time_ms: str = "5000",
                acquisition: str | None = "SPIRAL") -> dict:
    elements = [("0018,0060", "DS", kvp), ("0018,1150", "IS", time_ms),
                ("0018,8151", "DS", "250000"), ("0018,9345", "FD", ctdivol),
                ("0040,0310", "ST", comment)]
    if acquisition:
        elements.insert(3, ("0018,9302", "CS", acquisition))
    return {"elements": elements}


def write_dump(tmp_path: Path, name: str, text: str) -> Path:
    dump, path = tmp_path / f"{name}.txt", tmp_path / f"{name}.dcm"
    dump.write_text(text, encoding="latin-1")
    dcmtk("dump2dcm", "+te", str(dump), str(path))
    return path


def test_dose_screen_events_and_totals_match_dcmdump(tmp_path):
    items = [screen_item("0.12", "Event=1; DLP=4.8", acquisition="CONSTANT_ANGLE"),
             screen_item("14.2", "Event=2; DLP=560.3 mGy*cm"),
             screen_item("9.85", "Event=3 DLP = 211.0")]
    path = write_dump(tmp_path, "screen", dose_screen_dump(
        items, "TotalDLP=776.1 mGy*cm", sop="2.25.3142000001"))
    o = outcome(path.read_bytes(), str(path))
    assert o.status == "loaded", o.detail
    assert o.obj.kind.value == "dose_screen" and o.obj.modality == "CT"
    events = o.obj.ct_events
    printed = [float(v) for v in dcmdump_values(path, "0018,9345")]
    assert [e.ctdivol_mgy for e in events] == pytest.approx(printed, rel=1e-12)
    assert [e.dlp_mgy_cm for e in events] == [4.8, 560.3, 211.0]
    assert [e.source_kind for e in events] == ["dose_screen"] * 3
    assert events[0].ct_acquisition_type == "constant_angle"
    assert events[1].kvp == 120 and events[1].tube_current_ma == 250.0  # 250000 uA
    assert events[1].exposure_time_s == 5.0
    (acc,) = o.obj.accumulated
    assert acc.dlp_total_mgy_cm == 776.1 and acc.events_reported == 3
    assert not [i for i in o.obj.issues if i.kind.value == "unparsed_dose_text"]


def test_dose_screen_with_unreadable_text_keeps_it_in_the_issue(tmp_path):
    items = [screen_item("14.2", "Serie 2 / 560,3 / 14,2")]
    path = write_dump(tmp_path, "odd", dose_screen_dump(items, None, sop="2.25.3142000002"))
    o = outcome(path.read_bytes())
    assert o.status == "loaded"
    (event,) = o.obj.ct_events
    assert event.ctdivol_mgy == 14.2 and event.dlp_mgy_cm is None
    (issue,) = [i for i in o.obj.issues if i.kind.value == "unparsed_dose_text"]
    assert "Serie 2 / 560,3 / 14,2" in issue.detail


def test_dose_screen_with_pixels_only_is_counted_as_such(tmp_path):
    path = write_dump(tmp_path, "pixels", dose_screen_dump([], None, sop="2.25.3142000003"))
    o = outcome(path.read_bytes())
    assert (o.status, o.reason) == ("not_dose", "dose_screen_pixels_only"), o.detail


def test_secondary_capture_that_is_no_dose_screen_is_not_a_dose_class(tmp_path):
    path = write_dump(tmp_path, "sc", dose_screen_dump([], None, sop="2.25.3142000004",
                                                       description="Key images"))
    o = outcome(path.read_bytes())
    assert (o.status, o.reason) == ("not_dose", "image_without_dose_attributes")


# --- through the warehouse: study values, precedence, public columns --------------------------

def ingest_objects(tmp_path: Path, objects: dict[str, bytes]):
    """Write `objects` (file name -> bytes) to an inbox and ingest it into a new warehouse."""
    inbox = tmp_path / "inbox"
    inbox.mkdir(exist_ok=True)
    for name, data in objects.items():
        (inbox / name).write_bytes(data)
    db = tmp_path / "k.duckdb"
    return db, ingest([inbox], db, KEY)


def query(db: Path, text: str, params=()):
    import duckdb
    with duckdb.connect(str(db), read_only=True) as con:
        return con.execute(text, list(params)).fetchall()


def study_row(db: Path, study_uid: str = STUDY_UID):
    import duckdb

    from pipeline.pseudonym import make_pseudonymiser
    key = make_pseudonymiser(KEY)("study", study_uid)
    with duckdb.connect(str(db), read_only=True) as con:
        return con.execute("select * from study_dose where study_key = ?", [key]).df().iloc[0]


def test_header_only_ct_study_values(tmp_path):
    """Two reconstructions of one helical acquisition (5 mm and 2 mm slices over the same
    range, the same CTDIvol), a localizer and a second acquisition: CTDIvol = mean over the
    acquisitions of each one's highest value; DLP = sum of mean CTDIvol x covered length."""
    files = []
    # acquisition 1: z 0..95 mm, 5 mm slices, CTDIvol 40 / 42 (modulated), recon 2: 2 mm
    for i in range(20):
        files.append(ct_image(i + 1, ctdivol="40" if i % 2 else "42", z=5.0 * i, series=2))
    for i in range(48):
        ds = ct_image(i + 1, ctdivol="40" if i % 2 else "42", z=2.0 * i, series=3)
        ds.SliceThickness = "2"
        files.append(ds)
    # acquisition 2: z 100..145, CTDIvol 20
    for i in range(10):
        files.append(ct_image(i + 1, ctdivol="20", z=100.0 + 5.0 * i, series=4))
    scout = ct_image(1, ctdivol="0.3", z=0.0, series=1, image_type=("ORIGINAL", "PRIMARY", "LOCALIZER"))
    files.append(scout)
    db, _ = ingest_objects(tmp_path, {f"{n:03d}.dcm": part10(ds) for n, ds in enumerate(files)})
    row = study_row(db)
    series = query(db, "select series_key, is_localizer, is_reconstruction, covered_length_mm "
                       "from stg_ct_image_series order by 1")
    assert row.source_kind == "image_header" and row.dlp_method == "estimated_from_images"
    assert row.ctdivol_mgy == pytest.approx((42 + 20) / 2)
    # acquisition 1: mean 41 mGy x (95 + 5) mm = 410 mGy.cm; acquisition 2: 20 x 5.0 cm = 100
    assert row.dlp_total_mgy_cm == pytest.approx(41 * 10.0 + 20 * 5.0)
    flags = {key.rsplit(".", 1)[-1]: (loc, rec) for key, loc, rec, _ in series}
    assert flags == {"1": (True, False), "2": (False, False), "3": (False, True), "4": (False, False)}


def test_dose_screen_outranks_image_headers_and_dose_report_outranks_both(tmp_path):
    objects = {f"img{i}.dcm": part10(ct_image(i + 1, ctdivol="30", z=5.0 * i)) for i in range(3)}
    items = [screen_item("14.2", "DLP=560.3"), screen_item("9.85", "DLP=211.0")]
    screen = write_dump(tmp_path, "screen", dose_screen_dump(items, "Total DLP: 771.3",
                                                              sop="2.25.3142000005"))
    objects["screen.dcm"] = screen.read_bytes()
    db, summary = ingest_objects(tmp_path, objects)
    assert summary.loaded == 4
    row = study_row(db)
    assert query(db, "select source_kind, count(*) from irradiation_event group by 1") == \
        [("dose_screen", 2)]
    assert row.source_kind == "dose_screen" and row.dlp_method == "event_sum"
    assert row.dlp_total_mgy_cm == pytest.approx(771.3)
    # length-weighted CTDIvol with L = DLP / CTDIvol: sum(DLP) / sum(DLP / CTDIvol)
    assert row.ctdivol_mgy == pytest.approx(771.3 / (560.3 / 14.2 + 211.0 / 9.85))
    # a dose report of the same study and modality arrives: only its events count
    spec, rdsr = demo_dataset("tgh-ct1")
    rdsr.StudyInstanceUID = STUDY_UID
    db, summary = ingest_objects(tmp_path, {"rdsr.dcm": encode(rdsr)})
    assert summary.loaded == 1
    kinds = query(db, "select distinct source_kind from irradiation_event")
    assert kinds == [("rdsr",)]
    (dlp,) = query(db, "select sum(dlp_total_mgy_cm) from study_dose")[0]
    assert dlp == pytest.approx(sum(e.dlp_mgy_cm for e in spec.ct_events))


def test_entrance_dose_study_total_is_apart_from_ka_r(tmp_path):
    objects = {}
    for i, mgy in enumerate(["0.21", "0.35"]):
        ds = dx_image(EntranceDoseInmGy=mgy, ImageAndFluoroscopyAreaDoseProduct="1.0")
        ds.SOPInstanceUID = _uid(7000 + i)
        ds.IrradiationEventUID = _uid(7100 + i)
        objects[f"dx{i}.dcm"] = part10(ds)
    db, _ = ingest_objects(tmp_path, objects)
    row = study_row(db)
    events = query(db, "select entrance_dose_mgy, dose_rp_mgy from irradiation_event order by 1")
    assert events == [(0.21, None), (0.35, None)]
    assert row.entrance_dose_total_mgy == pytest.approx(0.56)
    assert math.isnan(row.dose_rp_total_mgy) or row.dose_rp_total_mgy is None
    assert row.dlp_method is None


@pytest.mark.parametrize("derivation, quantity", [("ESAK", "ka_e"), ("IAK", "entrance_dose"),
                                                  (None, "entrance_dose")])
def test_only_entrance_surface_air_kerma_is_audited_as_ka_e(derivation, quantity, tmp_path):
    """Entrance Dose Derivation (0040,8303): ESAK is entrance surface air kerma, the Ka,e of
    radiography reference levels; IAK (incident air kerma, no backscatter) or an unstated
    derivation is audited as its own quantity, compared with no Ka,e reference."""
    ds = dx_image(EntranceDoseInmGy="0.21", ImageAndFluoroscopyAreaDoseProduct="1.0")
    ds.StudyDescription = "XR CHEST PA"
    ds.ViewPosition = "PA"
    if derivation:
        ds.EntranceDoseDerivation = derivation
    db, _ = ingest_objects(tmp_path, {"dx.dcm": part10(ds)})
    rows = query(db, "select quantity, value from audit_observation "
                     "where quantity not in ('dap') order by 1")
    assert rows == [(quantity, 0.21)]
