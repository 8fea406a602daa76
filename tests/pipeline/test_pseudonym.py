"""Keyed pseudonyms: HMAC-SHA256 (RFC 2104), the key never stored, clear stop without a key."""

import hashlib
import hmac

import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from pipeline.errors import ConfigError
from pipeline.pseudonym import ENV_VAR, load_key, make_pseudonymiser


def test_hmac_sha256_matches_rfc_4231_test_case_2():
    # RFC 4231 section 4.3: key "Jefe", data "what do ya want for nothing?"
    expected = "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
    assert hmac.new(b"Jefe", b"what do ya want for nothing?", hashlib.sha256).hexdigest() == expected
    # our pseudonym is that HMAC over "namespace<US>identifier", truncated to 128 bits
    assert make_pseudonymiser(b"Jefe" * 4)("study", "1.2.3") == hmac.new(
        b"Jefe" * 4, b"study\x1f1.2.3", hashlib.sha256).hexdigest()[:32]


def test_same_key_same_pseudonym_other_key_other_pseudonym():
    a, b = make_pseudonymiser(b"k" * 16), make_pseudonymiser(b"j" * 16)
    assert a("patient", "X\x1f123") == a("patient", "X\x1f123")
    assert a("patient", "X\x1f123") != b("patient", "X\x1f123")
    assert a("patient", "X\x1f123") != a("study", "X\x1f123")  # namespaces do not collide


def test_missing_key_is_a_config_error():
    with pytest.raises(ConfigError, match="no pseudonymisation key"):
        load_key(None, environ={})


def test_short_key_is_refused():
    with pytest.raises(ConfigError, match="at least 16"):
        load_key(None, environ={ENV_VAR: "short"})


def test_key_file_wins(tmp_path):
    path = tmp_path / "key"
    path.write_bytes(b"from-the-file-0123456789\n")
    assert load_key(path, environ={ENV_VAR: "from-the-environment-000"}) == b"from-the-file-0123456789"


def test_ingest_without_a_key_stops_with_one_line(tmp_path, monkeypatch):
    monkeypatch.delenv(ENV_VAR, raising=False)
    result = CliRunner().invoke(app, ["ingest", str(tmp_path), "--warehouse", str(tmp_path / "w.duckdb")])
    assert result.exit_code == 2
    assert "no pseudonymisation key" in result.output
    assert not (tmp_path / "w.duckdb").exists()


def test_ingest_command_reports_every_outcome(tmp_path, monkeypatch):
    from tests.helpers import demo_dataset, encode
    monkeypatch.setenv(ENV_VAR, "a-test-key-that-is-long-enough")
    _, ds = demo_dataset("tgh-ct1")
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "ok.dcm").write_bytes(encode(ds))
    (tmp_path / "in" / "junk.dcm").write_bytes(b"junk")
    result = CliRunner().invoke(app, ["ingest", str(tmp_path / "in"), "--warehouse",
                                      str(tmp_path / "w.duckdb")])
    assert result.exit_code == 0, result.output
    assert "quarantined: not_dicom" in result.output
    lines = {line.split("│")[1].strip(): line.split("│")[2].strip()
             for line in result.output.splitlines() if line.count("│") == 3}
    assert lines["seen"] == "2" and lines["loaded"] == "1" and lines["quarantined"] == "1"


def test_unwritable_warehouse_is_a_clear_error(tmp_path, monkeypatch):
    monkeypatch.setenv(ENV_VAR, "a-test-key-that-is-long-enough")
    blocker = tmp_path / "file"
    blocker.write_text("x")
    result = CliRunner().invoke(app, ["ingest", str(tmp_path), "--warehouse", str(blocker / "w.duckdb")])
    assert result.exit_code == 2
    assert "cannot" in result.output and "warehouse" in result.output
