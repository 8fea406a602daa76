"""Flow ``monthly``: ingest the inbox, audit the month, publish; optionally parsing on Dask."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path

from prefect import flow

from ..audit import AuditSummary, period_bounds
from ..ingest import IngestSummary
from .audit import audit_flow
from .ingest import ingest_flow
from .publish import publish_flow
from .record import recorded_run

__all__ = ["MonthlyResult", "dask_task_runner", "monthly_deployment", "monthly_flow",
           "previous_month", "run_monthly"]


@dataclass(frozen=True)
class MonthlyResult:
    """What the monthly run did."""

    period: str
    ingest: IngestSummary
    audit: AuditSummary
    site_index: Path


def previous_month(today: dt.date) -> str:
    """YYYY-MM of the calendar month before `today` (what a run on the 1st audits)."""
    last = today.replace(day=1) - dt.timedelta(days=1)
    return f"{last:%Y-%m}"


def dask_task_runner(workers: int | None = None, address: str | None = None):
    """A prefect-dask task runner: a new ``distributed.LocalCluster`` of `workers` worker
    processes (one thread each), or the existing cluster at `address`; None when neither."""
    if workers is None and address is None:
        return None
    if workers is not None and address is not None:
        raise ValueError("give a number of Dask workers or a cluster address, not both")
    from prefect_dask import DaskTaskRunner

    if address is not None:
        return DaskTaskRunner(address=address)
    return DaskTaskRunner(cluster_class="distributed.LocalCluster",
                          cluster_kwargs={"n_workers": workers, "threads_per_worker": 1,
                                          "processes": True, "dashboard_address": None})


@flow(name="monthly")
def monthly_flow(warehouse: Path, inbox: Path, out: Path, period: str | None = None,
                 date_from: dt.date | None = None, date_to: dt.date | None = None,
                 key_file: Path | None = None, config: Path | None = None,
                 reference_sets: list[str] | None = None, workers: int = 1,
                 dask_workers: int | None = None, dask_address: str | None = None,
                 new_key_epoch: bool = False) -> MonthlyResult:
    """Ingest `inbox`, audit the period, write the dashboards to `out`.

    The period is `period` (YYYY-MM), else `date_from`..`date_to`, else the calendar month
    before today (a scheduled run on the 1st audits the month that just ended). With
    `dask_workers` or `dask_address` the parse step runs on a Dask cluster (prefect-dask).
    """
    if period is None and date_from is None and date_to is None:
        period = previous_month(dt.date.today())
    label = period_bounds(period, date_from, date_to)[2]
    with recorded_run(warehouse, "monthly", label, create=True) as end:
        runner = dask_task_runner(dask_workers, dask_address)
        ingest = ingest_flow if runner is None else ingest_flow.with_options(task_runner=runner)
        ingested = ingest([inbox], warehouse, key_file=key_file, config=config, workers=workers,
                          parse_on_task_runner=runner is not None, new_key_epoch=new_key_epoch)
        end.ingest_run_ids = [ingested.run_id]
        end.n_files_loaded = ingested.by_status["loaded"]
        end.n_files_quarantined = ingested.by_status["quarantined"]
        audited = audit_flow(warehouse, period, date_from, date_to, reference_sets, config)
        end.reference_sets = list(audited.reference_sets)
        index = publish_flow(warehouse, out, label)
        end.detail = str(index)
    return MonthlyResult(label, ingested, audited, index)


def run_monthly(**parameters) -> MonthlyResult:
    """Run the monthly flow once, here (Prefect's local mode unless PREFECT_API_URL is set).

    In local mode with Dask, the temporary Prefect server is started first and its URL handed
    to the flow's settings: Dask workers then report their task runs to it, instead of each
    worker process starting a temporary server of its own on the same database.
    """
    from prefect.settings import PREFECT_API_URL

    uses_dask = parameters.get("dask_workers") is not None or parameters.get("dask_address")
    if not uses_dask or PREFECT_API_URL.value():
        return monthly_flow(**parameters)
    from prefect.server.api.server import SubprocessASGIServer
    from prefect.settings import temporary_settings

    server = SubprocessASGIServer()   # the same instance Prefect's local mode uses
    server.start()
    with temporary_settings(updates={PREFECT_API_URL: server.api_url}):
        return monthly_flow(**parameters)


def monthly_deployment(name: str, cron: str, parameters: dict):
    """The monthly flow as a Prefect deployment on the cron schedule `cron` (for ``serve``)."""
    return monthly_flow.to_deployment(name=name, cron=cron, parameters=parameters,
                                      description="Kerma Ledger monthly dose audit")
