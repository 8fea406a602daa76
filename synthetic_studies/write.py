"""Write a synthetic corpus to disk with its ground-truth manifest (the shell of the generator).

Output folder layout::

    OUT/
      TGH/tgh-ct1/2026-09/s000123/rdsr_1.dcm     one folder per study: its dose objects,
      TGH/tgh-ct1/2026-09/s000123/rdsr_1.resent.dcm  and any file defects placed beside them
      CIC/cic-ct1/2026-09/s000125/dose_screen_1.dcm  a CT dose screen (Secondary Capture)
      OVH/ovh-ct1/2026-09/s000124/img_2.dcm       header images (n = event number); beside the
                                                  RDSR for units with header_images
      ...
      files.parquet                               one row per file
      studies.parquet                             one row per study, true totals

Deterministic: the same scenario, seed, months and study count give byte-identical files
whatever the number of worker processes.
"""

from __future__ import annotations

import copy
import io
import multiprocessing
import struct
import os
from concurrent.futures import ProcessPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import numpy as np
import pydicom.config
from pydicom.charset import convert_encodings, default_encoding, encode_string
from pydicom.dataelem import DataElement
from pydicom.filebase import DicomBytesIO
from pydicom.filewriter import correct_ambiguous_vr_element, write_file_meta_info
from pydicom.dataset import validate_file_meta
from pydicom.multival import MultiValue
from pydicom.uid import ExplicitVRLittleEndian
from pydicom.valuerep import AMBIGUOUS_VR, EXPLICIT_VR_LENGTH_32

from .defects import CONTENT_DEFECTS, FILE_DEFECTS, apply_content_defect, is_eligible
from .generator import make_basic_text_sr, make_dataset
from .sampling import _rng, device_observer_uid, make_study, uid
from .scenario import Scenario, load_scenario
from .specs import StudySpec, study_truth

__all__ = ["CorpusSummary", "FILES_SCHEMA", "STUDIES_SCHEMA", "plan_defects", "write_corpus"]

FILES_SCHEMA = pa.schema([
    ("path", pa.string()),
    ("sop_class_uid", pa.string()),
    ("sop_instance_uid", pa.string()),
    ("study", pa.string()),
    ("kind", pa.string()),
    ("defect", pa.string()),
    ("n_events", pa.int32()),
    ("size_bytes", pa.int64()),
    ("irradiation_event_uid", pa.string()),
])

STUDIES_SCHEMA = pa.schema([
    ("study", pa.string()),
    ("study_instance_uid", pa.string()),
    ("site", pa.string()),
    ("institution", pa.string()),
    ("device", pa.string()),
    ("device_observer_uid", pa.string()),
    ("station_name", pa.string()),
    ("modality", pa.string()),
    ("exam", pa.string()),
    ("is_unmapped", pa.bool_()),   # by design no default exam rule maps its description
    ("study_description", pa.string()),
    ("study_datetime", pa.timestamp("s")),
    ("patient_id", pa.string()),
    ("patient_sex", pa.string()),
    ("patient_age_years", pa.float64()),
    ("patient_weight_kg", pa.float64()),
    ("patient_height_m", pa.float64()),
    ("source_kind", pa.string()),
    ("n_reports", pa.int32()),
    ("event_count", pa.int32()),
    ("dap_total_gy_cm2", pa.float64()),
    ("dose_rp_total_mgy", pa.float64()),
    ("fluoro_time_total_s", pa.float64()),
    ("dlp_total_mgy_cm", pa.float64()),
    ("ctdivol_mgy", pa.float64()),
    ("agd_mgy", pa.float64()),
    ("entrance_dose_total_mgy", pa.float64()),
    ("story", pa.string()),
    ("defect", pa.string()),
    ("n_header_images", pa.int32()),
])


@dataclass(frozen=True, slots=True)
class CorpusSummary:
    out_dir: Path
    n_studies: int
    n_files: int
    n_defect_files: int
    by_modality: dict[str, int]
    size_bytes: int


def _study_id(index: int) -> str:
    return f"s{index:06d}"


def _study_dir(spec: StudySpec) -> str:
    return f"{spec.site}/{spec.device}/{spec.study_datetime:%Y-%m}/{_study_id(spec.index)}"


