"""`kerma pull` from a real archive (Orthanc, started by the tests) over DIMSE and DICOMweb."""

from __future__ import annotations

import re

import pydicom
import pytest

from pipeline.ingest import ingest
from tests.helpers import KEY

from .conftest import kerma

FROM, TO = "2026-09-01", "2026-09-30"


def _counts(stdout: str) -> dict[str, int]:
    match = re.search(r"(\d+) studies from .*?, (\d+) dose reports; (\d+) already held, (\d+) "
                      r"fetched into .*?, (\d+) failed", " ".join(stdout.split()))
    assert match, stdout
    return dict(zip(("studies", "found", "already", "fetched", "failed"), map(int, match.groups())))


def _dimse(archive, inbox, *extra: str) -> list[str]:
    return ["pull", "--archive", f"127.0.0.1:{archive.dicom_port}", "--archive-ae", archive.aet,
            "--ae-title", "KERMAPULL", "--port", str(archive.our_port), "--from", FROM, "--to", TO,
            "--inbox", str(inbox), *extra]


def _assert_fetched_all(archive, inbox) -> None:
    stored = {p.name[:-4]: p for p in inbox.iterdir()}
    assert set(stored) == set(archive.dose_reports)       # dose reports only, no images
    for uid, original in archive.dose_reports.items():
        assert pydicom.dcmread(stored[uid]) == pydicom.dcmread(original)


@pytest.mark.parametrize("method", ["move", "get"])
def test_pull_over_dimse_is_idempotent(archive, tmp_path, method):
    inbox = tmp_path / "inbox"
    first = kerma(*_dimse(archive, inbox, "--method", method))
    assert first.returncode == 0, first.stdout + first.stderr
    counts = _counts(first.stdout)
    n = len(archive.dose_reports)
    assert n >= 5 and counts == {"studies": archive.n_studies, "found": n, "already": 0, "fetched": n, "failed": 0}
    _assert_fetched_all(archive, inbox)
    second = kerma(*_dimse(archive, inbox, "--method", method))
    assert _counts(second.stdout) == {**counts, "already": n, "fetched": 0}
    if method == "get":
        return   # resuming is the same code path for both methods; checked once, with move
    # resumable: what went missing (an interrupted run) is fetched, and only that
    missing = sorted(inbox.iterdir())[0]
    missing.unlink()
    third = kerma(*_dimse(archive, inbox, "--method", method))
    assert _counts(third.stdout) == {**counts, "already": n - 1, "fetched": 1}
    _assert_fetched_all(archive, inbox)


def test_pull_skips_what_the_warehouse_holds_and_filters_by_modality(archive, tmp_path):
    inbox = tmp_path / "inbox"
    assert kerma(*_dimse(archive, inbox, "--modality", "MG")).returncode == 0
    mammo = {p.name[:-4] for p in inbox.iterdir()}
    assert mammo and all(pydicom.dcmread(inbox / f"{u}.dcm").Modality == "SR" for u in mammo)
    assert mammo < set(archive.dose_reports)
    # once ingested and moved away, the warehouse alone says they are held
    db = tmp_path / "kerma.duckdb"
    ingest([inbox], db, KEY)
    for path in inbox.iterdir():
        path.rename(tmp_path / path.name)
    again = kerma(*_dimse(archive, inbox, "--modality", "MG", "--warehouse", str(db)))
    counts = _counts(again.stdout)
    assert counts["found"] == len(mammo) and counts["already"] == len(mammo)
    assert counts["fetched"] == 0 and list(inbox.iterdir()) == []


def test_pull_over_dicomweb(archive, tmp_path):
    inbox = tmp_path / "inbox"
    url = f"{archive.url}/dicom-web"
    first = kerma("pull", "--dicomweb", url, "--from", FROM, "--to", TO, "--inbox", str(inbox))
    assert first.returncode == 0, first.stdout + first.stderr
    n = len(archive.dose_reports)
    assert _counts(first.stdout) == {"studies": archive.n_studies, "found": n, "already": 0, "fetched": n,
                                     "failed": 0}
    _assert_fetched_all(archive, inbox)
    second = kerma("pull", "--dicomweb", url, "--from", FROM, "--to", TO, "--inbox", str(inbox))
    assert _counts(second.stdout)["fetched"] == 0
    # a narrower date range (PS3.4 C.2.2.2.5 range matching on StudyDate)
    narrow = tmp_path / "narrow"
    third = kerma("pull", "--dicomweb", url, "--from", "2026-09-01", "--to", "2026-09-10",
                  "--inbox", str(narrow))
    expected = {u for u in archive.dose_reports if archive.study_date[u] <= "20260910"}
    assert expected and expected < set(archive.dose_reports)
    assert {p.name[:-4] for p in narrow.iterdir()} == expected
    assert _counts(third.stdout)["fetched"] == len(expected)


def test_pull_names_an_archive_that_does_not_answer(archive, tmp_path):
    from .conftest import free_port
    result = kerma("pull", "--archive", f"127.0.0.1:{free_port()}", "--archive-ae", "NOBODY",
                   "--ae-title", "KERMAPULL", "--port", str(free_port()), "--from", FROM,
                   "--to", TO, "--inbox", str(tmp_path / "inbox"))
    assert result.returncode == 2
    assert "archive NOBODY at 127.0.0.1:" in result.stdout and "refused or did not answer" in result.stdout
