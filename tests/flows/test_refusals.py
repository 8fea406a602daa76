"""The flows keep the warehouse rules: audit and publish never create a warehouse, and the
monthly flow's ingest refuses a second pseudonymisation key (nothing loaded) unless it is
asked to start a new key epoch."""

from __future__ import annotations

import datetime as dt

import duckdb
import pytest

from pipeline.errors import KeyMismatchError, WarehouseError
from pipeline.flows import audit_flow, publish_flow, run_monthly
from tests.helpers import KEY, write_daily_reports


def test_audit_and_publish_flows_refuse_a_missing_warehouse(tmp_path):
    missing = tmp_path / "nowhere" / "kerma.duckdb"
    with pytest.raises(WarehouseError, match="does not exist"):
        audit_flow(missing, period="2026-10")
    with pytest.raises(WarehouseError, match="does not exist"):
        publish_flow(missing, tmp_path / "site", "2026-10")
    assert not missing.parent.exists() and not (tmp_path / "site").exists()


def test_monthly_flow_refuses_another_key_then_starts_a_new_epoch_when_asked(tmp_path):
    inbox = tmp_path / "inbox"
    write_daily_reports(inbox, "ovh-dx1", [dt.date(2026, 10, d) for d in (1, 2, 3)])
    db = tmp_path / "kerma.duckdb"
    (tmp_path / "a.key").write_bytes(KEY)
    (tmp_path / "b.key").write_bytes(b"another-key-0123456789abcdef")
    first = run_monthly(warehouse=db, inbox=inbox, out=tmp_path / "site", period="2026-10",
                        key_file=tmp_path / "a.key")
    assert first.ingest.by_status["loaded"] == 3 and first.ingest.key_epoch == 1
    write_daily_reports(tmp_path / "more", "ovh-dx1", [dt.date(2026, 10, 9)])
    for path in (tmp_path / "more").iterdir():
        path.rename(inbox / path.name)
    with pytest.raises(KeyMismatchError, match="patient linkage would break"):
        run_monthly(warehouse=db, inbox=inbox, out=tmp_path / "site", period="2026-10",
                    key_file=tmp_path / "b.key")
    with duckdb.connect(str(db), read_only=True) as con:
        assert con.execute("select count(*) from raw_dose_object").fetchone()[0] == 3
        assert con.execute("select state from pipeline_run where flow = 'monthly' "
                           "order by started_at desc limit 1").fetchone()[0] == "FAILED"
    again = run_monthly(warehouse=db, inbox=inbox, out=tmp_path / "site", period="2026-10",
                        key_file=tmp_path / "b.key", new_key_epoch=True)
    assert again.ingest.key_epoch == 2 and again.ingest.by_status["loaded"] == 1