def plan_defects(scenario: Scenario, seed: int, n_studies: int, months: int) -> dict[int, list[str]]:
    """Which study carries which defect: deterministic from the seed; at least one of each."""
    plan: dict[int, list[str]] = {}
    taken_content: set[int] = set()
    for defect in (*CONTENT_DEFECTS, *FILE_DEFECTS):
        want = max(1, scenario.defects.get(defect, 1))
        rng = _rng(seed, "defect", defect)
        got, tries = 0, 0
        while got < want and tries < 50 * n_studies:
            tries += 1
            index = int(rng.integers(0, n_studies))
            if defect in CONTENT_DEFECTS and index in taken_content:
                continue
            if index in plan and defect in plan[index]:
                continue
            if not is_eligible(defect, make_study(scenario, seed, index, n_studies, months)):
                continue
            plan.setdefault(index, []).append(defect)
            if defect in CONTENT_DEFECTS:
                taken_content.add(index)
            got += 1
    return plan


def _encode(ds) -> bytes:
    """The DICOM Part 10 bytes of `ds`, exactly as ``ds.save_as(enforce_file_format=True)``
    writes them; a dedicated explicit-VR-little-endian encoder for the datasets we build,
    with pydicom's writer for anything else (an element or a dataset it does not handle)."""
    try:
        return _fast_encode(ds)
    except _NotHandled:
        return _pydicom_encode(ds)


def _pydicom_encode(ds) -> bytes:
    buf = io.BytesIO()
    ds.save_as(buf, enforce_file_format=True)
    return buf.getvalue()


# --- a small explicit VR little endian writer (speed only: same bytes as pydicom's) ----------
#
# It mirrors pydicom 3's filewriter for what generator.py builds: elements in tag order,
# group lengths above group 6 skipped, sequences and items of defined length, text in the
# dataset's character set padded with a space, UIDs padded with NUL, numbers packed little
# endian. Anything else (raw elements, ambiguous VRs inside items, undefined lengths, values
# over 64 KiB in a 16-bit length field, an unusual transfer syntax) raises _NotHandled and
# the whole dataset goes through pydicom instead.

class _NotHandled(Exception):
    pass


_LONG_VR = frozenset(str(vr) for vr in EXPLICIT_VR_LENGTH_32)
_STRING_VR = frozenset({"AE", "AS", "CS", "UR", "DA", "DT", "TM"})
_TEXT_VR = frozenset({"LO", "LT", "SH", "ST", "UC", "UT"})
_NUMBER_STRING_VR = frozenset({"DS", "IS"})
_PACKED_VR = {"FD": "d", "FL": "f", "US": "H", "UL": "L", "SS": "h", "SL": "l", "SV": "q",
              "UV": "Q"}
_BYTES_VR = frozenset({"OB", "OW", "OD", "OF", "OL", "OV", "UN"})
_ITEM = struct.pack("<HHL", 0xFFFE, 0xE000, 0)[:4]


def _fast_encode(ds) -> bytes:
    meta = getattr(ds, "file_meta", None)
    if meta is None or meta.get("TransferSyntaxUID") != ExplicitVRLittleEndian:
        raise _NotHandled
    if getattr(ds, "preamble", None) is not None or any(t.group in (0, 2) for t in ds.keys()):
        raise _NotHandled
    meta = copy.deepcopy(meta)
    sop_class, sop_instance = ds.get("SOPClassUID"), ds.get("SOPInstanceUID")
    if meta.get("MediaStorageSOPClassUID") is None or (
            sop_class and sop_class != meta.MediaStorageSOPClassUID):
        meta.MediaStorageSOPClassUID = sop_class
    if meta.get("MediaStorageSOPInstanceUID") is None or (
            sop_instance and sop_instance != meta.MediaStorageSOPInstanceUID):
        meta.MediaStorageSOPInstanceUID = sop_instance
    validate_file_meta(meta, enforce_standard=True)
    head = DicomBytesIO()
    head.is_little_endian, head.is_implicit_VR = True, False
    head.write(b"\x00" * 128 + b"DICM")
    write_file_meta_info(head, meta, enforce_standard=True)
    if "PixelData" in ds:
        ds["PixelData"].is_undefined_length = False
    out = [head.getvalue()]
    _encode_dataset(out, ds, [default_encoding], top=True)
    return b"".join(out)


_CHARSET_TAG = 0x00080005
_CODE_ITEM_TAGS = (0x00080100, 0x00080102, 0x00080104)  # Code Value, Scheme, Code Meaning
_ENCODINGS: dict[tuple, list[str]] = {}
# The bytes of a code sequence item (Code Value, Coding Scheme Designator, Code Meaning, all
# text) by its three values and character set: thousands of content items share a few
# hundred codes, so each distinct one is encoded once per process.
_CODE_ITEMS: dict[tuple, bytes] = {}


def _encodings(charset) -> list[str]:
    key = charset if isinstance(charset, str) else tuple(charset)
    found = _ENCODINGS.get(key)
    if found is None:
        found = _ENCODINGS[key] = convert_encodings(charset)
    return found


