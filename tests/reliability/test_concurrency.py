"""Two writers, and a reader during a write: a clear "busy", never a corrupted warehouse."""

from __future__ import annotations

from tests.reliability.conftest import assert_complete, child, kerma


def test_second_ingest_and_a_reader_get_busy_while_an_ingest_runs(small_corpus, tmp_path):
    db, hold = tmp_path / "kerma.duckdb", tmp_path / "go"
    first = child(small_corpus, db, "--batch-size", "8", "--hold", str(hold))
    line = first.stdout.readline()  # first batch committed; the writer now waits, holding it
    assert line.startswith("batch 1"), (line, first.stderr.read())
    try:
        second = kerma("ingest", str(small_corpus), "--warehouse", str(db))
        reader = kerma("sql", "--warehouse", str(db), "select count(*) from source_object")
    finally:
        hold.touch()
    out, err = first.communicate(timeout=120)
    assert first.returncode == 0, out + err
    for result in (second, reader):
        assert result.returncode == 2, result.stdout + result.stderr
        text = " ".join(result.stdout.split())
        assert "is busy: another Kerma Ledger process is using it" in text
        assert "Traceback" not in result.stdout + result.stderr
    assert_complete(db, small_corpus)
    after = kerma("sql", "--warehouse", str(db),
                  "select count(*) as n from source_object")
    n_files = sum(1 for p in small_corpus.rglob("*") if p.is_file())
    assert after.returncode == 0 and f" {n_files} " in after.stdout, after.stdout
    again = kerma("ingest", str(small_corpus), "--warehouse", str(db))
    assert again.returncode == 0
    assert_complete(db, small_corpus)
