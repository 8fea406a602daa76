"""Feed monitoring: a unit whose daily dose reports stop mid-period is flagged (data_alerts).

Real DICOM files (the demo generator's reports, one study per day) are written to disk and
ingested into a real DuckDB file, then audited for October 2026. Expected values are worked
out by hand from the calendar (no outside source needed): history = 13 whole weeks before
1 Oct 2026 (2 Jul to 30 Sep); a daily unit has a median of 7 studies per week.
"""

import datetime as dt
import shutil

import duckdb
import pytest
from typer.testing import CliRunner

from pipeline.audit import run_audit
from pipeline.cli import app
from pipeline.ingest import ingest
from tests.helpers import KEY, write_daily_reports


def _days(first: dt.date, last: dt.date, step: int = 1):
    return [first + dt.timedelta(days=n) for n in range(0, (last - first).days + 1, step)]


@pytest.fixture(scope="module")
def feeds(tmp_path_factory):
    """Three units: 'stops' daily until 15 Oct, 'steady' daily to 31 Oct, 'gone' weekly until
    September only."""
    root = tmp_path_factory.mktemp("feeds")
    write_daily_reports(root / "in", "ovh-dx1", _days(dt.date(2026, 7, 1), dt.date(2026, 10, 15)))
    write_daily_reports(root / "in", "tgh-dx1", _days(dt.date(2026, 7, 1), dt.date(2026, 10, 31)))
    write_daily_reports(root / "in", "mph-ct1", _days(dt.date(2026, 7, 2), dt.date(2026, 9, 30), 7))
    db = root / "kerma.duckdb"
    summary = ingest([root / "in"], db, KEY)
    assert summary.by_status["loaded"] == 107 + 123 + 13, summary.quarantine_reasons
    return root, db


def _alerts(db) -> list[dict]:
    con = duckdb.connect(str(db), read_only=True)
    try:
        cursor = con.execute("select * from data_alerts order by device_key nulls first, kind")
        names = [d[0] for d in cursor.description]
        return [dict(zip(names, row)) for row in cursor.fetchall()]
    finally:
        con.close()


def test_unit_whose_daily_reports_stop_mid_period_is_silent_and_below_its_volume(feeds, tmp_path):
    root, db = feeds
    db = shutil.copy(db, tmp_path / "k.duckdb")
    summary = run_audit(db, period="2026-10")
    rows = _alerts(db)
    stops = {r["kind"]: r for r in rows if r["last_study_date"] == dt.date(2026, 10, 15)}
    assert sorted(stops) == ["silent", "volume_drop"]
    assert stops["silent"]["device_key"] == stops["volume_drop"]["device_key"]
    # 31 Oct - 15 Oct = 16 days without a study (>= 7, the default silent_days)
    assert "last 16 days" in stops["silent"]["detail"] and stops["silent"]["period"] == "2026-10"
    drop = stops["volume_drop"]
    assert drop["expected_per_week"] == 7.0                         # 13 full weeks of daily studies
    assert drop["observed_per_week"] == pytest.approx(15 * 7 / 31)  # 15 studies in 31 days
    assert "(threshold 50 %)" in drop["detail"]
    # the steady unit has no row; the weekly unit that sent nothing in October is 'no_data'
    # (its 13th weekly study fell on 24 Sep: 2 Jul + 12 x 7 days)
    gone = [r for r in rows if r["last_study_date"] == dt.date(2026, 9, 24)]
    assert [r["kind"] for r in gone] == ["no_data"]
    assert gone[0]["expected_per_week"] == 1.0 and gone[0]["observed_per_week"] == 0.0
    assert len(rows) == 3 and all(r["device_key"] for r in rows)
    assert all(len(r["item_id"]) == 16 and r["action"] == "data_check" for r in rows)
    assert [a["kind"] for a in summary.data_alerts] == [r["kind"] for r in rows]


def test_item_ids_are_stable_across_reruns_and_settings_come_from_kerma_toml(feeds, tmp_path):
    _, db = feeds
    db = shutil.copy(db, tmp_path / "k.duckdb")
    run_audit(db, period="2026-10")
    first = {(r["device_key"], r["kind"]): r["item_id"] for r in _alerts(db)}
    run_audit(db, period="2026-10")
    assert {(r["device_key"], r["kind"]): r["item_id"] for r in _alerts(db)} == first
    assert len(set(first.values())) == 3
    config = tmp_path / "kerma.toml"
    config.write_text("[audit]\nsilent_days = 20\nvolume_drop = 0.4\n")
    run_audit(db, period="2026-10", config=config)
    kinds = sorted(r["kind"] for r in _alerts(db))
    # 16 silent days < 20; 3.39 per week is not below 0.4 x 7 = 2.8
    assert kinds == ["no_data"]


def test_cli_prints_data_checks_first_and_the_dashboard_leads_with_them(feeds, tmp_path):
    _, db = feeds
    db = shutil.copy(db, tmp_path / "k.duckdb")
    result = CliRunner().invoke(app, ["audit", "--warehouse", str(db), "--period", "2026-10"])
    assert result.exit_code == 0, result.output
    out = result.output
    assert "data_check" in out and out.index("data_check") < out.index("Individual-exam alerts")
    assert "silent" in out and "volume_drop" in out and "no_data" in out
    site = tmp_path / "site"
    result = CliRunner().invoke(app, ["dashboard", "--warehouse", str(db), "--period", "2026-10",
                                      "--out", str(site)])
    assert result.exit_code == 0, result.output
    index = (site / "index.html").read_text()
    assert index.index('id="data-checks"') < index.index('id="glance"') < index.index('id="findings"')
    assert "CSV (3 rows)" in index[index.index('id="table-overview-data-alerts"'):][:400]
    quality = (site / "data-quality.html").read_text()
    assert 'id="table-dq-data-alerts"' in quality and "volume_drop" in quality
