"""Prefect flows: the application layer that runs ingest, audit and publish on a schedule.

Tasks wrap the plain functions of the core; only transient I/O is retried. Nothing in
``pipeline``'s core, ``dashboards`` or ``synthetic_studies`` imports this package.
"""

from __future__ import annotations

from .audit import audit_flow
from .ingest import ingest_flow
from .monthly import MonthlyResult, dask_task_runner, monthly_deployment, monthly_flow, run_monthly
from .publish import publish_flow

__all__ = ["MonthlyResult", "audit_flow", "dask_task_runner", "ingest_flow", "monthly_deployment",
           "monthly_flow", "publish_flow", "run_monthly"]