def _encode_dataset(out: list[bytes], ds, parent_encodings: list[str], top: bool = False) -> int:
    """Append the encoded elements of `ds` to `out`; returns the number of bytes."""
    elements = ds._dict
    charset = elements.get(_CHARSET_TAG)
    if charset is not None and charset.is_raw:
        raise _NotHandled
    charset = charset.value if charset is not None else None
    encodings = _encodings(charset if charset is not None else parent_encodings)
    if len(elements) == 3 and not top:
        items = [elements.get(t) for t in _CODE_ITEM_TAGS]
        if all(type(e) is DataElement and type(e.value) is str for e in items):
            key = (*((e.VR, e.value) for e in items), *encodings)
            data = _CODE_ITEMS.get(key)
            if data is None:
                parts: list[bytes] = []
                _encode_elements(parts, ds, elements, encodings, top)
                data = b"".join(parts)
                if len(_CODE_ITEMS) < 65_536:
                    _CODE_ITEMS[key] = data
            out.append(data)
            return len(data)
    return _encode_elements(out, ds, elements, encodings, top)


def _encode_elements(out: list[bytes], ds, elements: dict, encodings: list[str],
                     top: bool) -> int:
    n = 0
    for tag in sorted(elements, key=int):
        if not tag & 0xFFFF and tag >> 16 > 6:
            continue
        elem = elements[tag]
        if elem.is_raw:
            raise _NotHandled
        if elem.VR in AMBIGUOUS_VR:
            if not top:
                raise _NotHandled
            correct_ambiguous_vr_element(elem, ds, True)
        n += _encode_element(out, elem, encodings)
    return n


def _encode_element(out: list[bytes], elem, encodings: list[str]) -> int:
    vr = str(elem.VR)
    tag = elem.tag
    if elem.is_undefined_length or elem.is_buffered:
        raise _NotHandled
    if vr == "SQ":
        header_at = len(out)
        out.append(b"")
        length = 0
        for item in elem.value:
            if getattr(item, "is_undefined_length_sequence_item", False):
                raise _NotHandled
            item_at = len(out)
            out.append(b"")
            size = _encode_dataset(out, item, encodings)
            out[item_at] = _ITEM + struct.pack("<L", size)
            length += 8 + size
        out[header_at] = struct.pack("<HH2sHL", tag >> 16, tag & 0xFFFF, b"SQ", 0, length)
        return 12 + length
    value = elem.value
    empty = not value if type(value) is str else elem.is_empty  # a str: VM 0 when ""
    value = b"" if empty else _value_bytes(elem, vr, encodings)
    if vr in _LONG_VR:
        out.append(struct.pack("<HH2sHL", tag >> 16, tag & 0xFFFF, vr.encode(), 0, len(value)))
        out.append(value)
        return 12 + len(value)
    if len(value) > 0xFFFF:
        raise _NotHandled  # pydicom rewrites the VR as UN, with a warning
    out.append(struct.pack("<HH2sH", tag >> 16, tag & 0xFFFF, vr.encode(), len(value)))
    out.append(value)
    return 8 + len(value)


def _text(value: str, encodings: list[str]) -> bytes:
    if len(encodings) == 1 and encodings[0] in ("latin_1", "iso8859"):
        try:
            return value.encode(encodings[0])
        except UnicodeError:
            pass
    return encode_string(value, encodings)


def _is_multi(value) -> bool:
    return type(value) is not str and isinstance(value, (MultiValue, list, tuple, np.ndarray))


def _value_bytes(elem, vr: str, encodings: list[str]) -> bytes:
    value = elem.value
    if vr in _STRING_VR or vr == "UI":
        if vr in ("DA", "DT", "TM") and not isinstance(value, str):
            raise _NotHandled
        text = "\\".join(value) if _is_multi(value) else value
        if len(text) % 2:
            text += "\0" if vr == "UI" else " "
        return text.encode(default_encoding) if isinstance(text, str) else text
    if vr in _TEXT_VR:
        if _is_multi(value):
            if not isinstance(value[0], str):
                raise _NotHandled
            data = b"\\".join(_text(v, encodings) for v in value)
        elif isinstance(value, str):
            data = _text(value, encodings)
        else:
            raise _NotHandled
        return data + b" " if len(data) % 2 else data
    if vr in _NUMBER_STRING_VR:
        if _is_multi(value):
            text = "\\".join(x.original_string if hasattr(x, "original_string") else str(x)
                              for x in value)
        else:
            text = value.original_string if hasattr(value, "original_string") else str(value)
        if len(text) % 2:
            text += " "
        return bytes(text, default_encoding)
    if vr == "PN":
        values = [value] if elem.VM == 1 else value
        data = b"\\".join(v.encode(encodings) for v in values)
        return data + b" " if len(data) % 2 else data
    fmt = _PACKED_VR.get(vr)
    if fmt is not None:
        if value is None or value == "":
            return b""
        if hasattr(value, "append"):
            if vr == "SS":
                raise _NotHandled  # LUT descriptor rule
            return struct.pack(f"<{len(value)}{fmt}", *value)
        return struct.pack("<" + fmt, value)
    if vr in _BYTES_VR and isinstance(value, bytes):
        return value + b"\x00" if len(value) % 2 else value
    raise _NotHandled


