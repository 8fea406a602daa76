"""Derived tables kept beside the raw ones, refreshed per ingest run for the studies it touched.

The deduplicated events (``derived_irradiation_event``), the exam texts (``derived_exam_text``),
the study totals (``derived_study_total``) and each RF/XA study's peak skin dose
(``derived_skin_dose``, ``_factor``, ``_map``) depend only on a study's own raw rows, so they
are computed once, when a load adds rows to the study, and kept; the public views
(irradiation_event, stg_exam_text, study_dose) read them, and an audit only groups them. Two
tables depend on the exam rules as well: the exam matches (``derived_exam_match``) and the
audited values with their exam types (``derived_audit_observation``, read through the view
audit_observation); they are kept for the rules in force and recomputed whole when the rules
change. Each dose object's studies with their dates (``derived_object_study``, one row per SOP
instance x study x device of the deduplicated events) are computed from the kept events and
totals, after them, for the same studies (the site build counts a period's files from them).
The rest of the configuration (site map, reference levels, alert rules) is joined at read time,
never kept here.

`refresh_derived` keeps them true to the raw tables:

* with the studies a run touched and the raw state the run started from: when the derived
  tables matched that state, only those studies are recomputed (the ``calc_*`` views see
  only their rows, through temporary copies of them that hide the raw tables:
  queries/refresh/);
* otherwise (a warehouse of an earlier version, a changed definition, a writer that did not
  say what it touched): every derived table is rebuilt whole.

``derived_state`` records the raw state (row counts and key hashes,
queries/refresh/derived_raw_state.sql) and a digest of the definitions (SQL and the skin-dose
model) the tables match; a refresh whose state and digest match does nothing.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
from collections.abc import Iterable, Iterator
from functools import cache
from pathlib import Path

import duckdb
import pyarrow as pa

from queries import ROOT as QUERIES
from queries import apply_all, sql

from .connection import evict_cached_blocks, scan_bounded

__all__ = ["DERIVED_TABLES", "MAP_FLOOR_MGY", "MATCH_TABLES", "OBJECT_TABLES", "RefreshResult",
           "definitions_digest", "exam_rules_state", "raw_state", "refresh_derived",
           "skin_rows_for"]

# (derived table, the staging view computing it), in dependency order
DERIVED_TABLES = (("derived_irradiation_event", "calc_irradiation_event"),
                  ("derived_exam_text", "calc_exam_text"),
                  ("derived_study_total", "calc_study_total"))
# the exam matches (kept for the exam rules in force), then the audited values, which read the
# totals, the events and the matches: refreshed after them, in this order
MATCH_TABLES = (("derived_exam_match", "calc_exam_match"),
                ("derived_audit_observation", "calc_audit_observation"))
# each dose object's studies and dates, read from the kept events and totals: refreshed after
# them, for the same studies (they depend on neither the exam rules nor the configuration)
OBJECT_TABLES = (("derived_object_study", "calc_object_study"),)
# the derived tables the audited values are computed from, hidden by temporary copies of the
# scope's rows while the scope's audited values are recomputed
_OBSERVATION_INPUTS = ("derived_study_total", "derived_irradiation_event", "derived_exam_match")
# the derived tables the objects' studies are computed from, hidden the same way
_OBJECT_INPUTS = ("derived_irradiation_event", "derived_study_total")
_SKIN_TABLES = ("derived_skin_dose", "derived_skin_dose_factor", "derived_skin_dose_map")
# The order rows are written in, by table: month first where the table has a date (an audit of a
# month then reads that month's row groups of a rebuilt table, as of one filled month by month),
# then room and study, so each study's rows and each room's lie together. Every audit statement
# groups by room, or by study and joins the study's events; a parallel join writes them in no
# order (at 10M events every event followed one of another study), and grouping rows that arrive
# in room order took a third less CPU (audit_medians' grouping, one of four parts: 1.7 against
# 2.6 CPU-s; DuckDB 2.0, measured, no other source). A whole rebuild sorts each table; a refresh
# sorts the scope's rows, so the rows of each ingest run lie in this order.
_WRITE_ORDER = {
    "derived_irradiation_event": "device_key, study_key, event_uid",
    "derived_exam_text": "device_key, study_key",
    "derived_study_total": "date_trunc('month', study_date), device_key, study_key",
    "derived_exam_match": "device_key, study_key",
    "derived_audit_observation": "period, device_key, exam_type, quantity, study_key",
}


def _ordered(table: str) -> str:
    """The ORDER BY clause the rows of `table` are written with (empty: any order)."""
    return f" order by {_WRITE_ORDER[table]}" if table in _WRITE_ORDER else ""
# raw tables holding a study_key, hidden by a scoped temporary copy during an incremental refresh
_SCOPED_RAW = ("raw_dose_object", "raw_study", "raw_ct_event", "raw_projection_event",
               "raw_accumulated")
# Skin-dose maps are kept for studies at or above the lowest default peak-skin-dose alert
# threshold (pipeline/alert_rules.toml, ncrp168_srdl_peak_skin_dose: 3 Gy, NCRP Report 168,
# from memory); an audit whose rules set a lower threshold computes the missing maps.
MAP_FLOOR_MGY = 3000.0
_SKIN_CHUNK_ROWS = 50_000

_SKIN_SCHEMA = pa.schema(
    [("study_key", pa.string()), ("device_key", pa.string()), ("psd_mgy", pa.float64()),
     ("method", pa.string()), ("n_events", pa.int64()), ("n_events_with_geometry", pa.int64()),
     ("ka_r_total_mgy", pa.float64()), ("psd_to_ka_r", pa.float64()),
     ("is_upper_bound", pa.bool_()), ("upper_bound_part_mgy", pa.float64()),
     ("phantom", pa.string()), ("factor_sources", pa.string()), ("uncertainty_note", pa.string())])
_FACTOR_SCHEMA = pa.schema(
    [("study_key", pa.string()), ("device_key", pa.string()), ("factor", pa.string()),
     ("n_events", pa.int64()), ("value_min", pa.float64()), ("value_max", pa.float64()),
     ("source", pa.string())])
_MAP_SCHEMA = pa.schema([("study_key", pa.string()), ("device_key", pa.string()),
                         ("around_mm", pa.float64()), ("along_mm", pa.float64()),
                         ("dose_mgy", pa.float64())])


class RefreshResult:
    """What a refresh did: mode 'none', 'incremental' or 'full', and how many studies; and
    `raw_state`, the `raw_state` the derived tables now match (the raw tables' state after it)."""

    def __init__(self, mode: str, n_studies: int, seconds: float, raw_state: str | None = None):
        self.mode, self.n_studies, self.seconds = mode, n_studies, seconds
        self.raw_state = raw_state

    def __repr__(self) -> str:
        return f"RefreshResult({self.mode!r}, {self.n_studies}, {self.seconds:.2f} s)"


@cache
def definitions_digest() -> str:
    """SHA-256 over what the derived tables are computed by: the staging, derived and refresh
    SQL, the skin-dose model and its seeds, and this module."""
    here = Path(__file__).resolve()
    pipeline = here.parent.parent
    files = sorted([*QUERIES.joinpath("schema").glob("*.sql"),
                    *QUERIES.joinpath("staging").glob("*.sql"),
                    *QUERIES.joinpath("derived").glob("*.sql"),
                    *QUERIES.joinpath("refresh").glob("*.sql"),
                    *QUERIES.joinpath("seeds").glob("skin_*"),
                    pipeline / "skin_dose.py", pipeline / "metrics" / "skin.py", here])
    h = hashlib.sha256()
    for path in files:
        h.update(path.name.encode() + b"\0" + path.read_bytes())
    return h.hexdigest()


def raw_state(con: duckdb.DuckDBPyConnection) -> str:
    """Digest of the raw rows the derived tables are computed from (queries/refresh/): a scan of
    the raw tables' keys whole, under a bound on DuckDB's memory (scan_bounded)."""
    return scan_bounded(con, sql("derived_raw_state"))[0][0]


def exam_rules_state(con: duckdb.DuckDBPyConnection) -> str:
    """Digest of the exam rules in force (raw_exam_rule), which derived_exam_match depends on."""
    return con.execute(sql("exam_rules_state")).fetchall()[0][0]


def _stored(con) -> tuple[str, str, str] | None:
    rows = con.execute(sql("select_derived_state")).fetchall()
    return tuple(rows[0]) if rows else None


@contextlib.contextmanager
def _transaction(con) -> Iterator[None]:
    """One transaction: committed when the block ends, rolled back if it raises."""
    con.execute("begin transaction")
    try:
        yield
        con.execute("commit")
    except BaseException:
        con.execute("rollback")
        raise


def refresh_derived(con: duckdb.DuckDBPyConnection, studies: Iterable[str] | None = None, *,
                    since: str | None = None) -> RefreshResult:
    """Bring the derived tables up to date with the raw tables and exam rules (module docstring).

    Parameters
    ----------
    con : a write connection whose schema is in place (`ensure_schema`).
    studies : study keys whose raw rows changed (added or removed) since `since`.
    since : the `raw_state` read before those changes. Both given and the derived tables at
        that state: only those studies are recomputed; else a whole rebuild, unless the tables
        already match the raw tables. Exam rules changed since the last refresh: the exam
        matches are recomputed whole.

    Returns
    -------
    RefreshResult
        mode 'none' (already current), 'rules' (only the exam matches, whole), 'incremental'
        or 'full'.

    Each mode runs in one transaction: a crash leaves the previous state, which the next
    refresh sees as stale.
    """
    import time

    started = time.perf_counter()
    now = (raw_state(con), definitions_digest(), exam_rules_state(con))
    stored = _stored(con)
    if stored == now:
        return RefreshResult("none", 0, time.perf_counter() - started, now[0])
    keys = sorted({k for k in studies if k is not None}) if studies is not None else None
    if stored is not None and stored[:2] == now[:2]:
        n, mode = _matches_whole(con), "rules"
    elif keys is not None and since is not None and stored is not None \
            and stored[:2] == (since, now[1]):
        n, mode = _incremental(con, keys, rules_changed=stored[2] != now[2]), "incremental"
    else:
        n, mode = _full(con), "full"
    with _transaction(con):
        con.execute(sql("delete_derived_state"))
        con.execute(sql("insert_derived_state"), {
            "raw_state": now[0], "definitions": now[1], "rules": now[2],
            "refreshed_at": dt.datetime.now(), "n_studies": n, "mode": mode})
    return RefreshResult(mode, n, time.perf_counter() - started, now[0])


def _refill_matches(con) -> None:
    """Every exam match recomputed from the kept exam texts and the rules in force, then every
    audited value (its exam type follows the matches)."""
    for table, calc in MATCH_TABLES:
        con.execute(f"delete from {table}")
        con.execute(sql("refresh_insert").format(table=table, calc=calc, order=_ordered(table)))


def _captured(con, table: str, calc: str, held: set[str]) -> None:
    """Replace the scope's rows of `table` (if it holds any: `held`) by those `calc` computes
    now, keeping them in a temporary table (refresh_new_<table>) for the steps after it."""
    if table in held:
        con.execute(sql("refresh_delete").format(table=table))
    con.execute(sql("refresh_capture").format(table=table, calc=calc))
    con.execute(sql("refresh_insert_captured").format(table=table, order=_ordered(table)))


@contextlib.contextmanager
def _shadowed(con, tables: Iterable[str], statement: str, **names: str) -> Iterator[None]:
    """Hide `tables` behind temporary tables of the scope's rows, made by
    queries/refresh/<statement>.sql (refresh_shadow: copies of the raw rows; refresh_shadow_captured:
    the rows just recomputed); dropped when the block ends."""
    tables = list(tables)
    try:
        for table in tables:
            con.execute(sql(statement).format(table=table, **names))
        yield
    finally:
        for table in tables:
            con.execute(f"drop table if exists temp.main.{table}")


def _matches_whole(con) -> int:
    """Recompute derived_exam_match and derived_audit_observation whole (the exam rules
    changed)."""
    with _transaction(con):
        _refill_matches(con)
    return con.execute("select count(distinct study_key) from derived_exam_match").fetchall()[0][0]


def _catalog(con) -> str:
    name = con.execute("select current_database()").fetchall()[0][0]
    return '"' + name.replace('"', '""') + '"'


def _incremental(con, keys: list[str], *, rules_changed: bool = False) -> int:
    """Recompute the derived rows of `keys` (and of studies sharing an event with them); the
    exam matches of those studies too, or of every study when the rules changed."""
    if not keys:
        return 0
    con.execute("create or replace temp table refresh_scope (study_key varchar)")
    con.register("incoming_refresh_scope", pa.table({"study_key": pa.array(keys, pa.string())}))
    try:
        con.execute("insert into refresh_scope select distinct study_key from incoming_refresh_scope")
    finally:
        con.unregister("incoming_refresh_scope")
    # The steps before the transaction each scan whole columns (the raw state's keys, the event
    # ids here, the derived tables' and raw tables' study_key below), under a bound on DuckDB's
    # memory (scan_bounded), so that the blocks they read are let go as they go: let go only
    # once before the transaction, they added up with the warehouse within each refresh (its
    # table blocks at most 4 MiB at 3.6k files, 67 MiB at 86k and 132 MiB at 120k of a
    # 100k-study run; bench/ingest_scale.py --duckdb-memory, measured, no other source).
    scan_bounded(con, sql("refresh_scope_expand"))
    ((n,),) = con.execute("select count(*) from refresh_scope").fetchall()
    catalog = _catalog(con)
    # The derived tables holding rows of the scope: each is scanned whole (its study_key column)
    # here, before the transaction, and only those are deleted from in it; nothing else writes
    # between. Inside the transaction the blocks such scans read added up with the warehouse
    # (the deletes' scans held 35 MiB at 100k studies; measured, no other source).
    held = {table for table in _scope_deletes(rules_changed)
            if scan_bounded(con, sql("refresh_scope_held").format(table=table))[0][0]}
    try:
        # the row ids of the scope's raw rows, found here for the same reason (a whole scan of
        # each raw table's study_key column), copied by row id in the transaction
        # (refresh_scope_rows.sql, refresh_shadow.sql)
        for table in _SCOPED_RAW:
            scan_bounded(con, sql("refresh_scope_rows").format(table=table, catalog=catalog))
        evict_cached_blocks(con)
        with _transaction(con):
            with _shadowed(con, _SCOPED_RAW, "refresh_shadow", catalog=catalog):
                for table, calc in DERIVED_TABLES:
                    _captured(con, table, calc, held)
            with _shadowed(con, _OBJECT_INPUTS, "refresh_shadow_captured"):
                for table, calc in OBJECT_TABLES:
                    _captured(con, table, calc, held)
            if rules_changed:
                _refill_matches(con)
            else:   # the scope's exam matches from its exam texts, then its audited values
                with _shadowed(con, ["derived_exam_text"], "refresh_shadow_captured"):
                    _captured(con, "derived_exam_match", "calc_exam_match", held)
                with _shadowed(con, _OBSERVATION_INPUTS, "refresh_shadow_captured"):
                    _captured(con, "derived_audit_observation", "calc_audit_observation", held)
            for table in _SKIN_TABLES:
                if table in held:
                    con.execute(sql("refresh_delete").format(table=table))
            # the scope's events and totals from the rows just recomputed, not by a join of the
            # whole derived tables (whose blocks DuckDB then kept: 17 MiB at 100k studies)
            with _shadowed(con, _OBJECT_INPUTS, "refresh_shadow_captured"):
                _skin(con, all_studies=False)
    finally:
        con.execute("drop table if exists temp.main.refresh_scope")
        for table in _SCOPED_RAW:
            con.execute(f"drop table if exists temp.main.refresh_rows_{table}")
        for table, _ in (*DERIVED_TABLES, *OBJECT_TABLES, *MATCH_TABLES):
            con.execute(f"drop table if exists temp.main.refresh_new_{table}")
    return n


def _scope_deletes(rules_changed: bool) -> tuple[str, ...]:
    """The derived tables an incremental refresh deletes the scope's rows from (with changed
    rules the exam matches and audited values are refilled whole instead)."""
    matches = () if rules_changed else tuple(table for table, _ in MATCH_TABLES)
    return (*(table for table, _ in (*DERIVED_TABLES, *OBJECT_TABLES)), *matches, *_SKIN_TABLES)


def _columns(con, relation: str) -> list[tuple[str, str]]:
    return [(r[0], r[1]) for r in con.execute(f"describe {relation}").fetchall()]


def _full(con) -> int:
    """Rebuild every derived table whole. A table whose columns still follow its definition is
    emptied and refilled; one whose definition changed is replaced, and the views over it are
    created again (they bind to its new columns)."""
    replaced = False
    try:
        with _transaction(con):
            for table, calc in (*DERIVED_TABLES, *OBJECT_TABLES, *MATCH_TABLES):
                if _columns(con, table) == _columns(con, calc):
                    con.execute(f"delete from {table}")
                    con.execute(sql("refresh_insert").format(table=table, calc=calc, order=_ordered(table)))
                else:
                    con.execute(sql("refresh_replace").format(table=table, calc=calc, order=_ordered(table)))
                    replaced = True
            for table in _SKIN_TABLES:
                con.execute(f"delete from {table}")
            con.execute("create or replace temp table refresh_scope (study_key varchar)")
            _skin(con, all_studies=True)
    finally:
        con.execute("drop table if exists temp.main.refresh_scope")
    if replaced:
        apply_all(con)   # views over the replaced tables bind to their current columns
    return con.execute("select count(*) from derived_study_total").fetchall()[0][0]


def _skin(con, *, all_studies: bool) -> None:
    """Peak skin dose of the scope's (or every) RF/XA study into derived_skin_dose*: the events
    are streamed in chunks of whole studies (memory does not grow with their number); the
    results, one row per study, are inserted once the stream is read (a DuckDB connection runs
    one statement at a time)."""
    reader = con.sql(sql("select_skin_model_events"),
                     params={"all_studies": all_studies}).to_arrow_reader(_SKIN_CHUNK_ROWS)
    out: dict[str, list[pa.Table]] = {"derived_skin_dose": [], "derived_skin_dose_factor": [],
                                      "derived_skin_dose_map": []}
    for studies, cells, factors in skin_rows_for(reader, MAP_FLOOR_MGY):
        out["derived_skin_dose"].append(studies)
        out["derived_skin_dose_factor"].append(factors)
        out["derived_skin_dose_map"].append(cells)
    for name, tables in out.items():
        if tables:
            con.register("incoming_skin", pa.concat_tables(tables))
            try:
                con.execute(f"insert into {name} by name select * from incoming_skin")
            finally:
                con.unregister("incoming_skin")


def skin_rows_for(batches, map_threshold_mgy: float | None):
    """Yield (studies, map cells, factors) Arrow tables of `pipeline.metrics.skin.skin_dose_rows`
    over record batches of skin-model events ordered by study x device (a study may span
    batches: its events are held back until it ends)."""
    from ..metrics.skin import skin_dose_rows

    carry: list[dict] = []
    batches = iter(batches)
    while True:
        batch = next(batches, None)
        rows = carry + (batch.to_pylist() if batch is not None else [])
        if batch is not None and rows:   # hold back the last study: it may go on
            last = (rows[-1]["study_key"], rows[-1]["device_key"])
            cut = len(rows)
            while cut and (rows[cut - 1]["study_key"], rows[cut - 1]["device_key"]) == last:
                cut -= 1
            rows, carry = rows[:cut], rows[cut:]
        else:
            carry = []
        if rows:
            factors: list[dict] = []
            studies, cells = skin_dose_rows(rows, map_threshold_mgy, factors)
            yield (pa.Table.from_pylist(studies, schema=_SKIN_SCHEMA),
                   pa.Table.from_pylist(cells, schema=_MAP_SCHEMA),
                   pa.Table.from_pylist(factors, schema=_FACTOR_SCHEMA))
        if batch is None:
            break
