"""Stable item ids on audit findings, the append-only review_note table, `kerma note`."""

from __future__ import annotations

import datetime as dt
import shutil

import duckdb
import pytest
from typer.testing import CliRunner

from pipeline.audit import period_length, previous_period, run_audit
from pipeline.cli import app

GROUP = "site, device_key, exam_type, quantity, population, stratum, phantom"


def _ids(db, table, key):
    with duckdb.connect(str(db), read_only=True) as con:
        return dict(con.execute(f"select {key}, item_id from {table}").fetchall())


def test_period_length_and_previous_period():
    assert period_length(dt.date(2026, 10, 1), dt.date(2026, 11, 1)) == "1 month"
    assert period_length(dt.date(2026, 9, 1), dt.date(2026, 12, 1)) == "3 months"
    assert period_length(dt.date(2026, 10, 5), dt.date(2026, 10, 15)) == "10 days"
    assert previous_period(dt.date(2026, 1, 1), dt.date(2026, 2, 1)) == (dt.date(2025, 12, 1),
                                                                        dt.date(2026, 1, 1))
    assert previous_period(dt.date(2026, 10, 5), dt.date(2026, 10, 15)) == (dt.date(2026, 9, 25),
                                                                           dt.date(2026, 10, 5))


def test_every_finding_has_an_item_id_unique_in_its_table(monthly):
    with duckdb.connect(str(monthly), read_only=True) as con:
        for table, key in (("audit_medians", GROUP), ("dose_alerts", "study_key, rule"),
                           ("drift_flags", "device_key, exam_type, quantity")):
            n, n_ids, n_null = con.execute(
                f"select count(*), count(distinct item_id), count(*) - count(item_id) from {table}"
            ).fetchone()
            assert n_null == 0, table
            assert n_ids == con.execute(f"select count(distinct ({key})) from {table}").fetchone()[0]
        assert con.execute("select count(*) from dose_alerts").fetchone()[0] > 0


def test_the_same_group_next_month_keeps_its_item_id(monthly, tmp_path):
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(monthly, copy)
    key = f"concat_ws('|', {', '.join(f'coalesce({c}, chr(0))' for c in GROUP.split(', '))})"
    november = _ids(copy, "audit_medians", key)
    run_audit(copy, period="2026-10")
    october = _ids(copy, "audit_medians", key)
    shared = set(october) & set(november)
    assert len(shared) > 10
    assert all(october[k] == november[k] for k in shared)
    # a quarter is another finding than a month of the same room
    run_audit(copy, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
    quarter = _ids(copy, "audit_medians", key)
    assert not set(quarter.values()) & set(october.values())


def test_audit_finding_keeps_each_audited_period(monthly):
    with duckdb.connect(str(monthly), read_only=True) as con:
        rows = dict(con.execute("select period, count(*) from audit_finding group by all").fetchall())
        actions = {r[0] for r in con.execute("select distinct action from audit_finding").fetchall()}
    assert set(rows) == {"2026-10", "2026-11"} and min(rows.values()) > 0
    assert actions <= {"patient_follow_up", "protocol_review", "statistical_review"}


def test_kerma_note_add_and_list_append_only(monthly, tmp_path):
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(monthly, copy)
    with duckdb.connect(str(copy), read_only=True) as con:
        item = con.execute("select item_id from audit_medians where is_above_reference limit 1"
                           ).fetchone()[0]
    runner = CliRunner()
    for status, text in (("open", "looking into it"), ("explained", "detector replaced")):
        result = runner.invoke(app, ["note", "add", "--warehouse", str(copy), "--item", item,
                                     "--status", status, "--text", text, "--by", "MPE on duty"])
        assert result.exit_code == 0, result.output
        assert f"added to {item}: {status}" in result.output
    listed = runner.invoke(app, ["note", "list", "--warehouse", str(copy)], terminal_width=200)
    assert listed.exit_code == 0, listed.output
    assert "looking into it" in listed.output and "detector replaced" in listed.output
    with duckdb.connect(str(copy), read_only=True) as con:
        assert con.execute("select count(*) from review_note").fetchone()[0] == 2
        assert con.execute("select status, note_text, n_notes from latest_review_note "
                           "where item_id = ?", [item]).fetchone() == ("explained", "detector replaced", 2)


@pytest.mark.parametrize("args, message", [
    (["--item", "Mnothere", "--status", "open"], "unknown item 'Mnothere'"),
    (["--item", "X", "--status", "fixed"], "--status must be one of open, explained, action, closed"),
])
def test_kerma_note_add_refuses_bad_input_in_one_line(monthly, tmp_path, args, message):
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(monthly, copy)
    result = CliRunner().invoke(app, ["note", "add", "--warehouse", str(copy), *args,
                                      "--text", "t", "--by", "me"], terminal_width=200)
    assert result.exit_code == 2
    assert message in result.output and len(result.output.strip().splitlines()) == 1
    with duckdb.connect(str(copy), read_only=True) as con:
        assert con.execute("select count(*) from review_note").fetchone()[0] == 0
