"""Re-identification by the key holder: keys, the sealed vault written at ingest, `kerma reidentify`."""

from __future__ import annotations

import base64
import json
import shutil

import duckdb
import pandas as pd
import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from tests.helpers import KEY


@pytest.fixture(scope="module")
def vaulted(corpus, warehouse, tmp_path_factory):
    """keys init, then `kerma ingest --vault --recipient` over the session corpus (on a copy of
    the session warehouse: the files are recorded already, the vault is new)."""
    root = tmp_path_factory.mktemp("vault")
    runner = CliRunner()
    result = runner.invoke(app, ["keys", "init", "--out", str(root / "keys")])
    assert result.exit_code == 0, result.output
    (root / "pseudonym.key").write_bytes(KEY)
    db = root / "kerma.duckdb"
    shutil.copyfile(warehouse[0], db)
    vault = root / "vault.jsonl"
    result = runner.invoke(app, ["ingest", str(corpus), "--warehouse", str(db), "--key-file",
                                 str(root / "pseudonym.key"), "--vault", str(vault), "--recipient",
                                 str(root / "keys" / "reidentify-public.key")], terminal_width=200)
    assert result.exit_code == 0, result.output
    return root, db, vault


def _follow_up_study(db):
    with duckdb.connect(str(db), read_only=True) as con:
        return con.execute("select s.study_key, s.study_date from study_dose as s "
                           "where s.dose_rp_total_mgy > 5000").fetchone()


def test_private_key_is_the_holders_only(vaulted):
    root, _, _ = vaulted
    private = root / "keys" / "reidentify-private.key"
    assert private.stat().st_mode & 0o777 == 0o600
    again = CliRunner().invoke(app, ["keys", "init", "--out", str(root / "keys")], terminal_width=200)
    assert again.exit_code == 2 and "already exists" in again.output
    header, key = private.read_text().splitlines()
    assert "PRIVATE key" in header and len(bytes.fromhex(key)) == 32   # X25519: 32 bytes, kept


def test_round_trip_returns_the_original_patient_id(vaulted, studies_manifest):
    root, db, vault = vaulted
    study_key, study_date = _follow_up_study(db)
    expected = studies_manifest.loc[studies_manifest.story == "high_dose_intervention"].iloc[0]
    result = CliRunner().invoke(app, [
        "reidentify", study_key, "--vault", str(vault), "--private-key",
        str(root / "keys" / "reidentify-private.key"), "--reason", "skin follow-up",
        "--by", "MPE on duty"], terminal_width=200)
    assert result.exit_code == 0, result.output
    assert f"Patient ID: {expected.patient_id}" in result.output
    assert f"Study date: {pd.Timestamp(expected.study_datetime):%Y%m%d}" in result.output
    assert str(study_date).replace("-", "") in result.output
    (line,) = (root / "vault.jsonl.access.log").read_text().splitlines()
    logged = json.loads(line)
    assert logged["study_key"] == study_key and logged["by"] == "MPE on duty"
    assert logged["reason"] == "skin follow-up" and len(logged["key_fingerprint"]) == 16
    assert expected.patient_id not in line          # the log names the study pseudonym only


def test_one_entry_per_study_and_no_plaintext_identifier(vaulted, studies_manifest, tmp_path):
    from pipeline.report import write_report

    root, db, vault = vaulted
    entries = [json.loads(x) for x in vault.read_text().splitlines()]
    assert len(entries) == len({e["study_key"] for e in entries}) == studies_manifest.study.nunique()
    # a second ingest appends nothing new
    again = CliRunner().invoke(app, ["ingest", str(root / "keys"), "--warehouse", str(db),
                                     "--key-file", str(root / "pseudonym.key"), "--vault", str(vault),
                                     "--recipient", str(root / "keys" / "reidentify-public.key")])
    assert again.exit_code == 0 and len(vault.read_text().splitlines()) == len(entries)
    from pipeline.audit import run_audit
    run_audit(db, period="2026-09")
    report = write_report(db, tmp_path / "report.html", fmt="html")
    from dashboards.site import write_site
    write_site(db, tmp_path / "site")
    identifiers = set(studies_manifest.patient_id) | set(studies_manifest.study_instance_uid)
    for path in (db, vault, report, *(tmp_path / "site").iterdir()):
        data = path.read_bytes()
        leaked = [i for i in identifiers if i.encode() in data]
        assert not leaked, (path.name, leaked[:3])


def test_wrong_key_tampered_entry_unknown_study_each_one_line(vaulted, tmp_path):
    root, db, vault = vaulted
    study_key, _ = _follow_up_study(db)
    runner = CliRunner()
    other = runner.invoke(app, ["keys", "init", "--out", str(tmp_path / "other")])
    assert other.exit_code == 0
    tampered = tmp_path / "vault.jsonl"
    lines = vault.read_text().splitlines()
    for i, line in enumerate(lines):
        entry = json.loads(line)
        if entry["study_key"] == study_key:
            sealed = bytearray(base64.b64decode(entry["sealed"]))
            sealed[-1] ^= 0x01
            entry["sealed"] = base64.b64encode(bytes(sealed)).decode()
            lines[i] = json.dumps(entry)
    tampered.write_text("\n".join(lines) + "\n")
    own = str(root / "keys" / "reidentify-private.key")
    cases = [
        (vault, str(tmp_path / "other" / "reidentify-private.key"), study_key, "is not the one"),
        (tampered, own, study_key, "does not open: it was altered"),
        (vault, own, "0" * 32, f"no vault entry for study {'0' * 32}"),
        (vault, str(root / "keys" / "reidentify-public.key"), study_key, "is not a private key"),
    ]
    before = (root / "vault.jsonl.access.log").read_text() if (root / "vault.jsonl.access.log").exists() else ""
    for vault_file, key, study, message in cases:
        result = runner.invoke(app, ["reidentify", "--study-key", study, "--vault", str(vault_file),
                                     "--private-key", key], terminal_width=300)
        assert result.exit_code == 2, result.output
        assert message in result.output and len(result.output.strip().splitlines()) == 1
    after = (root / "vault.jsonl.access.log").read_text() if (root / "vault.jsonl.access.log").exists() else ""
    assert after == before                            # failed openings are no accesses
    assert not (tmp_path / "vault.jsonl.access.log").exists()


def test_vault_is_never_the_warehouse(vaulted, corpus):
    root, db, _ = vaulted
    result = CliRunner().invoke(app, ["ingest", str(corpus), "--warehouse", str(db), "--key-file",
                                      str(root / "pseudonym.key"), "--vault", str(db),
                                      "--recipient", str(root / "keys" / "reidentify-public.key")],
                                terminal_width=200)
    assert result.exit_code == 2 and "never the warehouse" in result.output
