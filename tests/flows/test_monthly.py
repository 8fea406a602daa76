"""The monthly run as real Prefect flows (local mode, no server), locally and on a Dask
LocalCluster of two worker processes; every run recorded in the view pipeline_run."""

from __future__ import annotations

import duckdb
import pytest
from prefect.states import Failed

from pipeline.errors import ArchiveError, ConfigError, MalformedReportError, WarehouseError
from pipeline.flows import monthly_deployment, run_monthly
from pipeline.flows.retry import is_transient
from synthetic_studies.write import write_corpus
from tests.helpers import KEY

PERIOD = "2026-09"


@pytest.fixture(scope="module")
def inbox(tmp_path_factory):
    """50 demo studies of September 2026 (seed 3), with their deliberate defects: more than
    64 files, so the Dask parse step has at least two chunks."""
    out = tmp_path_factory.mktemp("monthly") / "inbox"
    write_corpus(out, seed=3, months=1, n_studies=50, workers=1)
    return out


@pytest.fixture
def key_file(tmp_path):
    path = tmp_path / "pseudonym.key"
    path.write_bytes(KEY)
    return path


def _runs(db):
    with duckdb.connect(str(db), read_only=True) as con:
        return con.execute(
            "select run_id, parent_run_id, flow, period, state, n_files_loaded, "
            "n_files_quarantined, reference_sets, ingest_run_ids, detail, "
            "started_at <= finished_at from pipeline_run order by started_at").fetchall()


def _study_totals(db):
    with duckdb.connect(str(db), read_only=True) as con:
        rows = con.execute("select * from study_dose order by study_key, device_key").fetchall()
    # float sums may differ in the last bits with DuckDB's parallel aggregation order
    return [tuple(round(v, 9) if isinstance(v, float) else v for v in row) for row in rows]


def _file_counts(db):
    with duckdb.connect(str(db), read_only=True) as con:
        return dict(con.execute("select status, count(*) from source_object group by 1").fetchall())


@pytest.fixture(scope="module")
def local_run(inbox, tmp_path_factory):
    root = tmp_path_factory.mktemp("local")
    (root / "k.key").write_bytes(KEY)
    result = run_monthly(warehouse=root / "kerma.duckdb", inbox=inbox, out=root / "site",
                         period=PERIOD, key_file=root / "k.key")
    return root / "kerma.duckdb", result


def test_monthly_flow_records_each_run(local_run, inbox):
    db, result = local_run
    counts = _file_counts(db)
    assert sum(counts.values()) == sum(1 for p in inbox.rglob("*") if p.is_file())
    runs = _runs(db)
    assert [r[2] for r in runs] == ["monthly", "ingest", "audit", "publish"]
    monthly = runs[0]
    assert all(r[4] == "COMPLETED" and r[10] for r in runs)
    assert [r[1] for r in runs[1:]] == [monthly[0]] * 3       # subflows of the monthly run
    assert monthly[3] == PERIOD and monthly[5] == counts["loaded"] == result.ingest.loaded
    assert monthly[6] == counts["quarantined"] > 0
    assert monthly[7] == "; ".join(result.audit.reference_sets) and monthly[7]
    assert monthly[8] == result.ingest.run_id and runs[1][8] == result.ingest.run_id
    assert result.site_index.name == "index.html" and result.site_index.stat().st_size > 0
    assert runs[3][9] == str(result.site_index)


