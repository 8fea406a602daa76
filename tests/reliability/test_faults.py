"""Faults of the machine, made real: a full disk (a tiny tmpfs), a read-only warehouse folder
and a read-only inbox (read-only bind mounts; as root, chmod would not stop a write).

Each needs mount(8) as root, as on this project's machines; elsewhere the test fails with a
message saying so (never skipped).
"""

from __future__ import annotations

import contextlib
import os
import shutil
import subprocess
from collections.abc import Iterator
from pathlib import Path

import duckdb
import pytest

from tests.reliability.conftest import assert_complete, child, digests, kerma


def _mount(*args: str) -> None:
    if os.geteuid() != 0:
        pytest.fail("these fault tests mount a tmpfs and read-only bind mounts: run them as "
                    "root (as CI does)", pytrace=False)
    done = subprocess.run(["mount", *args], capture_output=True, text=True)
    if done.returncode != 0:
        pytest.fail(f"mount {' '.join(args)} failed: {done.stderr.strip()}", pytrace=False)


@contextlib.contextmanager
def tmpfs(where: Path, size: str) -> Iterator[Path]:
    where.mkdir(parents=True, exist_ok=True)
    _mount("-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(where))
    try:
        yield where
    finally:
        subprocess.run(["umount", "-l", str(where)], check=True)


@contextlib.contextmanager
def read_only(source: Path, where: Path) -> Iterator[Path]:
    where.mkdir(parents=True, exist_ok=True)
    _mount("--bind", str(source), str(where))
    try:
        _mount("-o", "remount,ro,bind", str(where))
        yield where
    finally:
        subprocess.run(["umount", "-l", str(where)], check=True)


def _one_clear_line(result) -> str:
    text = result.stdout + result.stderr
    assert result.returncode == 2, text
    assert "Traceback" not in text
    return " ".join(text.split())


def test_disk_full_stops_with_a_clear_error_and_loses_nothing(small_corpus, tmp_path):
    before = digests(small_corpus)
    with tmpfs(tmp_path / "small-disk", "220k") as disk:
        proc = child(small_corpus, disk / "kerma.duckdb", "--batch-size", "8")
        out, err = proc.communicate(timeout=120)
        assert proc.returncode == 2, out + err
        assert "No space left on device" in out and "cannot write to warehouse" in out, out
        assert "Traceback" not in out + err
        committed = sum(line.startswith("batch ") for line in out.splitlines())
        assert committed >= 1  # some batches fitted before the disk filled
        rescued = tmp_path / "rescued"
        shutil.copytree(disk, rescued)  # as if moved to a bigger disk
    con = duckdb.connect(str(rescued / "kerma.duckdb"))
    n, loaded, dose_objects = con.execute(
        "select count(*), count(*) filter (where status = 'loaded'), "
        "(select count(*) from raw_dose_object) from source_object").fetchone()
    con.close()
    # exactly the committed batches, and nothing marked loaded without its dose object
    assert n == 8 * committed and loaded == dose_objects
    rerun = kerma("ingest", str(small_corpus), "--warehouse", str(rescued / "kerma.duckdb"))
    assert rerun.returncode == 0, rerun.stdout + rerun.stderr
    assert_complete(rescued / "kerma.duckdb", small_corpus)
    assert digests(small_corpus) == before


def test_disk_full_on_the_first_batch_records_nothing(small_corpus, tmp_path):
    with tmpfs(tmp_path / "tiny-disk", "300k") as disk:
        result = kerma("ingest", str(small_corpus), "--warehouse", str(disk / "kerma.duckdb"))
        text = _one_clear_line(result)
        assert "cannot write to warehouse" in text and "No space left on device" in text
        rescued = tmp_path / "rescued"
        shutil.copytree(disk, rescued)
    con = duckdb.connect(str(rescued / "kerma.duckdb"))
    assert con.execute("select count(*) from source_object").fetchone() == (0,)
    con.close()


def test_read_only_warehouse_folder(small_corpus, tmp_path):
    before = digests(small_corpus)
    (tmp_path / "wh").mkdir()
    with read_only(tmp_path / "wh", tmp_path / "wh-ro") as folder:
        new_file = _one_clear_line(kerma("ingest", str(small_corpus), "--warehouse",
                                         str(folder / "kerma.duckdb")))
        assert f"cannot open warehouse {folder / 'kerma.duckdb'}" in new_file
        new_folder = _one_clear_line(kerma("ingest", str(small_corpus), "--warehouse",
                                           str(folder / "sub" / "kerma.duckdb")))
        assert "cannot create the folder of warehouse" in new_folder
        assert "Read-only file system" in new_folder
        assert list(folder.iterdir()) == []
    assert digests(small_corpus) == before


def test_read_only_warehouse_file_is_refused_and_left_as_it_was(small_corpus, tmp_path):
    db_dir = tmp_path / "wh"
    db_dir.mkdir()
    first = kerma("ingest", str(small_corpus), "--warehouse", str(db_dir / "kerma.duckdb"))
    assert first.returncode == 0
    digest = digests(db_dir)
    with read_only(db_dir, tmp_path / "wh-ro") as folder:
        text = _one_clear_line(kerma("ingest", str(small_corpus), "--warehouse",
                                     str(folder / "kerma.duckdb")))
        assert "warehouse" in text and ("cannot open" in text or "cannot write" in text)
    assert digests(db_dir) == digest


def test_read_only_inbox_is_read_and_left_intact(small_corpus, tmp_path):
    before = digests(small_corpus)
    with read_only(small_corpus, tmp_path / "inbox-ro") as inbox:
        result = kerma("ingest", str(inbox), "--warehouse", str(tmp_path / "kerma.duckdb"))
        assert result.returncode == 0, result.stdout + result.stderr
        assert_complete(tmp_path / "kerma.duckdb", inbox)
        assert digests(inbox) == before
