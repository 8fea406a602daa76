"""Small helpers shared by tests."""

import shutil

import pytest


def require_tool(name: str) -> str:
    """Path of an external reference tool; a missing tool fails the test (never skips)."""
    path = shutil.which(name)
    if path is None:
        pytest.fail(f"external tool {name!r} not found: install Debian packages dcmtk and "
                    f"dicom3tools (.ci/run does)", pytrace=False)
    return path


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
