"""encoder.py writes the bytes pydicom writes, without building pydicom Datasets.

The reference is pydicom itself: ``generator.make_dataset`` builds each object as a Dataset
by keyword assignment and ``pydicom.dcmwrite(..., enforce_file_format=True)`` writes it;
the fast path (``make_parts`` -> ``encode``) never makes that Dataset. DCMTK's ``dsrdump``
(OFFIS), a reader independent of both, reads a fast-encoded dose report.
"""

import io
import subprocess
import warnings

import pydicom
import pydicom.config
import pytest

from pipeline import concepts as C
from synthetic_studies.encoder import Header, encode
from synthetic_studies.generator import make_dataset, make_parts
from synthetic_studies.sampling import make_study
from synthetic_studies.scenario import load_scenario
from synthetic_studies.sr import num_node, to_dataset, uid_node
from synthetic_studies.write import _strict_writing
from tests.helpers import require_tool


def _dcmwrite(ds) -> bytes:
    buffer = io.BytesIO()
    pydicom.dcmwrite(buffer, ds, enforce_file_format=True)
    return buffer.getvalue()


def _first_studies(scenario, want: set[tuple[str, str]], n: int = 3000):
    """One study per (device, report kind) in `want`, from the demo corpus' draws."""
    for index in range(n):
        spec = make_study(scenario, 7, index, n, 3)
        for report in spec.reports:
            if (spec.device, report.kind) in want:
                want.discard((spec.device, report.kind))
                yield spec, report
        if not want:
            return


def test_every_kind_of_object_of_every_unit_is_written_as_pydicom_writes_it():
    scenario = load_scenario()
    want = {(d.id, kind) for d in scenario.devices
            for kind in ("rdsr", "image_header", "dose_screen")}
    checked = set()
    with _strict_writing():
        for spec, report in _first_studies(scenario, set(want)):
            header, root = make_parts(scenario, spec, report)
            fast = encode(header, root)
            again = encode(*make_parts(scenario, spec, report))  # remembered bytes reused
            reference = _dcmwrite(make_dataset(scenario, spec, report))
            assert fast == reference, (spec.device, report.kind)
            assert again == reference, (spec.device, report.kind)
            checked.add((spec.device, report.kind))
    # every unit's report kind seen (units send one or two of the three kinds)
    assert {d for d, _ in checked} == {d.id for d in scenario.devices}
    assert {k for _, k in checked} == {"rdsr", "image_header", "dose_screen"}


def test_the_fast_path_makes_no_dataset_for_reports_and_image_headers():
    """The speed comes from not building Datasets: the parts are a Header and Items."""
    scenario = load_scenario()
    kinds = set()
    for spec, report in _first_studies(scenario, {(d.id, k) for d in scenario.devices
                                                  for k in ("rdsr", "image_header")}):
        header, root = make_parts(scenario, spec, report)
        assert isinstance(header, Header)
        assert (root is not None) == (report.kind == "rdsr")
        kinds.add(report.kind)
    assert kinds == {"rdsr", "image_header"}


def _small_report(event_uid: str) -> tuple[Header, tuple]:
    scenario = load_scenario()
    spec, report = next(_first_studies(scenario, {("tgh-ct1", "rdsr")}))
    header, root = make_parts(scenario, spec, report)
    root = (*root[:-1], (root[-1][0], (uid_node(C.IRRADIATION_EVENT_UID, event_uid),)))
    return header, root


def test_an_invalid_value_warns_in_every_file_that_holds_it():
    """Remembered bytes never skip pydicom's validation: a UID with letters (PS3.5 9.1:
    digits and dots only) warns each time, as DataElement would, and raises when pydicom's
    reading validation mode is RAISE."""
    header, root = _small_report("1.2.3.abc")
    settings = pydicom.config.settings
    before = settings.reading_validation_mode  # the test session's is RAISE (conftest)
    try:
        settings.reading_validation_mode = pydicom.config.WARN
        for _ in range(2):
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                data = encode(header, root)
            assert any("1.2.3.abc" in str(w.message) for w in caught)
            assert b"1.2.3.abc" in data
        settings.reading_validation_mode = pydicom.config.RAISE
        with pytest.raises(ValueError, match="1.2.3.abc"):
            encode(header, root)
    finally:
        settings.reading_validation_mode = before


