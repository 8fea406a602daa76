"""A mistyped --warehouse is refused by every command that reads one, and nothing is created;
a period without studies is reported as "no data for this period", never as a clean audit."""

import shutil

import duckdb
import pytest
from typer.testing import CliRunner

from pipeline.cli import app

READ_COMMANDS = {
    "audit": ["audit", "--period", "2026-10"],
    "dashboard": ["dashboard", "--period", "2026-10", "--out", "{tmp}/site"],
    "sql": ["sql", "select count(*) from study_dose"],
    "exams unmapped": ["exams", "unmapped"],
    "reference list": ["reference", "list"],
    "reference derive": ["reference", "derive", "local_x"],
    "reference import": ["reference", "import", "{tmp}/levels.csv"],
    "pull": ["pull", "--from", "2026-10-01", "--to", "2026-10-31", "--inbox", "{tmp}/inbox",
             "--dicomweb", "http://127.0.0.1:9/dicom-web"],
}


@pytest.mark.parametrize("name", sorted(READ_COMMANDS))
def test_read_command_refuses_a_missing_warehouse_and_creates_nothing(name, tmp_path):
    missing = tmp_path / "typo" / "missng.duckdb"
    args = [a.format(tmp=tmp_path) for a in READ_COMMANDS[name]] + ["--warehouse", str(missing)]
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 2, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1, result.output
    assert f"warehouse {missing} does not exist" in lines[0]
    assert not missing.exists() and not missing.parent.exists()
    assert not (tmp_path / "site").exists()   # the dashboard wrote nothing either


def test_an_existing_warehouse_is_still_read(warehouse):
    db, _ = warehouse
    result = CliRunner().invoke(app, ["sql", "select count(*) as n from study_dose", "--warehouse", str(db)])
    assert result.exit_code == 0 and "n" in result.output


@pytest.fixture(scope="module")
def empty_period(warehouse, tmp_path_factory):
    """The session warehouse (Sep-Nov 2026) copied, then audited for March 2027 (no studies)."""
    db, _ = warehouse
    copy = tmp_path_factory.mktemp("empty") / "k.duckdb"
    shutil.copy(db, copy)
    return copy


def test_period_without_studies_is_no_data_not_a_clean_audit(empty_period, tmp_path):
    runner = CliRunner()
    result = runner.invoke(app, ["audit", "--warehouse", str(empty_period), "--period", "2027-03"])
    assert result.exit_code == 0, result.output
    assert "Finding: no data for this period" in result.output
    assert "No room median above its reference level" not in result.output
    assert "Individual-exam alerts: none" not in result.output
    con = duckdb.connect(str(empty_period), read_only=True)
    rows = con.execute("select period, device_key, kind, detail from data_alerts "
                       "where device_key is null").fetchall()
    con.close()
    assert rows == [("2027-03", None, "no_data",
                     "no data for this period: the warehouse holds no study dated in it "
                     "(last study on 2026-11-30)")]
    result = runner.invoke(app, ["dashboard", "--warehouse", str(empty_period), "--period", "2027-03",
                                 "--out", str(tmp_path / "site")])
    assert result.exit_code == 0, result.output
    index = (tmp_path / "site" / "index.html").read_text()
    assert "Audit period <strong>2027-03" in index
    assert "Finding: no data for this period." in index
    assert index.index("no data for this period") < index.index('id="glance"')
    assert "No dose findings can be made: no data for this period." in index
    assert "table-overview-above-reference" not in index
