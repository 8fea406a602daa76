"""Small helpers shared by tests."""

import fcntl
import os
import pickle
import shutil
from collections.abc import Callable
from pathlib import Path

import pytest


def require_tool(name: str) -> str:
    """Path of an external reference tool; a missing tool fails the test (never skips)."""
    path = shutil.which(name)
    if path is None:
        pytest.fail(f"external tool {name!r} not found: install Debian packages dcmtk and "
                    f"dicom3tools (.ci/run does)", pytrace=False)
    return path


def built_once(tmp_path_factory, name: str, build: Callable[[Path], object]):
    """`build(folder)` run once per test run, its folder and (pickled) result shared.

    Alone, pytest builds it in a fresh temporary folder, as any session fixture. Under
    pytest-xdist (`make test` runs two workers) each worker is a process of its own with its own
    session; the first worker to ask builds the input in the run's common temporary folder under
    an exclusive lock, the others wait on that lock and reuse the folder read-only. Tests that
    write copy first (shutil.copy), as they do alone.
    """
    if "PYTEST_XDIST_WORKER" not in os.environ:
        return build(tmp_path_factory.mktemp(name))
    shared = tmp_path_factory.getbasetemp().parent / f"shared-{name}"
    result_file = shared.with_name(shared.name + ".pickle")
    with open(shared.with_name(shared.name + ".lock"), "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)          # released when the file is closed
        if result_file.exists():
            return pickle.loads(result_file.read_bytes())
        if shared.exists():                        # a worker failed half-way: start again
            shutil.rmtree(shared)
        shared.mkdir()
        result = build(shared)
        result_file.write_bytes(pickle.dumps(result))
        return result


def round_trip(ds, **save_kwargs):
    """Write `ds` to memory and read it back, as a real file would arrive."""
    import io

    import pydicom
    buffer = io.BytesIO()
    ds.save_as(buffer, enforce_file_format=True, **save_kwargs)
    return pydicom.dcmread(io.BytesIO(buffer.getvalue()))


def encode(ds, **save_kwargs) -> bytes:
    import io
    buffer = io.BytesIO()
    ds.save_as(buffer, enforce_file_format=True, **save_kwargs)
    return buffer.getvalue()


def demo_dataset(device: str, report_number: int = 1, *, seed: int = 7, exam: str | None = None,
                 cumulative: bool = False):
    """(spec, dataset) of the first demo study on `device` (optionally of `exam`)."""
    from synthetic_studies.generator import make_dataset
    from synthetic_studies.sampling import make_study
    from synthetic_studies.scenario import load_scenario

    scenario = load_scenario()
    for index in range(5000):
        spec = make_study(scenario, seed, index, 5000, 3)
        if spec.device != device or (exam and spec.exam != exam):
            continue
        if cumulative and len(spec.reports) < 2:
            continue
        return spec, make_dataset(scenario, spec, spec.reports[report_number - 1])
    raise LookupError(f"no demo study on {device} {exam or ''}")


KEY = b"test-key-0123456789abcdef"


def pseudonymiser():
    from pipeline.pseudonym import make_pseudonymiser
    return make_pseudonymiser(KEY)


def write_daily_reports(folder, device: str, days, *, seed: int = 7) -> list:
    """Write one real dose report of demo device `device` per date in `days` into `folder`.

    Each copy of the device's first demo report gets its own study, series, SOP instance,
    patient and irradiation-event UIDs and the date as Study/Series/Content Date, so the
    warehouse sees one study per day from the same device (feed-monitoring tests).
    """
    import copy
    from pathlib import Path

    from pydicom.uid import generate_uid

    _, template = demo_dataset(device, seed=seed)
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for n, day in enumerate(days):
        ds = copy.deepcopy(template)
        stamp = f"{day:%Y%m%d}"
        ds.StudyDate = ds.SeriesDate = ds.ContentDate = stamp
        ds.StudyInstanceUID, ds.SeriesInstanceUID = generate_uid(), generate_uid()
        ds.SOPInstanceUID = generate_uid()
        ds.file_meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
        ds.PatientID = f"FEED-{device}-{n:04d}"
        ds.AccessionNumber = f"F{n:06d}"
        _new_event_uids(ds)
        path = folder / f"{device}-{stamp}.dcm"
        ds.save_as(path, enforce_file_format=True)
        written.append(path)
    return written


def _new_event_uids(node) -> None:
    """Fresh Irradiation Event UIDs (DCM 113769) throughout an SR content tree."""
    from pydicom.uid import generate_uid

    for item in getattr(node, "ContentSequence", []):
        code = item.ConceptNameCodeSequence[0] if "ConceptNameCodeSequence" in item else None
        if item.ValueType == "UIDREF" and code is not None and code.CodeValue == "113769":
            item.UID = generate_uid()
        _new_event_uids(item)


# --- a projection dose report in dcmdump text, encoded by DCMTK's dump2dcm (independent writer)

def _dump_code(tag: str, code: tuple[str, str, str]) -> list[str]:
    value, scheme, meaning = code
    return [f"({tag}) SQ (Sequence with undefined length)", "(fffe,e000) na (Item)",
            f"(0008,0100) SH [{value}]", f"(0008,0102) SH [{scheme}]",
            f"(0008,0104) LO [{meaning}]", "(fffe,e00d) na (ItemDelimitationItem)",
            "(fffe,e0dd) na (SequenceDelimitationItem)"]


def _dump_item(relationship: str | None, value_type: str, concept, value=None,
               children=()) -> list[str]:
    lines = [f"(0040,a010) CS [{relationship}]"] if relationship else []
    lines += [f"(0040,a040) CS [{value_type}]", *_dump_code("0040,a043", concept)]
    if value_type == "CODE":
        lines += _dump_code("0040,a168", value)
    elif value_type == "UIDREF":
        lines.append(f"(0040,a124) UI [{value}]")
    elif value_type == "NUM":
        number, unit = value
        lines += ["(0040,a300) SQ (Sequence with undefined length)", "(fffe,e000) na (Item)",
                  *_dump_code("0040,08ea", (unit, "UCUM", unit)),
                  f"(0040,a30a) DS [{number}]", "(fffe,e00d) na (ItemDelimitationItem)",
                  "(fffe,e0dd) na (SequenceDelimitationItem)"]
    elif value_type == "CONTAINER":
        lines.append("(0040,a050) CS [SEPARATE]")
    if children:
        lines.append("(0040,a730) SQ (Sequence with undefined length)")
        for child in children:
            lines += ["(fffe,e000) na (Item)", *child, "(fffe,e00d) na (ItemDelimitationItem)"]
        lines.append("(fffe,e0dd) na (SequenceDelimitationItem)")
    return lines


def projection_report_dump(*, sop: str, study: str, events: list[dict],
                           study_date: str = "20261015") -> str:
    """A single-plane X-Ray Radiation Dose SR (PS3.16 TID 10001/10002/10003) in dcmdump text.

    Each event: uid, dose_rp_gy, kvp, primary, secondary, sod_mm, sid_mm, area_m2,
    table_height_mm, and optionally modifier / relationship as (value, scheme, meaning) codes
    for Patient Orientation Modifier (CID 20) and Patient Table Relationship (CID 21).
    """
    dcm = lambda v, m: (v, "DCM", m)  # noqa: E731
    plane = _dump_item("HAS CONCEPT MOD", "CODE", dcm("113764", "Acquisition Plane"),
                       dcm("113622", "Single Plane"))
    rp_def = _dump_item("CONTAINS", "CODE", dcm("113780", "Reference Point Definition"),
                        dcm("113860", "15cm from Isocenter toward Source"))
    total = sum(e["dose_rp_gy"] for e in events)
    accumulated = _dump_item("CONTAINS", "CONTAINER", dcm("113702", "Accumulated X-Ray Dose Data"),
                             children=[plane, _dump_item("CONTAINS", "NUM", dcm("113725", "Dose (RP) Total"),
                                                         (f"{total:g}", "Gy")), rp_def])
    items = [_dump_item("HAS CONCEPT MOD", "CODE", dcm("121058", "Procedure reported"),
                        dcm("113704", "Projection X-Ray")), accumulated]
    for e in events:
        children = [plane,
                    _dump_item("CONTAINS", "UIDREF", dcm("113769", "Irradiation Event UID"), e["uid"]),
                    _dump_item("CONTAINS", "CODE", dcm("113721", "Irradiation Event Type"),
                               ("44491008", "SCT", "Fluoroscopy"))]
        if e.get("relationship"):
            children.append(_dump_item("CONTAINS", "CODE", dcm("113745", "Patient Table Relationship"),
                                       e["relationship"]))
        if e.get("modifier"):
            children.append(_dump_item(
                "CONTAINS", "CODE", dcm("113743", "Patient Orientation"),
                ("102538003", "SCT", "recumbent"),
                children=[_dump_item("HAS CONCEPT MOD", "CODE",
                                     dcm("113744", "Patient Orientation Modifier"), e["modifier"])]))
        for code, meaning, value, unit in (
                ("113738", "Dose (RP)", e["dose_rp_gy"], "Gy"), ("113733", "KVP", e["kvp"], "kV"),
                ("112011", "Positioner Primary Angle", e["primary"], "deg"),
                ("112012", "Positioner Secondary Angle", e["secondary"], "deg"),
                ("113748", "Distance Source to Isocenter", e["sod_mm"], "mm"),
                ("113750", "Distance Source to Detector", e["sid_mm"], "mm"),
                ("113790", "Collimated Field Area", e["area_m2"], "m2"),
                ("113753", "Table Height Position", e["table_height_mm"], "mm")):
            children.append(_dump_item("CONTAINS", "NUM", dcm(code, meaning), (f"{value:g}", unit)))
        children.append(rp_def)
        items.append(_dump_item("CONTAINS", "CONTAINER", dcm("113706", "Irradiation Event X-Ray Data"),
                                children=children))
    header = [
        "(0008,0005) CS [ISO_IR 100]", "(0008,0016) UI [1.2.840.10008.5.1.4.1.1.88.67]",
        f"(0008,0018) UI [{sop}]", f"(0008,0020) DA [{study_date}]", "(0008,0030) TM [101500]",
        f"(0008,0023) DA [{study_date}]", "(0008,0033) TM [120000]", "(0008,0060) CS [SR]",
        "(0008,0070) LO [Invented Imaging Works]", "(0008,0080) LO [Nowhere Test Hospital]",
        "(0008,1010) SH [LABXA9]", "(0008,1030) LO [INTERVENTION]", "(0008,1090) LO [Model Q]",
        "(0010,0010) PN [Test^Position]", "(0010,0020) LO [RW-0009]", "(0010,0040) CS [F]",
        "(0018,1000) LO [SN-0009]", f"(0020,000d) UI [{study}]", f"(0020,000e) UI [{sop}.1]",
        "(0020,0011) IS [999]", "(0020,0013) IS [1]",
        "(0040,a491) CS [COMPLETE]", "(0040,a493) CS [UNVERIFIED]",
        "(0040,a504) SQ (Sequence with undefined length)", "(fffe,e000) na (Item)",
        "(0008,0105) CS [DCMR]", "(0040,db00) CS [10001]", "(fffe,e00d) na (ItemDelimitationItem)",
        "(fffe,e0dd) na (SequenceDelimitationItem)"]
    root = _dump_item(None, "CONTAINER", dcm("113701", "X-Ray Radiation Dose Report"),
                      children=items)
    return "\n".join(header + root) + "\n"


def write_with_dump2dcm(folder, name: str, text: str):
    """Encode dcmdump text with DCMTK's dump2dcm (+te: explicit VR little endian)."""
    import subprocess
    dump, path = folder / f"{name}.txt", folder / f"{name}.dcm"
    dump.write_text(text, encoding="latin-1")
    subprocess.run([require_tool("dump2dcm"), "+te", str(dump), str(path)], check=True,
                   capture_output=True, text=True)
    return path
