"""`kerma completeness` against a real archive (Orthanc, QIDO-RS): the archive's studies per
modality and station against the studies with a dose object in the warehouse.

Expected values come from the corpus files themselves, read with pydicom (the archive holds
exactly those files): Study Instance UID, Modality and Station Name of each file."""

from __future__ import annotations

import duckdb
import pydicom

from pipeline.ingest import ingest
from pipeline.pseudonym import make_pseudonymiser
from tests.helpers import KEY

from .conftest import kerma


def _headers(archive):
    # the files Orthanc holds, as (study uid, modality, station name, path)
    out = []
    for path in archive.stored_paths:
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        out.append((str(ds.StudyInstanceUID), str(ds.Modality), str(ds.get("StationName", "")) or None, path))
    return out


def test_completeness_counts_the_archive_against_the_warehouse(archive, tmp_path):
    """QIDO-RS; the C-FIND test below must store exactly the same rows."""
    headers = _headers(archive)
    image_stations = sorted({(m, st) for _, m, st, _ in headers if m not in ("SR", "OT")})
    skipped = image_stations[0]   # this (modality, station): its studies are not ingested
    skipped_studies = {uid for uid, m, st, _ in headers if (m, st) == skipped}
    db = tmp_path / "kerma.duckdb"
    ingest([p for uid, _, _, p in headers if uid not in skipped_studies], db, KEY)

    result = kerma("completeness", "--warehouse", str(db), "--period", "2026-09",
                   "--dicomweb", f"{archive.url}/dicom-web")
    assert result.returncode == 0, result.stdout + result.stderr
    assert "archive studies have a dose object" in result.stdout

    pseudonym = make_pseudonymiser(KEY)
    with duckdb.connect(str(db), read_only=True) as con:
        held = {r[0] for r in con.execute("select distinct study_key from raw_dose_object").fetchall()}
        rows = {(m, st): (n, k, share) for m, st, n, k, share in con.execute(
            "select modality, station_name, n_archive_studies, n_with_dose_object, "
            "share_with_dose_object from capture_completeness").fetchall()}
        missing = {r[0] for r in con.execute("select study_key from capture_missing_studies").fetchall()}
    # every archive study appears, under the (modality, station) of its images
    by_group: dict = {}
    for uid, m, st, _ in headers:
        if m not in ("SR", "OT"):
            by_group.setdefault((m, st), set()).add(uid)
    for group, uids in by_group.items():
        n, k, share = rows[group]
        assert n == len(uids), group
        assert k == sum(pseudonym("study", u) in held for u in uids), group
        assert share == k / n
    assert rows[skipped][1] == 0 and rows[skipped][0] == len(skipped_studies) > 0
    all_studies = {uid for uid, *_ in headers}
    assert len(all_studies) == archive.n_studies
    assert missing == {pseudonym("study", u) for u in all_studies} - held
    assert {pseudonym("study", u) for u in skipped_studies} <= missing
    # the data-quality page shows the check
    site = tmp_path / "site"
    audit = kerma("dashboard", "--warehouse", str(db), "--period", "2026-09", "--out", str(site))
    assert audit.returncode == 0, audit.stdout + audit.stderr
    page = (site / "data-quality.html").read_text()
    table = page[page.index('id="table-dq-capture-completeness"'):]
    assert f"CSV ({len(rows)} rows)" in table[:400] and f"{skipped[1]}" in table
    assert f"CSV ({len(missing)} rows)" in page[page.index('id="table-dq-capture-missing"'):][:400]
    # no identifier enters the warehouse: study UIDs appear only as pseudonyms
    data = db.read_bytes()
    assert not any(uid.encode() in data for uid in skipped_studies)


def test_completeness_refuses_a_missing_warehouse(archive, tmp_path):
    missing = tmp_path / "missing.duckdb"
    result = kerma("completeness", "--warehouse", str(missing), "--period", "2026-09",
                   "--dicomweb", f"{archive.url}/dicom-web")
    assert result.returncode == 2 and "does not exist" in result.stdout and not missing.exists()


def test_completeness_by_c_find_matches_qido_rs(archive, tmp_path):
    headers = _headers(archive)
    db = tmp_path / "kerma.duckdb"
    mammo = {uid for uid, m, _, _ in headers if m == "MG"}
    assert mammo
    ingest([p for uid, _, _, p in headers if uid not in mammo], db, KEY)   # mammography studies missing
    results = {}
    for name, args in (("qido", ["--dicomweb", f"{archive.url}/dicom-web"]),
                       ("cfind", ["--archive", f"127.0.0.1:{archive.dicom_port}", "--archive-ae",
                                  archive.aet, "--ae-title", "KERMAPULL"])):
        result = kerma("completeness", "--warehouse", str(db), "--period", "2026-09", *args)
        assert result.returncode == 0, result.stdout + result.stderr
        with duckdb.connect(str(db), read_only=True) as con:
            results[name] = (
                con.execute("select * from capture_completeness order by all").fetchall(),
                con.execute("select * from capture_missing_studies order by all").fetchall())
    assert results["qido"] == results["cfind"]
    rows, missing = results["cfind"]
    mg = [r for r in rows if r[1] == "MG"]
    assert mg and all(r[5] == 0 for r in mg) and sum(r[4] for r in mg) == len(mammo)
    assert len(missing) >= len(mammo)
