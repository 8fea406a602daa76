"""Site extracts -> network warehouse: the round trip equals an audit of the combined data, bad
extracts are refused with nothing changed, and no identifier leaves a site.

The combined warehouse is the session corpus (seed 7, 320 studies, four invented sites)
ingested with the test key; each site is exported from it, as each site would export from its
own warehouse made with the same (shared network) key.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import shutil
from pathlib import Path

import duckdb
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pydicom
import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from pipeline.errors import ExtractError
from pipeline.ingest import ingest
from pipeline.network import EXTRACT_TABLES, KeyScope, extract_id
from pipeline.network_store import export_site, merge_extracts
from tests.helpers import KEY

from tests.network.conftest import FIRST, LAST, SITES
SITE_KEY = b"marram-point-own-key-0123456789"   # MPH's own key (per-site keys)
RAW = ("raw_device", "raw_study", "raw_dose_object", "raw_ct_event", "raw_projection_event",
       "raw_accumulated", "raw_value_issue", "raw_site_map", "network_extract")


def _digest(db: Path) -> dict[str, tuple]:
    """Row count and an order-free content hash of every table a merge writes."""
    with duckdb.connect(str(db), read_only=True) as con:
        return {t: con.execute(f"select count(*), md5(coalesce(string_agg(cast(x as varchar), '|' "
                               f"order by cast(x as varchar)), '')) from {t} as x").fetchone()
                for t in RAW}


def _file_hash(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _query(db: Path, text: str) -> pd.DataFrame:
    with duckdb.connect(str(db), read_only=True) as con:
        return con.execute(text).df()


@pytest.fixture(scope="module")
def mph_own_key(corpus, tmp_path_factory) -> dict[str, Path]:
    """Marram Point's files in a site warehouse of its own with its own key: first without
    November (extract 'early'), then with it (extract 'late'), both of the same period."""
    root = tmp_path_factory.mktemp("mph")
    db = root / "mph.duckdb"
    months = sorted(p for p in (corpus / "MPH").glob("*/*") if p.is_dir())
    ingest([p for p in months if p.name != "2026-11"], db, SITE_KEY)
    out = {"db": db}
    out["early"] = export_site(db, root / "early", site=SITES["MPH"], date_from=FIRST,
                               date_to=LAST, key=SITE_KEY, key_scope=KeyScope.SITE).out_dir
    ingest([p for p in months if p.name == "2026-11"], db, SITE_KEY)
    out["late"] = export_site(db, root / "late", site=SITES["MPH"], date_from=FIRST,
                              date_to=LAST, key=SITE_KEY, key_scope=KeyScope.SITE).out_dir
    out["declared_network"] = export_site(db, root / "wrong-scope", site=SITES["MPH"],
                                          date_from=FIRST, date_to=LAST, key=SITE_KEY,
                                          key_scope=KeyScope.NETWORK).out_dir
    return out


# --- round trip -------------------------------------------------------------------------------

def _assert_same(a: pd.DataFrame, b: pd.DataFrame, keys: list[str], values: list[str]) -> None:
    """Same rows (matched on `keys`), values equal up to float summation order (rtol 1e-9)."""
    a, b = ([f[keys + values].assign(**{k: f[k].astype(str) for k in keys})
             .sort_values(keys).reset_index(drop=True) for f in (a, b)])
    pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-9)


def test_audit_medians_of_the_network_equal_those_of_the_combined_data(combined, network):
    a = _query(combined, "select * from audit_medians")
    b = _query(network, "select * from audit_medians")
    assert len(a) > 50 and a["site"].nunique() == 4       # non-empty guard: four sites audited
    _assert_same(a, b, ["site", "device_key", "exam_type", "quantity", "population", "stratum",
                        "phantom", "reference_set", "is_above_reference", "is_sample_adequate"],
                 ["n", "median", "p25", "p75", "reference_value"])


def test_network_reference_and_dose_alerts_equal_those_of_the_combined_data(combined, network):
    a = _query(combined, "select * from network_reference")
    b = _query(network, "select * from network_reference")
    assert (a["n_sites"] > 1).any()
    _assert_same(a, b, ["exam_type", "quantity", "population", "stratum", "phantom"],
                 ["n_rooms", "n_sites", "n_exams", "typical_value"])
    a = _query(combined, "select * from dose_alerts")
    b = _query(network, "select * from dose_alerts")
    assert len(a) > 0
    _assert_same(a, b, ["study_key", "patient_key", "site", "exam_type", "rule", "action",
                        "quantity"], ["value", "threshold"])
    counts = "select rule, count(*) as n from dose_alerts group by rule order by rule"
    assert _query(combined, counts).equals(_query(network, counts))


def test_study_dose_rows_are_the_same_in_both_warehouses(combined, network):
    a = _query(combined, "select * from study_dose")
    b = _query(network, "select * from study_dose")
    assert len(a) > 300
    _assert_same(a, b, ["study_key", "patient_key", "device_key", "site", "modality",
                        "study_date", "exam_type"],
                 ["dlp_total_mgy_cm", "ctdivol_mgy", "dap_total_gy_cm2", "dose_rp_total_mgy",
                  "agd_total_mgy", "patient_age_years", "event_count"])


def test_each_extract_records_its_site_period_and_key(extracts, network):
    rows = _query(network, "select * from network_extract order by site")
    assert list(rows["site"]) == sorted(SITES.values())
    assert set(rows["key_scope"]) == {"network"} and rows["key_fingerprint"].nunique() == 1
    assert set(rows["date_from"].astype(str)) == {"2026-09-01"}
    assert set(rows["date_to"].astype(str)) == {"2026-11-30"}
    manifest = json.loads((extracts["TGH"] / "manifest.json").read_text())
    assert manifest["schema_version"] == 1 and manifest["site"] == SITES["TGH"]
    assert manifest["pseudonymisation"]["key_scope"] == "network"
    for entry in manifest["files"]:   # SHA-256 of each file, checked independently (hashlib)
        assert entry["sha256"] == _file_hash(extracts["TGH"] / entry["file"])
        assert entry["rows"] == pq.read_metadata(extracts["TGH"] / entry["file"]).num_rows
    # every merged row carries its extract's id
    ids = set(rows["extract_id"])
    assert set(_query(network, "select distinct run_id from raw_dose_object")["run_id"]) == ids


# --- no identifier leaves the site ------------------------------------------------------------

@pytest.fixture(scope="module")
def identifiers(corpus, combined) -> dict[str, set[str]]:
    """Every direct identifier of the synthetic patients, read from the DICOM files themselves."""
    found: dict[str, set[str]] = {k: set() for k in (
        "PatientName", "PatientID", "AccessionNumber", "PatientBirthDate", "StudyID",
        "StudyInstanceUID", "SeriesInstanceUID", "SOPInstanceUID", "path")}
    for path in sorted(corpus.rglob("*.dcm")):
        found["path"].update({str(path), str(path.relative_to(corpus))})
        try:
            ds = pydicom.dcmread(path, stop_before_pixels=True)
        except Exception:   # the corpus holds deliberately broken files; they carry nothing to find
            continue
        for keyword in found:
            value = ds.get(keyword) if keyword != "path" else None
            if value:
                found[keyword].add(str(value))
    with duckdb.connect(str(combined), read_only=True) as con:   # the UIDs the parser kept
        found["event_uid"] = {r[0] for r in con.execute(
            "select event_uid from raw_ct_event union select event_uid from raw_projection_event")
            .fetchall()}
        found["path"] |= {r[0] for r in con.execute("select path from raw_dose_object").fetchall()}
    found["folder"] = {str(corpus)}
    return found


def test_no_identifier_in_any_extract_file(extracts, identifiers):
    assert len(identifiers["PatientID"]) > 100 and len(identifiers["AccessionNumber"]) > 100
    assert len(identifiers["SOPInstanceUID"]) > 300 and identifiers["PatientBirthDate"]
    files = [f for folder in extracts.values() for f in sorted(folder.iterdir())]
    assert len(files) == 4 * (len(EXTRACT_TABLES) + 1)
    for path in files:
        data = path.read_bytes()
        # positive control: the plain (uncompressed) Parquet shows its strings to a byte search
        if path.name == "device.parquet":
            assert b"Tarnwick" in data or b"Oxlade" in data or b"Marram" in data or b"Cobbleford" in data
        for kind, values in identifiers.items():
            leaked = [v for v in values if v.encode() in data]
            assert leaked == [], f"{path.name} carries {kind} {leaked[:3]}"


def test_extract_columns_hold_no_path_date_of_birth_or_original_uid(extracts, identifiers):
    uids = identifiers["SOPInstanceUID"] | identifiers["event_uid"] | identifiers["SeriesInstanceUID"]
    for folder in extracts.values():
        for spec in EXTRACT_TABLES:
            table = pq.read_table(folder / f"{spec.name}.parquet")
            assert not {"path", "sha256", "patient_birth_date"} & set(table.column_names)
            for column in spec.uid_columns:
                values = {v for v in table.column(column).to_pylist() if v}
                assert not values & uids
                # pseudonyms are valid UIDs (PS3.5 9.1: digits and dots, at most 64 characters)
                assert all(v.startswith("2.25.") and len(v) <= 64 for v in values)


# --- refused extracts change nothing ----------------------------------------------------------

def _rewrite_manifest(folder: Path, change) -> None:
    path = folder / "manifest.json"
    manifest = json.loads(path.read_text())
    change(manifest)
    path.write_text(json.dumps(manifest))


def _reseal(manifest: dict) -> None:
    """What a forger would do: make the extract id agree with the changed facts."""
    manifest["extract_id"] = extract_id(manifest["site"], manifest["period"]["from"],
                                        manifest["period"]["to"],
                                        manifest["pseudonymisation"]["key_fingerprint"],
                                        manifest["files"])


def _tamper_rows(folder):
    _rewrite_manifest(folder, lambda m: m["files"][2].update(rows=m["files"][2]["rows"] + 1))


def _tamper_site(folder):
    _rewrite_manifest(folder, lambda m: m.update(site="Another Site"))


def _change_file(folder):
    table = pq.read_table(folder / "study.parquet")
    pq.write_table(table.slice(1), folder / "study.parquet", compression="none")


def _edit_checksum(folder):
    def change(m):
        m["files"][0]["sha256"] = "0" * 64
        _reseal(m)
    _rewrite_manifest(folder, change)


def _wrong_version(folder):
    _rewrite_manifest(folder, lambda m: m.update(schema_version=2))


def _truncate(folder):
    path = folder / "dose_object.parquet"
    path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])


def _truncate_and_reseal(folder):
    _truncate(folder)
    path = folder / "dose_object.parquet"

    def change(m):
        entry = next(f for f in m["files"] if f["table"] == "dose_object")
        entry["sha256"] = _file_hash(path)
        _reseal(m)
    _rewrite_manifest(folder, change)


def _extra_column(folder):
    path = folder / "device.parquet"
    table = pq.read_table(path)
    pq.write_table(table.append_column("patient_name", table.column("device_key")), path)

    def change(m):
        next(f for f in m["files"] if f["table"] == "device")["sha256"] = _file_hash(path)
        _reseal(m)
    _rewrite_manifest(folder, change)


def _repeat_event(folder):
    """A hand-made extract: one projection event written twice, checksum and id made to agree.
    Merged, the event would count twice in its study's totals (raw_projection_event has no
    primary key), so it is refused."""
    path = folder / "projection_event.parquet"
    table = pq.read_table(path)
    pq.write_table(pa.concat_tables([table, table.slice(0, 1)]), path, compression="none")

    def change(m):
        entry = next(f for f in m["files"] if f["table"] == "projection_event")
        entry.update(sha256=_file_hash(path), rows=table.num_rows + 1)
        _reseal(m)
    _rewrite_manifest(folder, change)


def _no_manifest(folder):
    (folder / "manifest.json").unlink()


def _bad_json(folder):
    (folder / "manifest.json").write_text("{ not json")


@pytest.mark.parametrize("spoil, message", [
    (_tamper_rows, "manifest was altered"),
    (_tamper_site, "manifest was altered"),
    (_change_file, "study.parquet does not match its SHA-256"),
    (_edit_checksum, "device.parquet does not match its SHA-256"),
    (_wrong_version, "extract schema version 2 is not supported"),
    (_truncate, "dose_object.parquet does not match its SHA-256"),
    (_truncate_and_reseal, "dose_object.parquet is not readable Parquet"),
    (_extra_column, "unexpected: patient_name"),
    (_repeat_event, "projection_event.parquet repeats 1 value"),
    (_no_manifest, "no manifest.json"),
    (_bad_json, "manifest is not valid JSON"),
], ids=lambda v: getattr(v, "__name__", "")[1:] if callable(v) else None)
def test_a_bad_extract_is_refused_and_nothing_changes(spoil, message, mph_own_key, network,
                                                      tmp_path):
    bad = tmp_path / "bad"
    shutil.copytree(mph_own_key["late"], bad)
    spoil(bad)
    before, digest = _file_hash(network), _digest(network)
    with pytest.raises(ExtractError, match=message):
        # the good extract given first is not merged either: all or nothing
        merge_extracts([mph_own_key["late"], bad], network)
    assert _file_hash(network) == before and _digest(network) == digest
    result = CliRunner().invoke(app, ["merge", str(bad), "--warehouse", str(network)])
    assert result.exit_code == 2
    assert message.split()[-1] in result.output and result.output.startswith("error:")
    assert _file_hash(network) == before


# --- duplicates and replacement ---------------------------------------------------------------

def test_the_same_extract_twice_changes_nothing(extracts, network):
    before = _digest(network)
    summary = merge_extracts([extracts["CIC"], extracts["CIC"]], network)
    assert summary.merged == [] and len(summary.unchanged) == 1
    assert _digest(network) == before


def test_a_new_extract_of_the_same_site_and_period_replaces_the_earlier(mph_own_key, tmp_path):
    db = tmp_path / "net.duckdb"
    first = merge_extracts([mph_own_key["early"]], db)
    n_early = _query(db, "select count(*) as n from raw_study")["n"][0]
    second = merge_extracts([mph_own_key["late"]], db)
    assert second.replaced == first.merged
    n_late = _query(db, "select count(*) as n from raw_study")["n"][0]
    with duckdb.connect(str(mph_own_key["db"]), read_only=True) as con:
        n_site = con.execute("select count(*) from raw_study").fetchone()[0]
    assert n_early < n_late == n_site                 # November arrived with the second
    left = _query(db, "select count(*) as n from raw_dose_object where run_id = "
                      f"'{first.merged[0]}'")["n"][0]
    assert left == 0
    assert list(_query(db, "select extract_id from network_extract")["extract_id"]) == second.merged
    assert _query(db, "select count(distinct site) as n from study_dose")["n"][0] == 1


def test_an_overlapping_extract_of_another_period_adds_no_duplicate(combined, network,
                                                                    tmp_path):
    db = tmp_path / "net.duckdb"
    shutil.copy(network, db)
    september = export_site(combined, tmp_path / "sep", site=SITES["CIC"], date_from=FIRST,
                            date_to=dt.date(2026, 9, 30), key=KEY, key_scope=KeyScope.NETWORK)
    before = _query(db, "select count(*) as n from study_dose")["n"][0]
    summary = merge_extracts([september.out_dir], db)
    assert summary.merged == [september.extract_id] and summary.replaced == []
    assert _query(db, "select count(*) as n from study_dose")["n"][0] == before
    # the September reports now come from the newer, September-only extract
    n = _query(db, f"select count(*) as n from raw_dose_object where run_id = '{september.extract_id}'")
    assert n["n"][0] == september.rows["dose_object"] > 0


def test_exporting_unchanged_data_again_gives_the_same_extract(combined, extracts, tmp_path):
    again = export_site(combined, tmp_path / "again", site=SITES["CIC"], date_from=FIRST,
                        date_to=LAST, key=KEY, key_scope=KeyScope.NETWORK)
    manifest = json.loads((extracts["CIC"] / "manifest.json").read_text())
    assert again.extract_id == manifest["extract_id"]


# --- shared network key and per-site keys -----------------------------------------------------

CROSS_SITE = ("select count(*) as n from (select patient_key from study_dose "
              "where patient_key is not null group by patient_key having count(distinct site) > 1)")


def test_with_the_shared_key_patients_link_across_sites(studies_manifest, combined, network):
    truth = studies_manifest.groupby("patient_id")["site"].nunique()
    assert (truth > 1).sum() > 20                      # the corpus has returning patients
    n = _query(network, CROSS_SITE)["n"][0]
    assert n > 20 and n == _query(combined, CROSS_SITE)["n"][0]


def test_with_per_site_keys_patients_do_not_link(studies_manifest, extracts, mph_own_key, tmp_path):
    db = tmp_path / "net.duckdb"
    merge_extracts([extracts["CIC"], extracts["OVH"], extracts["TGH"], mph_own_key["late"]], db)
    mph = set(_query(db, f"select patient_key from study_dose where site = '{SITES['MPH']}'")
              ["patient_key"])
    others = set(_query(db, f"select patient_key from study_dose where site <> '{SITES['MPH']}'")
                 ["patient_key"])
    truth = studies_manifest.groupby("patient_id")["site"].agg(set)
    assert sum("MPH" in s and len(s) > 1 for s in truth) > 5   # they are the same people ...
    assert len(mph) > 20 and not mph & others                  # ... but are not linked
    scopes = _query(db, "select site, key_scope from network_extract order by site")
    assert dict(zip(scopes["site"], scopes["key_scope"]))[SITES["MPH"]] == "site"


def test_a_second_network_key_is_refused(extracts, mph_own_key, network):
    before = _digest(network)
    with pytest.raises(ExtractError, match="different key fingerprints"):
        merge_extracts([mph_own_key["declared_network"]], network)
    assert _digest(network) == before


# --- the exporter's own checks ----------------------------------------------------------------

def test_export_refuses_another_key_an_unknown_site_and_a_used_folder(combined, extracts, tmp_path):
    with pytest.raises(ExtractError, match="not warehouse .*pseudonymisation key"):
        export_site(combined, tmp_path / "a", site=SITES["CIC"], date_from=FIRST, date_to=LAST,
                    key=SITE_KEY, key_scope=KeyScope.SITE)
    with pytest.raises(ExtractError, match="no device of site 'Nowhere'.*Cobbleford"):
        export_site(combined, tmp_path / "b", site="Nowhere", date_from=FIRST, date_to=LAST,
                    key=KEY, key_scope=KeyScope.SITE)
    with pytest.raises(ExtractError, match="is not empty"):
        export_site(combined, extracts["CIC"], site=SITES["CIC"], date_from=FIRST,
                    date_to=LAST, key=KEY, key_scope=KeyScope.NETWORK)
    with pytest.raises(ExtractError, match="no study dated"):
        export_site(combined, tmp_path / "c", site=SITES["CIC"], date_from=dt.date(2025, 1, 1),
                    date_to=dt.date(2025, 1, 31), key=KEY, key_scope=KeyScope.NETWORK)
    assert not (tmp_path / "a").exists() and not (tmp_path / "c").exists()


def test_merge_refuses_a_site_warehouse(extracts, combined):
    before = _digest(combined)
    with pytest.raises(ExtractError, match="is a site warehouse"):
        merge_extracts([extracts["CIC"]], combined)
    assert _digest(combined) == before


def test_cli_export_records_the_declared_key_scope_and_defaults_to_site(combined, tmp_path,
                                                                        monkeypatch):
    monkeypatch.setenv("KERMA_PSEUDONYM_KEY", KEY.decode())
    base = ["export", "--warehouse", str(combined), "--site", SITES["MPH"], "--from",
            "2026-09-01", "--to", "2026-09-30"]
    # the command line of the issue, without --key-scope: the site's own key is declared
    result = CliRunner().invoke(app, [*base, "--out", str(tmp_path / "d")])
    assert result.exit_code == 0, result.output
    default = json.loads((tmp_path / "d" / "manifest.json").read_text())
    assert default["pseudonymisation"]["key_scope"] == "site"
    result = CliRunner().invoke(app, [*base, "--out", str(tmp_path / "b"), "--key-scope", "both"])
    assert result.exit_code == 2 and "--key-scope" in result.output
    result = CliRunner().invoke(app, [*base, "--out", str(tmp_path / "x"), "--key-scope", "network"])
    assert result.exit_code == 0, result.output
    manifest = json.loads((tmp_path / "x" / "manifest.json").read_text())
    assert manifest["pseudonymisation"]["key_scope"] == "network"
    assert manifest["period"] == {"from": "2026-09-01", "to": "2026-09-30"}
