"""`kerma sql`: one read-only SELECT, bound parameters, four output formats, a prompt with history.

Every write statement is refused and the warehouse file keeps its exact bytes (SHA-256).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import duckdb
import pyarrow.parquet as pq
import pytest
from typer.testing import CliRunner

from pipeline.adhoc import check_query, history_path, parse_params, read_only, run_query
from pipeline.cli import app
from pipeline.errors import QueryError


@pytest.fixture(scope="module")
def db(audited, tmp_path_factory) -> Path:
    """A private copy of the audited session warehouse (its bytes are compared below)."""
    copy = tmp_path_factory.mktemp("sql") / "kerma.duckdb"
    shutil.copyfile(audited[0], copy)
    return copy


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _sql(*args: str):
    return CliRunner().invoke(app, ["sql", *args])


def _one_line(output: str) -> str:
    return " ".join(output.split())


# Statements that would change the warehouse, another file, or the session; {tmp} is a scratch
# folder whose contents are checked afterwards. "what" names the statement type refused.
WRITES = [
    ("insert into review_note values ('n1', 'x', 'open', 't', 'me', now())", "INSERT"),
    ("update reference_level set value = 0", "UPDATE"),
    ("delete from reference_level", "DELETE"),
    ("create table extra as select 1 as a", "CREATE"),
    ("create temp table scratch as select 1 as a", "CREATE"),
    ("create or replace view study_dose as select 1 as a", "CREATE"),
    ("create macro twice(x) as 2 * x", "CREATE"),
    ("drop table reference_level", "DROP"),
    ("drop view study_dose", "DROP"),
    ("alter table reference_level add column extra integer", "ALTER"),
    ("alter table reference_level rename to old_levels", "ALTER"),
    ("copy reference_level to '{tmp}/levels.csv'", "COPY"),
    ("copy (select * from study_dose) to '{tmp}/studies.parquet' (format parquet)", "COPY"),
    ("export database '{tmp}/export'", "EXPORT"),
    ("attach '{tmp}/other.duckdb' as other", "ATTACH"),
    ("detach kerma", "DETACH"),
    ("install httpfs", "LOAD"),
    ("load httpfs", "LOAD"),
    ("set threads = 1", "SET"),
    ("reset threads", "SET"),
    ("pragma enable_profiling", "PRAGMA"),
    ("checkpoint", "CALL"),
    ("vacuum", "VACUUM"),
    ("begin transaction", "TRANSACTION"),
    ("prepare q as select 1", "PREPARE"),
    ("explain analyze copy reference_level to '{tmp}/explained.csv'", "EXPLAIN"),
]


@pytest.mark.parametrize(("statement", "kind"), WRITES, ids=[w[0][:40] for w in WRITES])
def test_every_write_statement_is_refused_and_changes_nothing(db, tmp_path, statement, kind):
    before = _sha256(db)
    result = _sql("--warehouse", str(db), statement.format(tmp=tmp_path))
    assert result.exit_code == 2, result.output
    line = _one_line(result.output)
    assert line == (f"error: refused: the warehouse is opened read-only and kerma sql runs one "
                    f"SELECT; this is a {kind} statement, nothing was changed")
    assert _sha256(db) == before
    assert list(tmp_path.iterdir()) == []          # no file written beside it either


def test_a_write_hidden_after_a_select_is_refused(db, tmp_path):
    before = _sha256(db)
    result = _sql("--warehouse", str(db), "select 1; drop table reference_level")
    assert result.exit_code == 2
    assert _one_line(result.output) == "error: one statement at a time: found 2"
    assert _sha256(db) == before


@pytest.mark.parametrize("statement, message", [
    ("insert into reference_level (set_id) values ('x')", "read-only mode"),
    ("create table extra as select 1 as a", "read-only mode"),
    ("copy reference_level to '{tmp}/levels.csv'", "file system operations are disabled"),
    ("attach '{tmp}/other.duckdb' as other", "file system operations are disabled"),
    ("set enable_external_access = true", "configuration has been locked"),
])
def test_the_engine_itself_refuses_writes_without_our_statement_check(db, tmp_path, statement, message):
    """Layers 1 and 2 of pipeline/adhoc.py: DuckDB's read-only mode and locked file access
    refuse these even when the statement check (layer 3) is bypassed."""
    before = _sha256(db)
    with read_only(db) as con, pytest.raises(duckdb.Error, match=message):
        con.execute(statement.format(tmp=tmp_path))
    assert _sha256(db) == before and list(tmp_path.iterdir()) == []


def test_select_forms_that_duckdb_counts_as_select_run(db):
    with read_only(db) as con:
        for text in ("from device limit 1", "describe study_dose", "show tables",
                     "with d as (select 1 as a) select * from d", "values (1, 2)"):
            assert check_query(con, text) == set()
            assert run_query(con, text).num_rows >= 1, text


def test_parameters_are_bound_never_formatted(db):
    with read_only(db) as con:
        ((n_ct,),) = con.execute("select count(*) from study_dose where modality = 'CT'").fetchall()
        assert n_ct > 0
        table = run_query(con, "select count(*) as n from study_dose where modality = $m",
                          {"m": "CT"})
        assert table.to_pylist() == [{"n": n_ct}]
        # A value that would be an injection if formatted into the SQL is just a string here
        hostile = "CT' or 1=1; drop table reference_level; --"
        table = run_query(con, "select count(*) as n from study_dose where modality = $m",
                          {"m": hostile})
        assert table.to_pylist() == [{"n": 0}]
        # DuckDB casts the text to the type the context needs (DATE here)
        ((n_oct,),) = con.execute("select count(*) from study_dose where study_date >= date '2026-10-01' "
                                  "and study_date < date '2026-11-01'").fetchall()
        table = run_query(con, "select count(*) as n from study_dose where study_date >= $from "
                               "and study_date < $to", {"from": "2026-10-01", "to": "2026-11-01"})
        assert table.to_pylist() == [{"n": n_oct}] and 0 < n_oct < n_ct + 10_000


def test_parameter_errors_are_one_line(db):
    assert parse_params(["a=1", "b=x=y"]) == {"a": "1", "b": "x=y"}
    for bad, message in [(["a"], "expected NAME=VALUE"), (["1a=2"], "expected NAME=VALUE"),
                         (["a=1", "a=2"], "given twice")]:
        with pytest.raises(QueryError, match=message):
            parse_params(bad)
    result = _sql("--warehouse", str(db), "select $a as a")
    assert result.exit_code == 2 and _one_line(result.output) == \
        "error: no value for $a (give --param NAME=VALUE)"
    result = _sql("--warehouse", str(db), "select 1 as a", "--param", "b=2")
    assert _one_line(result.output) == "error: --param b not used by the query (it uses no parameters)"
    result = _sql("--warehouse", str(db), "select ? as a")
    assert "use named parameters" in result.output


def test_errors_of_the_engine_are_one_line(db, tmp_path):
    result = _sql("--warehouse", str(db), "select * from no_such_relation")
    assert result.exit_code == 2
    assert _one_line(result.output).startswith("error: Catalog Error: Table with name no_such_relation does not exist")
    assert len(result.output.strip().splitlines()) == 1
    result = _sql("--warehouse", str(db), "selec 1")
    assert result.exit_code == 2 and "syntax error" in result.output
    result = _sql("--warehouse", str(db), "select * from read_csv('/etc/hostname')")
    assert result.exit_code == 2 and "refused: kerma sql reads the warehouse only" in result.output
    missing = tmp_path / "nope.duckdb"
    result = _sql("--warehouse", str(missing), "select 1")
    assert result.exit_code == 2 and "does not exist" in result.output and not missing.exists()


def test_csv_prints_a_header_line_then_rows(db):
    result = _sql("--warehouse", str(db), "--format", "csv", "--param", "m=CT",
                  "select study_key, study_date, dlp_total_mgy_cm, exam_type from study_dose "
                  "where modality = $m order by study_key limit 3")
    assert result.exit_code == 0, result.output
    rows = list(csv.reader(io.StringIO(result.output)))
    assert rows[0] == ["study_key", "study_date", "dlp_total_mgy_cm", "exam_type"]
    assert len(rows) == 4
    with read_only(db) as con:
        expected = con.execute("select study_key, study_date, dlp_total_mgy_cm from study_dose "
                               "where modality = 'CT' order by study_key limit 3").fetchall()
    assert [(r[0], r[1], float(r[2])) for r in rows[1:]] == \
        [(k, d.isoformat(), pytest.approx(v)) for k, d, v in expected]


def test_json_and_parquet_round_trip(db, tmp_path):
    text = "select device_key, count(*) as n_studies from study_dose group by 1 order by 1"
    result = _sql("--warehouse", str(db), "--format", "json", text)
    assert result.exit_code == 0, result.output
    rows = json.loads(result.output)
    with read_only(db) as con:
        expected = [{"device_key": k, "n_studies": n} for k, n in con.execute(text).fetchall()]
    assert rows == expected and len(rows) >= 10
    out = tmp_path / "devices.parquet"
    result = _sql("--warehouse", str(db), "--format", "parquet", "--out", str(out), text)
    assert result.exit_code == 0, result.output
    assert pq.read_table(out).to_pylist() == expected
    result = _sql("--warehouse", str(db), "--format", "parquet", text)
    assert result.exit_code == 2 and "--out" in result.output
    before = _sha256(db)
    result = _sql("--warehouse", str(db), "--format", "csv", "--out", str(db), text)
    assert result.exit_code == 2 and "is the warehouse itself" in result.output
    assert _sha256(db) == before
    result = _sql("--warehouse", str(db), "--format", "xml", text)
    assert result.exit_code == 2 and "--format must be one of table, csv, json, parquet" in result.output


def test_table_format_limits_rows(db):
    result = _sql("--warehouse", str(db), "--limit", "2", "select study_key from study_dose")
    assert result.exit_code == 0
    assert "(first 2 rows shown; --limit N for more" in result.output
    with read_only(db) as con:
        assert run_query(con, "select * from irradiation_event", max_rows=3).num_rows == 3


@pytest.mark.parametrize("statement", [
    "select * from checkpoint()",
    "select * from query('delete from reference_level')",
    "select * from read_text('{tmp}/../kerma.duckdb')",
])
def test_selects_that_reach_for_a_write_change_nothing(db, tmp_path, statement):
    before = _sha256(db)
    _sql("--warehouse", str(db), statement.format(tmp=tmp_path))
    assert _sha256(db) == before and list(tmp_path.iterdir()) == []
    with read_only(db) as con:
        assert con.execute("select count(*) from reference_level").fetchall()[0][0] > 0


def test_history_path_follows_xdg():
    assert history_path({"HOME": "/h"}) == Path("/h/.local/state/kerma/sql_history")
    assert history_path({"HOME": "/h", "XDG_STATE_HOME": "/s"}) == Path("/s/kerma/sql_history")
    assert history_path({"KERMA_SQL_HISTORY": "/x/h"}) == Path("/x/h")


def test_interactive_prompt_runs_statements_and_keeps_history(db, tmp_path):
    """The real console script with its standard input driven by a pipe."""
    kerma = Path(sys.executable).parent / "kerma"
    env = {**os.environ, "HOME": str(tmp_path), "XDG_STATE_HOME": str(tmp_path / "state"),
           "COLUMNS": "120"}
    env.pop("KERMA_SQL_HISTORY", None)
    before = _sha256(db)
    stdin = ("select count(*) as n_devices\n  from device;\n"
             "delete from reference_level;\n"
             "select modality from study_dose where modality = $m limit 1;\n"
             ".quit\n")
    done = subprocess.run([str(kerma), "sql", "--warehouse", str(db), "--param", "m=XA"],
                          input=stdin, capture_output=True, text=True, env=env, timeout=120)
    assert done.returncode == 0, done.stderr
    with read_only(db) as con:
        ((n_devices,),) = con.execute("select count(*) from device").fetchall()
    out = done.stdout
    assert "read-only" in out and "n_devices" in out and f"│ {n_devices} " in out
    assert ("error: refused: the warehouse is opened read-only and kerma sql runs one SELECT; "
            "this is a DELETE statement") in " ".join(out.split())
    assert "│ XA " in out            # the statement after the refused one still ran
    assert _sha256(db) == before
    history = (tmp_path / "state" / "kerma" / "sql_history").read_text(encoding="utf-8")
    assert "select count(*) as n_devices   from device;" in history
    assert "delete from reference_level;" in history


def test_interactive_prompt_ends_at_end_of_input_and_keeps_earlier_history(db, tmp_path):
    kerma = Path(sys.executable).parent / "kerma"
    history = tmp_path / "history"
    history.write_text("select 42 as earlier;\n", encoding="utf-8")
    env = {**os.environ, "KERMA_SQL_HISTORY": str(history), "COLUMNS": "120"}
    done = subprocess.run([str(kerma), "sql", "--warehouse", str(db)],
                          input="select 7 as seven;\nselect 8 as eight", capture_output=True,
                          text=True, env=env, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "│ 7 " in done.stdout and "eight" not in done.stdout
    assert "(unfinished statement without ';' not run)" in done.stdout
    assert history.read_text(encoding="utf-8").splitlines() == ["select 42 as earlier;",
                                                                 "select 7 as seven;"]
