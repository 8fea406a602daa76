"""The pure part: manifests, extract ids, UID pseudonyms (pipeline/network.py)."""

from __future__ import annotations

import json

import pyarrow as pa
import pytest

from pipeline.errors import ExtractError
from pipeline.network import (EXTRACT_TABLES, KeyScope, build_manifest, expected_schema,
                              extract_id, parse_manifest, pseudonymise_table, pseudonymise_uid,
                              schema_problem, scrub_uids)
from pipeline.pseudonym import make_pseudonymiser

FILES = [{"table": t.name, "file": f"{t.name}.parquet", "rows": n, "sha256": f"{n:064x}"}
         for n, t in enumerate(EXTRACT_TABLES)]


def _manifest(**changes) -> dict:
    facts = dict(site="Cobbleford Imaging Centre", date_from="2026-09-01", date_to="2026-09-30",
                 key_scope=KeyScope.SITE, key_fingerprint="a51ad72f5c62fda3", files=FILES,
                 created_at="2026-12-02T07:00:00Z", kerma_version="0.1.0")
    return build_manifest(**(facts | changes))


def test_a_built_manifest_parses_back():
    manifest = parse_manifest(json.dumps(_manifest()), "x")
    assert manifest.site == "Cobbleford Imaging Centre" and manifest.key_scope is KeyScope.SITE
    assert manifest.rows("study") == 1


def test_the_extract_id_ignores_creation_time_but_not_the_facts():
    assert _manifest()["extract_id"] == _manifest(created_at="2027-01-01T00:00:00Z")["extract_id"]
    assert _manifest()["extract_id"] != _manifest(date_to="2026-09-29")["extract_id"]
    assert _manifest()["extract_id"] != _manifest(key_fingerprint="0" * 16)["extract_id"]
    assert extract_id("s", "a", "b", "k", FILES) == extract_id("s", "a", "b", "k", FILES[::-1])


@pytest.mark.parametrize("change, message", [
    (lambda m: m.update(schema_version=0), "schema version 0 is not supported"),
    (lambda m: m.update(format="other"), "not a Kerma Ledger site extract manifest"),
    (lambda m: m["files"].pop(), "manifest lists tables"),
    (lambda m: m["files"][0].update(file="../etc/passwd"), "a file other than"),
    (lambda m: m["files"][0].update(rows="7"), "'rows' is missing or not a int"),
    (lambda m: m["pseudonymisation"].update(key_scope="both"), "key_scope must be"),
    (lambda m: m["pseudonymisation"].update(scheme="md5"), "scheme 'md5'"),
    (lambda m: m["period"].update(to="2026-10-31"), "manifest was altered"),
    (lambda m: m["period"].update(to="soon"), "period dates must be YYYY-MM-DD"),
    (lambda m: m["period"].update(to="2026-08-31"), "period ends before it starts"),
])
def test_a_bad_manifest_gets_one_line_naming_the_folder(change, message):
    manifest = _manifest()
    change(manifest)
    with pytest.raises(ExtractError, match=message) as info:
        parse_manifest(json.dumps(manifest), "/in/extract")
    assert str(info.value).startswith("/in/extract: ") and "\n" not in str(info.value)


def test_uid_pseudonyms_are_keyed_valid_uids():
    a, b = make_pseudonymiser(b"k" * 16), make_pseudonymiser(b"j" * 16)
    uid = "1.2.826.0.1.3680043.8.498.1"
    p = pseudonymise_uid(uid, a)
    # PS3.5 9.1: components of digits, no leading zero, at most 64 characters
    assert p.startswith("2.25.") and len(p) <= 64 and not p.split(".")[2].startswith("0")
    assert p == pseudonymise_uid(uid, a) != pseudonymise_uid(uid, b)
    assert scrub_uids(f"SOP Instance UID {uid} is already loaded", a) == \
        f"SOP Instance UID {p} is already loaded"
    assert scrub_uids("DLP: 1000000 mGy.cm = 1e+06 mGy.cm (3.05 % apart)", a) == \
        "DLP: 1000000 mGy.cm = 1e+06 mGy.cm (3.05 % apart)"


def test_a_table_is_pseudonymised_consistently_and_keeps_its_schema():
    spec = next(t for t in EXTRACT_TABLES if t.name == "value_issue")
    schema = expected_schema(spec)
    rows = [{"issue_id": "i1", "sop_instance_uid": "1.2.3.4", "event_uid": None,
             "kind": "k", "concept_code": None, "detail": "report 1.2.3.4 lacks a unit",
             "raw_value": "0", "raw_unit": None}]
    table = pseudonymise_table(pa.Table.from_pylist(rows, schema=schema), spec,
                               make_pseudonymiser(b"k" * 16))
    out = table.to_pylist()[0]
    assert table.schema.equals(schema)
    assert out["sop_instance_uid"] in out["detail"] and "1.2.3.4" not in out["detail"]
    assert out["event_uid"] is None and out["issue_id"].startswith("2.25.")


def test_schema_problem_names_missing_extra_and_retyped_columns():
    expected = expected_schema(EXTRACT_TABLES[0])
    assert schema_problem(expected, expected) is None
    assert "missing: modality" in schema_problem(expected.remove(expected.get_field_index("modality")), expected)
    retyped = expected.set(0, pa.field(expected.names[0], pa.int64()))
    assert "expected string" in schema_problem(retyped, expected)
