"""The per-report raw tables (events, accumulated totals, value issues) keep their grain without a
primary key: the load cuts each batch to the first row of each key (pipeline/warehouse/load.py,
GRAIN) and loads a report's rows only with the report, once. A warehouse created with the primary
keys (before they were dropped) loads the same way.

Check values are the grain itself (one row per key) and the rows the parser gave; no outside
source."""

from __future__ import annotations

import dataclasses
import re

import duckdb
import pytest

from pipeline.ingest import ingest, process_file
from pipeline.pseudonym import make_pseudonymiser
from pipeline.warehouse.load import GRAIN
from queries import sql
from tests.helpers import KEY, demo_dataset, encode

_PER_REPORT = [f"raw_{name}" for name in GRAIN]


def _rows_per_key(con, table: str, key: tuple[str, ...]) -> tuple[int, int]:
    cols = ", ".join(key)
    return con.execute(f"select count(*), count(distinct ({cols})) from {table}").fetchone()


def _constraints(con, table: str) -> list[str]:
    return [r[0] for r in con.execute(
        "select constraint_type from duckdb_constraints() where table_name = ? "
        "and constraint_type in ('PRIMARY KEY', 'UNIQUE')", [table]).fetchall()]


def test_a_fresh_warehouse_has_no_index_on_the_per_report_tables(warehouse):
    db, _ = warehouse
    with duckdb.connect(str(db), read_only=True) as con:
        for table in _PER_REPORT:
            assert _constraints(con, table) == [], table
            n, n_keys = _rows_per_key(con, table, GRAIN[table.removeprefix("raw_")])
            assert n == n_keys, table
        # the tables whose rows repeat across files keep theirs (insert or ignore, lookups)
        for table in ("raw_dose_object", "raw_study", "raw_device", "raw_source_object"):
            assert _constraints(con, table) == ["PRIMARY KEY"], table
        assert con.execute("select count(*) from raw_ct_event").fetchone()[0] > 0
        assert con.execute("select count(*) from raw_projection_event").fetchone()[0] > 0


def test_a_report_repeating_an_event_keeps_the_first_row_of_it(tmp_path):
    """A CT and a projection report each carry their first event twice, the copy with another
    protocol name: one row per event is loaded, the first, and the report's other events too."""
    pseudonymise = make_pseudonymiser(KEY)
    (tmp_path / "in").mkdir()
    for name, room in (("ct.dcm", "tgh-ct1"), ("dx.dcm", "ovh-dx1")):
        _, ds = demo_dataset(room)
        (tmp_path / "in" / name).write_bytes(encode(ds))
    parsed = {}

    def parse(todo):
        outcomes = [process_file(p, data, pseudonymise, digest) for p, data, digest in todo]
        for o in outcomes:
            for attr in ("ct_events", "projection_events"):
                events = getattr(o.obj, attr)
                if events:
                    copy = dataclasses.replace(events[0], acquisition_protocol="the copy")
                    setattr(o.obj, attr, [events[0], copy, *events[1:]])
                    parsed[attr] = [(e.event_uid, e.acquisition_protocol) for e in events]
        return outcomes

    db = tmp_path / "kerma.duckdb"
    summary = ingest([tmp_path / "in"], db, KEY, parse=parse)
    assert summary.loaded == 2 and set(parsed) == {"ct_events", "projection_events"}
    with duckdb.connect(str(db), read_only=True) as con:
        for attr, table in (("ct_events", "raw_ct_event"),
                            ("projection_events", "raw_projection_event")):
            rows = con.execute(f"select event_uid, acquisition_protocol from {table}").fetchall()
            assert sorted(rows, key=str) == sorted(parsed[attr], key=str), table
            assert "the copy" not in {p for _, p in rows}


def test_a_report_sent_again_in_a_later_batch_adds_no_rows(tmp_path):
    """The same report under two names, one file per batch: the second is a duplicate and its
    events, totals and issues are not loaded again (no primary key would ignore them)."""
    _, ds = demo_dataset("tgh-ct1")
    data = encode(ds)
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "a.dcm").write_bytes(data)
    (tmp_path / "in" / "b.dcm").write_bytes(data)
    db = tmp_path / "kerma.duckdb"
    summary = ingest([tmp_path / "in" / "a.dcm"], db, KEY)
    with duckdb.connect(str(db), read_only=True) as con:
        before = {t: con.execute(f"select count(*) from {t}").fetchone()[0] for t in _PER_REPORT}
    assert summary.loaded == 1 and before["raw_ct_event"] > 0
    summary = ingest([tmp_path / "in"], db, KEY, batch_size=1)
    assert dict(summary.by_status) == {"duplicate": 1} and summary.unchanged == 1
    with duckdb.connect(str(db), read_only=True) as con:
        after = {t: con.execute(f"select count(*) from {t}").fetchone()[0] for t in _PER_REPORT}
    assert after == before


def _with_primary_keys(con) -> None:
    """The per-report tables as a warehouse of an earlier version has them: with primary keys."""
    for name, key in GRAIN.items():
        ddl = sql(f"raw_{name}")
        create = re.search(r"create table if not exists .*?\n\);", ddl, re.S).group(0)
        con.execute(create.removesuffix("\n);") + f",\n    primary key ({', '.join(key)})\n);")


def test_a_warehouse_created_with_the_primary_keys_loads_the_same(corpus, tmp_path):
    files = sorted(corpus.rglob("*.dcm"))[:120]
    old, new = tmp_path / "old.duckdb", tmp_path / "new.duckdb"
    with duckdb.connect(str(old)) as con:
        _with_primary_keys(con)
    summaries = [ingest(files, db, KEY, batch_size=32) for db in (old, new)]
    assert summaries[0].by_status == summaries[1].by_status
    assert summaries[0].loaded > 0
    contents = []
    for db in (old, new):
        with duckdb.connect(str(db), read_only=True) as con:
            keeps = [_constraints(con, t) for t in _PER_REPORT]
            contents.append({t: con.execute(
                f"select * exclude (run_id) from {t} order by all").fetchall()
                for t in _PER_REPORT})
        assert keeps == ([["PRIMARY KEY"]] * len(GRAIN) if db == old else [[]] * len(GRAIN))
    assert contents[0] == contents[1]
    assert all(contents[0][t] for t in ("raw_ct_event", "raw_projection_event", "raw_accumulated"))


@pytest.mark.parametrize("table", _PER_REPORT)
def test_grain_matches_the_schema_comment(table):
    """The key GRAIN declares is the one the table's schema file names (one place to change)."""
    key = ", ".join(GRAIN[table.removeprefix("raw_")])
    assert f"-- key ({key}):" in sql(table)