def test_monthly_flow_on_a_dask_local_cluster_of_two_workers(local_run, inbox, tmp_path, key_file):
    from prefect import get_client
    from prefect.client.schemas.filters import FlowRunFilter, FlowRunFilterId

    db = tmp_path / "kerma.duckdb"
    result = run_monthly(warehouse=db, inbox=inbox, out=tmp_path / "site", period=PERIOD,
                         key_file=key_file, dask_workers=2)
    # the same warehouse content as the local run: parsing moved, nothing else changed
    assert _study_totals(db) == _study_totals(local_run[0])
    assert _file_counts(db) == _file_counts(local_run[0])
    ingest_run = next(r for r in _runs(db) if r[2] == "ingest")
    with get_client(sync_client=True) as client:
        tasks = client.read_task_runs(flow_run_filter=FlowRunFilter(
            id=FlowRunFilterId(any_=[ingest_run[0]])))
    parse_runs = [t for t in tasks if t.name.startswith("parse_files")]
    n_files = sum(1 for p in inbox.rglob("*") if p.is_file())
    assert len(parse_runs) == -(-n_files // 64) >= 2        # chunks of 64 files, one task each
    assert all(t.state.is_completed() for t in parse_runs)
    assert result.ingest.loaded == local_run[1].ingest.loaded


def test_a_failed_run_is_recorded_with_its_reason(inbox, tmp_path, monkeypatch):
    monkeypatch.delenv("KERMA_PSEUDONYM_KEY", raising=False)
    db = tmp_path / "kerma.duckdb"
    with pytest.raises(ConfigError, match="no pseudonymisation key"):
        run_monthly(warehouse=db, inbox=inbox, out=tmp_path / "site", period=PERIOD)
    (monthly,) = [r for r in _runs(db) if r[2] == "monthly"]
    assert monthly[4] == "FAILED" and monthly[9].startswith("no pseudonymisation key")


@pytest.mark.parametrize("error, retried", [
    (OSError("share unreachable"), True), (ArchiveError("archive restarting"), True),
    (WarehouseError("warehouse busy"), True), (MalformedReportError("bad tree"), False),
    (ConfigError("no key"), False), (ValueError("bug"), False)])
def test_only_transient_io_is_retried(error, retried):
    assert is_transient(None, None, Failed(data=error)) is retried


def test_schedule_is_a_prefect_deployment_on_the_cron(tmp_path):
    params = {"warehouse": str(tmp_path / "k.duckdb"), "inbox": str(tmp_path / "in"),
              "out": str(tmp_path / "site")}
    deployment = monthly_deployment("kerma-monthly", "0 6 1 * *", params)
    assert deployment.name == "kerma-monthly" and deployment.flow_name == "monthly"
    (schedule,) = deployment.schedules
    assert schedule.schedule.cron == "0 6 1 * *"
    assert deployment.parameters == params


def test_kerma_run_monthly_command(inbox, tmp_path, key_file):
    from typer.testing import CliRunner

    from pipeline.cli import app

    db, out = tmp_path / "kerma.duckdb", tmp_path / "site"
    result = CliRunner().invoke(app, ["run", "monthly", "--period", PERIOD, "--warehouse", str(db),
                                      "--inbox", str(inbox), "--out", str(out),
                                      "--key-file", str(key_file)])
    assert result.exit_code == 0, result.output
    assert f"Dashboards written: {out / 'index.html'}" in " ".join(result.output.split())
    runs = _runs(db)
    assert [(r[2], r[3], r[4]) for r in runs] == [
        ("monthly", PERIOD, "COMPLETED"), ("ingest", None, "COMPLETED"),
        ("audit", PERIOD, "COMPLETED"), ("publish", PERIOD, "COMPLETED")]
    both = CliRunner().invoke(app, ["run", "monthly", "--warehouse", str(db), "--inbox",
                                    str(inbox), "--out", str(out), "--dask-workers", "2",
                                    "--dask-address", "tcp://127.0.0.1:1"])
    assert both.exit_code == 2 and "not both" in both.output


def test_kerma_demo_runs_through_the_monthly_flow(tmp_path):
    from typer.testing import CliRunner

    from pipeline.cli import app

    out = tmp_path / "demo"
    result = CliRunner().invoke(app, ["demo", "--out", str(out), "--studies", "30",
                                      "--workers", "1"])
    assert result.exit_code == 0, result.output
    assert "Monthly flow finished" in result.output
    (monthly,) = [r for r in _runs(out / "kerma.duckdb") if r[2] == "monthly"]
    assert monthly[3] == "2026-09-01..2026-11-30" and monthly[4] == "COMPLETED"
    assert monthly[5] == _file_counts(out / "kerma.duckdb")["loaded"]
    assert (out / "site" / "index.html").exists()
    assert "Committee report written" in result.output
    assert (out / "site" / "report.pdf").read_bytes().startswith(b"%PDF-")
    # step 3: one extract per site, merged into the network warehouse and audited there
    import duckdb
    with duckdb.connect(str(out / "network" / "network.duckdb"), read_only=True) as con:
        n_extracts, n_sites = con.execute("select count(*), count(distinct site) from network_extract").fetchone()
        n_groups = con.execute("select count(*) from audit_medians").fetchone()[0]
    assert n_extracts == n_sites == len(list((out / "network" / "extracts").iterdir())) >= 3
    assert n_groups > 0
    # one warehouse per site, each ingested from its own folder of the corpus
    site_warehouses = sorted((out / "network" / "sites").glob("*.duckdb"))
    assert [p.stem for p in site_warehouses] == sorted(
        p.name.lower() for p in (out / "corpus").iterdir() if p.is_dir())
    # the re-identification vault holds one sealed entry per study and no plaintext identifier
    import pandas as pd
    vault = (out / "vault.jsonl").read_bytes()
    studies = pd.read_parquet(out / "corpus" / "studies.parquet")
    assert 0 < vault.count(b"\n") <= len(studies)
    for column in ("patient_id", "accession_number"):
        if column in studies:
            assert not any(str(v).encode() in vault for v in studies[column].dropna()), column
    assert "Re-identification vault" in result.output


def test_kerma_schedule_monthly_serves_until_stopped(inbox, tmp_path, key_file):
    import os
    import signal
    import subprocess
    import sys
    import time
    from pathlib import Path

    log_path = tmp_path / "schedule.log"
    env = {**os.environ, "PREFECT_HOME": str(tmp_path / "prefect"), "COLUMNS": "200",
           "PREFECT_LOGGING_LEVEL": "INFO"}
    with open(log_path, "w") as log:
        proc = subprocess.Popen(
            [str(Path(sys.executable).parent / "kerma"), "schedule", "monthly", "--cron",
             "0 6 1 * *", "--warehouse", str(tmp_path / "kerma.duckdb"), "--inbox", str(inbox),
             "--out", str(tmp_path / "site"), "--key-file", str(key_file)],
            stdout=log, stderr=subprocess.STDOUT, env=env)
        try:
            deadline = time.monotonic() + 120
            while "deployments are being served" not in log_path.read_text():
                assert proc.poll() is None, log_path.read_text()
                assert time.monotonic() < deadline, log_path.read_text()
                time.sleep(0.2)
        finally:
            proc.send_signal(signal.SIGTERM)
            proc.wait(timeout=60)        # SIGTERM ends serving (systemd's stop)
    text = log_path.read_text()
    assert "on cron '0 6 1 * *'" in text and "monthly/kerma-monthly" in text
    # SIGTERM ends serving either way: through Prefect's handler (it logs so) or, when it
    # arrives before Prefect installed that handler (a loaded machine), by the signal itself
    assert "SIGTERM received" in text or proc.returncode == -signal.SIGTERM, (proc.returncode, text)
    assert not (tmp_path / "kerma.duckdb").exists()     # serving alone runs nothing