def test_what_the_encoder_does_not_handle_goes_through_pydicom():
    """A float for a Decimal String is pydicom's to format: the encoder hands it over and the
    bytes are still pydicom's (the check values: dcmwrite of the same assignments)."""
    header, root = _small_report("1.2.3.4")
    header.PatientWeight = 72.5  # DS from a float: not handled by the encoder
    fast = encode(header, root)
    ds = header.dataset()
    for elem in to_dataset(root):
        ds[elem.tag] = elem
    assert fast == _dcmwrite(ds)
    assert pydicom.dcmread(io.BytesIO(fast)).PatientWeight == 72.5


def test_a_num_item_out_of_tag_order_is_left_to_pydicom_which_sorts_it():
    """Items must list their elements in tag order; one that does not is still written
    right (pydicom sorts), not silently in the wrong order."""
    header, root = _small_report("1.2.3.4")
    good = num_node(C.KVP, 120, C.UNIT_KV)
    swapped = (*good[:3], (good[3][0], (tuple(reversed(good[3][1][0])),)))
    bad_root = (*root[:-1], (root[-1][0], (swapped,)))
    good_root = (*root[:-1], (root[-1][0], (good,)))
    assert encode(header, bad_root) == encode(header, good_root)


def test_dsrdump_reads_a_fast_encoded_dose_report(tmp_path):
    tool = require_tool("dsrdump")
    scenario = load_scenario()
    spec, report = next(_first_studies(scenario, {("tgh-ct1", "rdsr")}))
    with _strict_writing():
        data = encode(*make_parts(scenario, spec, report))
    path = tmp_path / "rdsr.dcm"
    path.write_bytes(data)
    run = subprocess.run([tool, str(path)], capture_output=True, text=True)
    problems = [ln for ln in run.stderr.splitlines() if ln.startswith(("E:", "F:", "W:"))]
    assert run.returncode == 0 and problems == []
    assert "X-Ray Radiation Dose SR Document" in run.stdout
    # the accumulated DLP dsrdump reads is the generator's (TID 10012, mGy.cm)
    events = spec.ct_events[:report.n_events]
    dlp = round(sum(e.dlp_mgy_cm for e in events if e.dlp_mgy_cm is not None), 4)
    line = next(ln for ln in run.stdout.splitlines() if "CT Dose Length Product Total" in ln)
    assert float(line.split('="')[1].split('"')[0]) == pytest.approx(dlp, rel=1e-12)


def test_helper_processes_write_the_same_corpus(tmp_path, monkeypatch):
    """With helpers forced to start (their start made free), two processes write the very
    bytes one writes; and the helper did write some of the studies."""
    import hashlib

    from synthetic_studies import write

    def digests(root):
        return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
                for p in sorted(root.rglob("*")) if p.is_file()}

    here = []  # studies this process wrote (a spawned helper imports the module afresh)
    original = write._write_study

    def counted(scenario, seed, index, *args):
        here.append(index)
        return original(scenario, seed, index, *args)

    monkeypatch.setattr(write, "HELPER_START_CPU_S", 0.0)
    write.write_corpus(tmp_path / "one", seed=13, months=1, n_studies=100, workers=1)
    monkeypatch.setattr(write, "_write_study", counted)
    write.write_corpus(tmp_path / "two", seed=13, months=1, n_studies=100, workers=2)
    assert digests(tmp_path / "one") == digests(tmp_path / "two")
    assert 25 <= len(here) < 100  # the first chunk of 25 here, some chunks in the helper
