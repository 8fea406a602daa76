"""What the warehouse already holds, and the record of flow runs (table raw_pipeline_run)."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import duckdb
import pyarrow as pa

from queries import sql

__all__ = ["PIPELINE_RUN_SCHEMA", "PipelineRunEnd", "finish_pipeline_run", "recorded_files",
           "recorded_sop_instance_uids", "start_pipeline_run"]

PIPELINE_RUN_SCHEMA = pa.schema([
    ("run_id", pa.string()), ("parent_run_id", pa.string()), ("flow", pa.string()),
    ("period", pa.string()), ("started_at", pa.timestamp("us")),
    ("finished_at", pa.timestamp("us")), ("state", pa.string()),
    ("ingest_run_ids", pa.string()), ("n_files_loaded", pa.int64()),
    ("n_files_quarantined", pa.int64()), ("reference_sets", pa.string()), ("detail", pa.string())])


def recorded_files(con: duckdb.DuckDBPyConnection, paths: list[str]) -> set[tuple[str, str]]:
    """(path, sha256) of those of `paths` that ``source_object`` records."""
    con.register("incoming_paths", pa.table({"path": pa.array(paths, pa.string())}))
    try:
        return {(p, s) for p, s in con.execute(sql("select_known_files")).fetchall()}
    finally:
        con.unregister("incoming_paths")


def recorded_sop_instance_uids(con: duckdb.DuckDBPyConnection) -> set[str]:
    """SOP Instance UIDs of every file the warehouse has recorded (any status)."""
    return {r[0] for r in con.execute(sql("select_recorded_sops")).fetchall()}


def start_pipeline_run(con: duckdb.DuckDBPyConnection, *, run_id: str, flow: str,
                       period: str | None, started_at: dt.datetime,
                       parent_run_id: str | None = None) -> None:
    """Record that flow run `run_id` started (state RUNNING)."""
    row = {"run_id": run_id, "parent_run_id": parent_run_id, "flow": flow, "period": period,
           "started_at": started_at, "state": "RUNNING"}
    con.register("incoming_pipeline_run", pa.Table.from_pylist([row], schema=PIPELINE_RUN_SCHEMA))
    try:
        con.execute(sql("insert_pipeline_run"))
    finally:
        con.unregister("incoming_pipeline_run")


@dataclass(slots=True)
class PipelineRunEnd:
    """How a flow run ended: its state and what it did (filled in by the flow)."""

    state: str = "COMPLETED"
    ingest_run_ids: list[str] | None = None
    n_files_loaded: int | None = None
    n_files_quarantined: int | None = None
    reference_sets: list[str] | None = None
    detail: str | None = None


def finish_pipeline_run(con: duckdb.DuckDBPyConnection, run_id: str, end: PipelineRunEnd,
                        finished_at: dt.datetime) -> None:
    """Record the end of flow run `run_id`."""
    con.execute(sql("finish_pipeline_run"), {
        "run_id": run_id, "finished_at": finished_at, "state": end.state,
        "ingest_run_ids": "; ".join(end.ingest_run_ids) if end.ingest_run_ids else None,
        "n_files_loaded": end.n_files_loaded, "n_files_quarantined": end.n_files_quarantined,
        "reference_sets": "; ".join(end.reference_sets) if end.reference_sets is not None else None,
        "detail": end.detail})
