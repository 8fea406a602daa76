"""Flow ``publish``: the static dashboards of the last audit (and, later, the committee report)."""

from __future__ import annotations

from pathlib import Path

from prefect import flow, task
from prefect.cache_policies import NO_CACHE

from dashboards.site import write_site

from .record import recorded_run
from .retry import is_transient

__all__ = ["publish_flow", "write_dashboards"]


@task(cache_policy=NO_CACHE, retries=2, retry_delay_seconds=[5, 30],
      retry_condition_fn=is_transient)   # the output folder may sit on a share that blinks
def write_dashboards(warehouse: Path, out: Path) -> Path:
    """One call of :func:`dashboards.site.write_site`; returns the index page."""
    return write_site(warehouse, out)


@flow(name="publish")
def publish_flow(warehouse: Path, out: Path, period: str | None = None) -> Path:
    """Write the dashboards of the audited `warehouse` into `out`; recorded in ``pipeline_run``."""
    with recorded_run(warehouse, "publish", period) as end:
        index = write_dashboards(warehouse, out)
        end.detail = str(index)
    return index