def _write_bytes(root: Path, rel: str, data: bytes) -> None:
    path = root / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)


def _write_study(scenario: Scenario, seed: int, index: int, n_studies: int, months: int,
                 defects: list[str], root: Path) -> tuple[list[dict], dict]:
    spec = make_study(scenario, seed, index, n_studies, months)
    folder = _study_dir(spec)
    sid = _study_id(index)
    content_defect = next((d for d in defects if d in CONTENT_DEFECTS), None)
    files: list[dict] = []
    for report in spec.reports:
        ds = make_dataset(scenario, spec, report)
        defect = None
        if content_defect and report.kind == "rdsr" and report.instance_number == 1:
            apply_content_defect(ds, content_defect)
            defect = content_defect
        data = _encode(ds)
        name = f"rdsr_{report.instance_number}.dcm" if report.kind == "rdsr" \
            else f"dose_screen_{report.instance_number}.dcm" if report.kind == "dose_screen" \
            else f"img_{report.n_events}.dcm"
        rel = f"{folder}/{name}"
        _write_bytes(root, rel, data)
        files.append(_file_row(rel, ds.SOPClassUID, ds.SOPInstanceUID, sid, report.kind,
                               defect, report.n_events, len(data),
                               ds.get("IrradiationEventUID")))
        if report.kind == "rdsr" and report.instance_number == 1:
            first, first_ds = data, ds
    if "truncated" in defects:
        rel = f"{folder}/rdsr_1.partial.dcm"
        cut = first[: len(first) * 2 // 3]
        _write_bytes(root, rel, cut)
        files.append(_file_row(rel, first_ds.SOPClassUID, first_ds.SOPInstanceUID, sid,
                               "rdsr", "truncated", None, len(cut)))
    if "duplicate_copy" in defects:
        rel = f"{folder}/rdsr_1.resent.dcm"
        _write_bytes(root, rel, first)
        first_rdsr = next(r for r in spec.reports if r.kind == "rdsr")
        files.append(_file_row(rel, first_ds.SOPClassUID, first_ds.SOPInstanceUID, sid,
                               "rdsr", "duplicate_copy", first_rdsr.n_events, len(first)))
    if "not_dose_sr" in defects:
        note_uid = uid(scenario.uid_namespace, seed, index, "note")
        ds = make_basic_text_sr(scenario, spec, note_uid)
        data = _encode(ds)
        rel = f"{folder}/note_1.dcm"
        _write_bytes(root, rel, data)
        files.append(_file_row(rel, ds.SOPClassUID, note_uid, sid, "other", "not_dose_sr",
                               None, len(data)))
    if "not_dicom" in defects:
        rel = f"{folder}/dose_screen.dcm"
        data = (f"Dose summary for study {sid}: exported as text by mistake.\n"
                "This file is not DICOM.\n").encode()
        _write_bytes(root, rel, data)
        files.append(_file_row(rel, None, None, sid, "other", "not_dicom", None, len(data)))
    return files, _study_row(scenario, spec, content_defect)


def _file_row(path, sop_class, sop_instance, study, kind, defect, n_events, size,
              event_uid=None) -> dict:
    """One files.parquet row. ``n_events``: events an RDSR covers, or the 1-based event
    number an image header shows; ``irradiation_event_uid``: an image's (0008,3010)."""
    return {"path": path, "sop_class_uid": None if sop_class is None else str(sop_class),
            "sop_instance_uid": None if sop_instance is None else str(sop_instance),
            "study": study, "kind": kind, "defect": defect, "n_events": n_events,
            "size_bytes": size,
            "irradiation_event_uid": None if event_uid is None else str(event_uid)}


def _study_row(scenario: Scenario, spec: StudySpec, defect: str | None) -> dict:
    """One studies.parquet row.

    ``source_kind`` is "rdsr" when the study has a dose report (even if header images sit
    beside it), "dose_screen" for a unit that sends a dose screen, else "image_header";
    ``n_reports`` counts the objects of that kind (RDSRs, dose screens or the header-only
    images); ``n_header_images`` counts all image headers.
    """
    device = scenario.device(spec.device)
    p = spec.patient
    kinds = [r.kind for r in spec.reports]
    source_kind = "rdsr" if "rdsr" in kinds else \
        "dose_screen" if "dose_screen" in kinds else "image_header"
    return {
        "study": _study_id(spec.index),
        "study_instance_uid": spec.study_uid,
        "site": spec.site,
        "institution": scenario.sites[spec.site].institution,
        "device": spec.device,
        "device_observer_uid": device_observer_uid(scenario, spec.device),
        "station_name": device.station_name,
        "modality": spec.modality,
        "exam": spec.exam,
        "is_unmapped": scenario.exams[spec.exam].unmapped,
        "study_description": spec.study_description,
        "study_datetime": spec.study_datetime,
        "patient_id": p.patient_id,
        "patient_sex": p.sex,
        "patient_age_years": spec.age_years,
        "patient_weight_kg": p.weight_kg,
        "patient_height_m": p.height_m,
        "source_kind": source_kind,
        "n_reports": kinds.count(source_kind),
        **study_truth(spec),
        "story": spec.story,
        "defect": defect,
        "n_header_images": kinds.count("image_header"),
    }


@contextmanager
def _strict_writing():
    """Write with pydicom's RAISE validation: the generator never writes an invalid value,
    whatever the calling process has configured (spawned workers start from defaults)."""
    settings = pydicom.config.settings
    before = settings.writing_validation_mode
    settings.writing_validation_mode = pydicom.config.RAISE
    try:
        yield
    finally:
        settings.writing_validation_mode = before


def _write_chunk(args) -> tuple[list[dict], list[dict]]:
    scenario_path, seed, indices, n_studies, months, plan, root = args
    scenario = load_scenario(scenario_path)
    files, studies = [], []
    with _strict_writing():
        for index in indices:
            f, s = _write_study(scenario, seed, index, n_studies, months,
                                plan.get(index, []), root)
            files += f
            studies.append(s)
    return files, studies


def write_corpus(out_dir: Path | str, *, seed: int = 7, months: int = 3, n_studies: int = 2000,
                 scenario_path: Path | str | None = None, workers: int | None = None) -> CorpusSummary:
    """Generate the corpus and its manifest under `out_dir`.

    Parameters
    ----------
    out_dir : folder to write (created; existing files with the same names are replaced)
    seed, months, n_studies : what to draw; the same values give byte-identical output
    scenario_path : a scenario TOML file; default the bundled demo network
    workers : processes to use (default: CPU count, at most 8)
    """
    if n_studies < 1 or months < 1:
        raise ValueError("need at least one study and one month")
    root = Path(out_dir)
    root.mkdir(parents=True, exist_ok=True)
    scenario = load_scenario(scenario_path)
    plan = plan_defects(scenario, seed, n_studies, months)
    workers = workers or min(8, os.cpu_count() or 1)
    chunk = max(25, n_studies // (workers * 8) or 1)
    jobs = [(scenario_path, seed, list(range(i, min(i + chunk, n_studies))), n_studies, months,
             plan, root) for i in range(0, n_studies, chunk)]
    files, studies = [], []
    if workers == 1 or len(jobs) == 1:
        results = list(map(_write_chunk, jobs))
    else:
        # "spawn", not the Linux default "fork": a forked child inherits the caller's native
        # library state (e.g. an open DuckDB connection and its threads) and can crash on it.
        # Workers need nothing from the parent but their picklable job tuple.
        with ProcessPoolExecutor(max_workers=workers,
                                 mp_context=multiprocessing.get_context("spawn")) as pool:
            results = list(pool.map(_write_chunk, jobs))
    for f, s in results:
        files += f
        studies += s
    files.sort(key=lambda r: r["path"])
    pq.write_table(pa.Table.from_pylist(files, schema=FILES_SCHEMA), root / "files.parquet")
    pq.write_table(pa.Table.from_pylist(studies, schema=STUDIES_SCHEMA), root / "studies.parquet")
    modalities = np.unique([s["modality"] for s in studies], return_counts=True)
    return CorpusSummary(
        out_dir=root,
        n_studies=len(studies),
        n_files=len(files),
        n_defect_files=sum(1 for f in files if f["defect"]),
        by_modality={str(k): int(v) for k, v in zip(*modalities)},
        size_bytes=sum(f["size_bytes"] for f in files),
    )
