"""Fixtures of the reliability tests: a small corpus, real processes, real mounts."""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest

from synthetic_studies.write import write_corpus
from tests.helpers import KEY

ROOT = Path(__file__).resolve().parents[2]
KERMA = str(Path(sys.executable).parent / "kerma")
ENV = {**os.environ, "KERMA_PSEUDONYM_KEY": KEY.decode(), "PYTHONPATH": str(ROOT),
       "COLUMNS": "200"}


@pytest.fixture(scope="session")
def small_corpus(tmp_path_factory) -> Path:
    """60 studies of the demo network (seed 11, one month), with every defect kind."""
    out = tmp_path_factory.mktemp("reliability") / "inbox"
    write_corpus(out, seed=11, months=1, n_studies=60, workers=1)
    return out


def digests(root: Path) -> dict[str, str]:
    return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file()}


def kerma(*args: str, timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run([KERMA, *args], capture_output=True, text=True, env=ENV, cwd=ROOT,
                          timeout=timeout)


def child(inbox: Path, warehouse: Path, *args: str) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "tests.reliability.ingest_child", str(inbox), "--warehouse",
         str(warehouse), *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env=ENV, cwd=ROOT)


def assert_complete(db: Path, inbox: Path) -> None:
    """Every file of `inbox` recorded exactly once; study totals equal the manifest."""
    con = duckdb.connect(str(db), read_only=True)
    try:
        on_disk = sorted(str(p.resolve()) for p in inbox.rglob("*") if p.is_file())
        recorded = [r[0] for r in con.execute(
            "select path from source_object order by path").fetchall()]
        assert recorded == on_disk
        loaded, dose_objects, distinct = con.execute(
            "select (select count(*) from source_object where status = 'loaded'), "
            "(select count(*) from raw_dose_object), "
            "(select count(distinct sop_instance_uid) from raw_dose_object)").fetchone()
        assert loaded == dose_objects == distinct > 0
        n_events, n_unique = con.execute(
            "select count(*), count(distinct event_uid) from irradiation_event").fetchone()
        assert n_events == n_unique > 0
        got = con.execute("select * from study_dose").df()
    finally:
        con.close()
    truth = pd.read_parquet(inbox / "studies.parquet")
    truth = truth[truth.defect.isna()]
    truth["study_key"] = [_study_key(u) for u in truth.study_instance_uid]
    merged = truth.merge(got, on="study_key", suffixes=("_true", ""))
    assert len(merged) == len(truth)
    for q in ("event_count", "dap_total_gy_cm2", "dose_rp_total_mgy", "dlp_total_mgy_cm",
              "fluoro_time_total_s"):
        assert np.allclose(merged[f"{q}_true"].astype(float), merged[q].astype(float),
                           rtol=1e-9, equal_nan=True), q


def _study_key(uid: str) -> str:
    import hmac
    return hmac.new(KEY, f"study\x1f{uid}".encode(), hashlib.sha256).hexdigest()[:32]
