"""Write batches into DuckDB: register Arrow tables, run queries/load/*.sql, one transaction."""

from __future__ import annotations

import duckdb
import pyarrow as pa
import pyarrow.compute as pc

from queries import apply_all, sql

from .derived import refresh_derived
from .tables import GRAIN

__all__ = ["GRAIN", "LOAD_ORDER", "append_batch", "ensure_schema", "replace_exam_rules", "replace_site_map"]

LOAD_ORDER = ("source_object", "dose_object", "device", "study", "ct_event", "projection_event",
              "accumulated", "value_issue")


def ensure_schema(con: duckdb.DuckDBPyConnection) -> list[str]:
    """Create the tables and views if missing (idempotent), and bring the derived tables the
    public views read up to date (a no-op when they are; a whole rebuild for a warehouse
    written by an earlier version, so no reader ever sees them empty)."""
    names = apply_all(con)
    refresh_derived(con)
    return names


def append_batch(con: duckdb.DuckDBPyConnection, tables: dict[str, pa.Table]) -> dict[str, int]:
    """Insert every table of one batch, then record total mismatches, in ONE transaction.

    A crash mid-batch leaves nothing of the batch behind, so a rerun redoes it cleanly.

    The batch's reports must be new to the warehouse, as the ingest makes sure (a SOP Instance
    already loaded is a duplicate, not loaded again): the tables of GRAIN have no primary key,
    so the batch's rows of each are cut here to the first of each key, and the total check reads
    the batch's rows only, not the raw tables whole (a scan per batch that grew with the
    warehouse), which are then the rows inserted.
    """
    counts: dict[str, int] = {}
    tables = {name: _first_per_key(t, list(GRAIN[name])) if name in GRAIN else t
              for name, t in tables.items()}
    con.execute("begin transaction")
    try:
        for name in LOAD_ORDER:
            table = tables[name]
            con.register(f"incoming_{name}", table)
        try:
            for name in LOAD_ORDER:
                con.execute(sql(f"insert_{name}"))
                counts[name] = tables[name].num_rows
            con.execute(sql("insert_total_mismatch_issues"))
        finally:
            for name in LOAD_ORDER:
                con.unregister(f"incoming_{name}")
        con.execute("commit")
    except BaseException:
        con.execute("rollback")
        raise
    return counts


def _first_per_key(table: pa.Table, keys: list[str]) -> pa.Table:
    """`table` with only the first row of each value of `keys` (unchanged when they are unique)."""
    if not keys or table.num_rows < 2:
        return table
    row_index = pa.array(range(table.num_rows), pa.int64())
    first = (table.select(keys).append_column("row_index", row_index)
             .group_by(keys, use_threads=False).aggregate([("row_index", "min")]))
    if first.num_rows == table.num_rows:
        return table
    rows = first["row_index_min"]
    return table.take(pc.take(rows, pc.sort_indices(rows)))


def replace_site_map(con: duckdb.DuckDBPyConnection, sites: dict[str, str]) -> None:
    table = pa.table({"match_value": list(sites), "site": list(sites.values())},
                     schema=pa.schema([("match_value", pa.string()), ("site", pa.string())]))
    con.register("incoming_site_map", table)
    try:
        con.execute("begin transaction")
        con.execute(sql("delete_site_map"))
        con.execute(sql("insert_site_map"))
        con.execute("commit")
    finally:
        con.unregister("incoming_site_map")


def replace_exam_rules(con: duckdb.DuckDBPyConnection, rows: list[dict]) -> None:
    """Put the exam rules in force into raw_exam_rule (one transaction), then bring the derived
    tables up to date: the exam matches are recomputed when the rules differ from those they
    were computed with (pipeline/warehouse/derived.py)."""
    schema = pa.schema([("rule_id", pa.int64()), ("exam_type", pa.string()), ("field", pa.string()),
                        ("field_priority", pa.int64()), ("modality", pa.string()),
                        ("kind", pa.string()), ("phrase", pa.string()), ("source", pa.string())])
    con.register("incoming_exam_rule", pa.Table.from_pylist(rows, schema=schema))
    try:
        con.execute("begin transaction")
        con.execute(sql("delete_exam_rules"))
        con.execute(sql("insert_exam_rules"))
        con.execute("commit")
    finally:
        con.unregister("incoming_exam_rule")
    refresh_derived(con)
