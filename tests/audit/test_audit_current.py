"""An audit whose inputs have not changed is current: `kerma dashboard` and `kerma report` reuse it."""

from __future__ import annotations

import dataclasses
import shutil

import duckdb
import pytest
from typer.testing import CliRunner

from pipeline.audit import AuditSettings, audit_is_current, run_audit
from pipeline.cli import app
from pipeline.ingest import ingest
from tests.helpers import KEY


def _runs(db) -> int:
    con = duckdb.connect(str(db), read_only=True)
    try:
        return con.execute("select count(*) from audit_period").fetchone()[0]
    finally:
        con.close()


@pytest.fixture()
def copy(warehouse, tmp_path):
    db = tmp_path / "kerma.duckdb"
    shutil.copy(warehouse[0], db)
    return db


def test_current_until_data_settings_or_period_change(copy, tmp_path):
    assert not audit_is_current(copy, period="2026-10")            # never audited
    run_audit(copy, period="2026-10")
    assert audit_is_current(copy, period="2026-10")
    assert not audit_is_current(copy, period="2026-11")             # another period
    assert not audit_is_current(copy, period="2026-10", settings=dataclasses.replace(
        AuditSettings(), outlier_min_n=12))                         # other settings
    assert not audit_is_current(copy, period="2026-10", reference_sets=["ukhsa_adult_ct_2022"])
    run_audit(copy, period="2026-11")
    # the tables now hold November; October's findings (audit_finding) are still current
    assert not audit_is_current(copy, period="2026-10")
    assert audit_is_current(copy, period="2026-10", holds_tables=False)
    (tmp_path / "empty").mkdir()
    ingest([tmp_path / "empty"], copy, KEY)                         # a load run since
    assert not audit_is_current(copy, period="2026-11")
    assert not audit_is_current(copy, period="2026-10", holds_tables=False)


def test_an_unfinished_run_is_not_current(copy):
    run_audit(copy, period="2026-10")
    con = duckdb.connect(str(copy))
    con.execute("update audit_period set inputs_fingerprint = null")   # as a run cut short
    con.close()
    assert not audit_is_current(copy, period="2026-10")


def test_kerma_dashboard_does_not_rerun_a_current_audit(copy, tmp_path):
    args = ["dashboard", "--warehouse", str(copy), "--period", "2026-10"]
    first = CliRunner().invoke(app, [*args, "--out", str(tmp_path / "a")])
    assert first.exit_code == 0, first.output
    assert _runs(copy) == 1 and "not re-run" not in first.output
    second = CliRunner().invoke(app, [*args, "--out", str(tmp_path / "b")])
    assert second.exit_code == 0, second.output
    assert _runs(copy) == 1                       # no second audit run recorded
    assert "current" in second.output and "not re-run" in second.output
    assert (tmp_path / "b" / "index.html").read_text() != ""


def test_kerma_report_audits_both_periods_once(copy, tmp_path):
    args = ["report", "--warehouse", str(copy), "--period", "2026-11", "--format", "html"]
    first = CliRunner().invoke(app, [*args, "--out", str(tmp_path / "a.html")])
    assert first.exit_code == 0, first.output
    assert _runs(copy) == 2                       # October (previous) and November
    second = CliRunner().invoke(app, [*args, "--out", str(tmp_path / "b.html")])
    assert second.exit_code == 0, second.output
    assert _runs(copy) == 2 and "not re-run" in second.output
