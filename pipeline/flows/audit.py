"""Flow ``audit``: the audit tables of a period (ICRP 135 medians, alerts, drift)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from prefect import flow, task
from prefect.cache_policies import NO_CACHE

from ..audit import AuditSummary, period_bounds, run_audit
from .record import recorded_run
from .retry import is_transient

__all__ = ["audit_flow", "audit_period"]


@task(cache_policy=NO_CACHE, retries=2, retry_delay_seconds=[5, 30],
      retry_condition_fn=is_transient)   # retried only when the warehouse was busy or unreachable
def audit_period(warehouse: Path, period: str | None, date_from: dt.date | None,
                 date_to: dt.date | None, reference_sets: list[str] | None,
                 config: Path | None) -> AuditSummary:
    """One call of :func:`pipeline.audit.run_audit`."""
    return run_audit(warehouse, period=period, date_from=date_from, date_to=date_to,
                     reference_sets=reference_sets, config=config)


@flow(name="audit")
def audit_flow(warehouse: Path, period: str | None = None, date_from: dt.date | None = None,
               date_to: dt.date | None = None, reference_sets: list[str] | None = None,
               config: Path | None = None) -> AuditSummary:
    """Audit `period` (YYYY-MM) or `date_from`..`date_to`; recorded in ``pipeline_run``."""
    label = period_bounds(period, date_from, date_to)[2]
    with recorded_run(warehouse, "audit", label) as end:
        summary = audit_period(warehouse, period, date_from, date_to, reference_sets, config)
        end.reference_sets = list(summary.reference_sets)
    return summary
