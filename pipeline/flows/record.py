"""Record each flow run in the warehouse (public view ``pipeline_run``)."""

from __future__ import annotations

import contextlib
import datetime as dt
import uuid
from collections.abc import Iterator
from pathlib import Path

from ..errors import WarehouseError
from ..warehouse.connection import connection
from ..warehouse.load import ensure_schema
from ..warehouse.records import PipelineRunEnd, finish_pipeline_run, start_pipeline_run

__all__ = ["current_run_ids", "recorded_run"]


def current_run_ids() -> tuple[str, str | None]:
    """(this flow run's id, its parent flow run's id) from Prefect's runtime, else a fresh uuid."""
    from prefect.runtime import flow_run

    run_id = flow_run.get_id() or uuid.uuid4().hex
    parent = flow_run.get_parent_flow_run_id()
    return str(run_id), str(parent) if parent else None


@contextlib.contextmanager
def recorded_run(warehouse: Path, flow: str, period: str | None, *,
                 create: bool = False) -> Iterator[PipelineRunEnd]:
    """Insert a RUNNING row, yield the end record for the flow to fill, then write its end.

    An exception marks the run FAILED with the first line of its message, and propagates.
    Only the flows that load data pass ``create=True``; for the others a missing warehouse
    is a WarehouseError ("does not exist") before anything runs.
    """
    run_id, parent = current_run_ids()
    with connection(warehouse, create=create) as con:
        ensure_schema(con)
        start_pipeline_run(con, run_id=run_id, flow=flow, period=period,
                           started_at=dt.datetime.now(), parent_run_id=parent)
    end = PipelineRunEnd()
    try:
        yield end
    except BaseException as exc:
        end.state = "FAILED"
        end.detail = (str(exc).splitlines() or [type(exc).__name__])[0][:500]
        try:
            with connection(warehouse) as con:
                finish_pipeline_run(con, run_id, end, dt.datetime.now())
        except WarehouseError:
            pass   # the warehouse itself failed: the flow's own error, raised next, says so
        raise
    with connection(warehouse) as con:
        finish_pipeline_run(con, run_id, end, dt.datetime.now())
