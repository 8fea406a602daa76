"""Crash safety: a real ingest process killed with SIGKILL, then rerun; nothing lost or doubled."""

from __future__ import annotations

import signal
import subprocess
import time
from pathlib import Path

import duckdb

from tests.reliability.conftest import ENV, KERMA, ROOT, assert_complete, child, digests, kerma


def test_sigkill_between_batches_keeps_whole_batches_and_the_rerun_completes(small_corpus,
                                                                             tmp_path):
    before = digests(small_corpus)
    db = tmp_path / "kerma.duckdb"
    proc = child(small_corpus, db, "--batch-size", "8", "--workers", "2")
    lines = []
    while len(lines) < 3:  # three batches committed; the fourth is being parsed or loaded
        line = proc.stdout.readline()
        assert line.startswith("batch"), (line, proc.stderr.read())
        lines.append(line)
    proc.send_signal(signal.SIGKILL)
    assert proc.wait(timeout=30) == -signal.SIGKILL
    proc.stdout.close()
    proc.stderr.close()
    _assert_no_process_left(str(db))
    con = duckdb.connect(str(db), read_only=True)
    (n,) = con.execute("select count(*) from source_object").fetchone()
    (n_runs, n_finished) = con.execute(
        "select count(*), count(finished_at) from raw_run").fetchone()
    con.close()
    # only whole batches of 8 files survive the kill, and the run is not marked finished
    n_files = sum(1 for p in small_corpus.rglob("*") if p.is_file())
    assert n % 8 == 0 and 24 <= n < n_files, n
    assert (n_runs, n_finished) == (1, 0)
    rerun = kerma("ingest", str(small_corpus), "--warehouse", str(db), "--workers", "2")
    assert rerun.returncode == 0, rerun.stdout + rerun.stderr
    assert _unchanged(rerun.stdout) == n  # the committed files are skipped, not redone
    assert_complete(db, small_corpus)
    assert digests(small_corpus) == before


def _processes_naming(text: str) -> list[int]:
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                if text.encode() in (entry / "cmdline").read_bytes():
                    found.append(int(entry.name))
            except OSError:
                continue
    return found


def _assert_no_process_left(warehouse: str) -> None:
    """The killed ingest's worker processes end too (they would otherwise idle forever)."""
    deadline = time.monotonic() + 10
    while _processes_naming(warehouse) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert _processes_naming(warehouse) == []


def _unchanged(output: str) -> int:
    line = next(x for x in output.splitlines() if "already recorded" in x)
    return int(line.split("│")[2].strip())


def test_kerma_ingest_killed_mid_batch_then_rerun(small_corpus, tmp_path):
    db = tmp_path / "kerma.duckdb"
    proc = subprocess.Popen([KERMA, "ingest", str(small_corpus), "--warehouse", str(db),
                             "--workers", "2"], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, env=ENV, cwd=ROOT)
    wal = db.with_name(db.name + ".wal")
    deadline = time.monotonic() + 60
    while not wal.exists() and time.monotonic() < deadline:  # schema written: batch under way
        time.sleep(0.01)
    time.sleep(0.3)
    proc.send_signal(signal.SIGKILL)
    assert proc.wait(timeout=30) == -signal.SIGKILL
    con = duckdb.connect(str(db), read_only=True)
    # on a loaded machine the kill can land while the schema is still being written (the WAL
    # appears with the first table): the raw table the batches write, if it exists yet
    tables = {r[0] for r in con.execute("select table_name from duckdb_tables()").fetchall()}
    (n,) = (con.execute("select count(*) from raw_source_object").fetchone()
            if "raw_source_object" in tables else (0,))
    con.close()
    n_files = sum(1 for p in small_corpus.rglob("*") if p.is_file())
    assert n in (0, n_files)  # one batch of every file: all or nothing
    rerun = kerma("ingest", str(small_corpus), "--warehouse", str(db))
    assert rerun.returncode == 0, rerun.stdout + rerun.stderr
    assert_complete(db, small_corpus)
