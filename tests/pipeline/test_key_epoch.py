"""One pseudonymisation key per warehouse: a second key is refused (exit 2, nothing loaded)
unless a new key epoch is asked for; the pages say from when patients are not linked."""

import datetime as dt
import subprocess

import duckdb
import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from pipeline.errors import KeyMismatchError
from pipeline.net.drain import drain_inbox
from pipeline.pseudonym import FINGERPRINT_LABEL, key_fingerprint
from tests.helpers import require_tool, write_daily_reports

KEY_A = "first-key-0123456789abcdef"
KEY_B = "second-key-0123456789abcdef"


def test_fingerprint_is_the_hmac_sha256_of_the_label_as_openssl_computes_it():
    # independent tool: OpenSSL's HMAC (RFC 2104) over the same fixed label
    out = subprocess.run([require_tool("openssl"), "dgst", "-sha256", "-hmac", KEY_A],
                         input=FINGERPRINT_LABEL, capture_output=True, check=True).stdout.decode()
    digest = out.strip().rsplit("= ", 1)[1]
    assert len(digest) == 64 and key_fingerprint(KEY_A.encode()) == digest[:16]
    assert key_fingerprint(KEY_A.encode()) != key_fingerprint(KEY_B.encode())


def _counts(db) -> tuple:
    con = duckdb.connect(str(db), read_only=True)
    try:
        return con.execute("select (select count(*) from raw_dose_object), (select count(*) from raw_run), "
                           "(select count(*) from raw_source_object)").fetchone()
    finally:
        con.close()


def _epochs(db) -> list:
    con = duckdb.connect(str(db), read_only=True)
    try:
        return con.execute("select epoch, key_fingerprint, is_current from key_epoch order by epoch").fetchall()
    finally:
        con.close()


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    root = tmp_path_factory.mktemp("keys")
    first = write_daily_reports(root / "first", "ovh-dx1", [dt.date(2026, 10, d) for d in (1, 2)])
    second = write_daily_reports(root / "second", "ovh-dx1", [dt.date(2026, 10, d) for d in (5, 6)])
    return root, first, second


def test_a_second_key_is_refused_and_loads_nothing_unless_a_new_epoch_is_asked_for(reports, tmp_path):
    root, _, _ = reports
    db = tmp_path / "k.duckdb"
    runner = CliRunner()
    result = runner.invoke(app, ["ingest", str(root / "first"), "--warehouse", str(db)],
                           env={"KERMA_PSEUDONYM_KEY": KEY_A})
    assert result.exit_code == 0, result.output
    assert _epochs(db) == [(1, key_fingerprint(KEY_A.encode()), True)]
    before = _counts(db)
    assert before[0] == 2
    result = runner.invoke(app, ["ingest", str(root / "first"), "--warehouse", str(db)],
                           env={"KERMA_PSEUDONYM_KEY": KEY_A})
    assert result.exit_code == 0, result.output   # same key, same epoch: a rerun is fine
    assert len(_epochs(db)) == 1 and _counts(db)[0] == 2
    before = _counts(db)

    result = runner.invoke(app, ["ingest", str(root / "second"), "--warehouse", str(db)],
                           env={"KERMA_PSEUDONYM_KEY": KEY_B})
    assert result.exit_code == 2
    assert "key differs" in result.output and "patient linkage would break" in result.output
    assert "nothing was loaded" in result.output and "--new-key-epoch" in result.output
    assert _counts(db) == before and len(_epochs(db)) == 1

    result = runner.invoke(app, ["ingest", str(root / "second"), "--warehouse", str(db), "--new-key-epoch"],
                           env={"KERMA_PSEUDONYM_KEY": KEY_B})
    assert result.exit_code == 0, result.output
    assert "Key epoch 2" in result.output
    assert _epochs(db) == [(1, key_fingerprint(KEY_A.encode()), False),
                           (2, key_fingerprint(KEY_B.encode()), True)]
    assert _counts(db)[0] == 4
    # now the first key is the stranger; the key itself is nowhere in the file
    result = runner.invoke(app, ["ingest", str(root / "first"), "--warehouse", str(db)],
                           env={"KERMA_PSEUDONYM_KEY": KEY_A})
    assert result.exit_code == 2 and "key epoch 2" in result.output
    data = db.read_bytes()
    assert KEY_A.encode() not in data and KEY_B.encode() not in data

    # the pages say from when patients are not linked
    result = runner.invoke(app, ["dashboard", "--warehouse", str(db), "--period", "2026-10",
                                 "--out", str(tmp_path / "site")])
    assert result.exit_code == 0, result.output
    index = (tmp_path / "site" / "index.html").read_text()
    assert "Patients are not linked across key epochs" in index
    assert f"epoch 2 from {dt.date.today():%Y-%m-%d}" in index
    quality = (tmp_path / "site" / "data-quality.html").read_text()
    assert key_fingerprint(KEY_B.encode()) in quality and 'id="table-dq-key-epochs"' in quality


def test_listen_drain_refuses_another_key_and_keeps_the_files(reports, tmp_path):
    root, first, second = reports
    db = tmp_path / "k.duckdb"
    inbox = tmp_path / "inbox"
    inbox.mkdir()
    for path in first:
        (inbox / path.name).write_bytes(path.read_bytes())
    drain_inbox(inbox, db, tmp_path / "archive", KEY_A.encode())
    assert not any(inbox.iterdir()) and _counts(db)[0] == 2
    # the same key again: loaded into the same epoch (regression: the epoch query left a result open)
    extra = write_daily_reports(tmp_path / "extra", "ovh-dx1", [dt.date(2026, 10, 3)])
    (inbox / extra[0].name).write_bytes(extra[0].read_bytes())
    assert drain_inbox(inbox, db, tmp_path / "archive", KEY_A.encode()).ingest.key_epoch == 1
    assert _counts(db)[0] == 3 and len(_epochs(db)) == 1
    for path in second:
        (inbox / path.name).write_bytes(path.read_bytes())
    before = _counts(db)
    with pytest.raises(KeyMismatchError, match="patient linkage would break"):
        drain_inbox(inbox, db, tmp_path / "archive", KEY_B.encode())
    assert _counts(db) == before
    assert sorted(p.name for p in inbox.iterdir()) == sorted(p.name for p in second)   # kept


def test_listen_refuses_to_start_with_another_key(reports, tmp_path):
    root, _, _ = reports
    db = tmp_path / "k.duckdb"
    runner = CliRunner()
    assert runner.invoke(app, ["ingest", str(root / "first"), "--warehouse", str(db)],
                         env={"KERMA_PSEUDONYM_KEY": KEY_A}).exit_code == 0
    result = runner.invoke(app, ["listen", "--ae-title", "KERMA", "--port", "11199", "--inbox",
                                 str(tmp_path / "inbox"), "--ingest-every", "5", "--warehouse", str(db)],
                           env={"KERMA_PSEUDONYM_KEY": KEY_B})
    assert result.exit_code == 2
    assert "key differs" in result.output and "patient linkage would break" in result.output
