"""Flow ``publish``: the static dashboards of the last audit and, beside them, the committee
report (``report.pdf``)."""

from __future__ import annotations

from pathlib import Path

from prefect import flow, task
from prefect.cache_policies import NO_CACHE

from dashboards.site import write_site

from .record import recorded_run
from .retry import is_transient

__all__ = ["REPORT_NAME", "publish_flow", "write_committee_report", "write_dashboards"]

REPORT_NAME = "report.pdf"


@task(cache_policy=NO_CACHE, retries=2, retry_delay_seconds=[5, 30],
      retry_condition_fn=is_transient)   # the output folder may sit on a share that blinks
def write_dashboards(warehouse: Path, out: Path) -> Path:
    """One call of :func:`dashboards.site.write_site`; returns the index page."""
    return write_site(warehouse, out)


@task(cache_policy=NO_CACHE, retries=2, retry_delay_seconds=[5, 30],
      retry_condition_fn=is_transient)
def write_committee_report(warehouse: Path, out: Path) -> Path:
    """One call of :func:`pipeline.report.write_report`: ``out/report.pdf``."""
    from ..report import write_report

    return write_report(warehouse, Path(out) / REPORT_NAME)


@flow(name="publish")
def publish_flow(warehouse: Path, out: Path, period: str | None = None) -> Path:
    """Write the dashboards of the audited `warehouse` into `out`, and the committee report
    beside them; recorded in ``pipeline_run``."""
    with recorded_run(warehouse, "publish", period) as end:
        index = write_dashboards(warehouse, out)
        write_committee_report(warehouse, out)
        end.detail = str(index)
    return index
