"""Fixtures: the session corpus's warehouse, audited on a copy, and the site written from it."""

from __future__ import annotations

import datetime as dt
import shutil
from pathlib import Path

import pytest

GENERATED_AT = dt.datetime(2026, 12, 1, 8, 30, tzinfo=dt.UTC)
PERIOD_FROM, PERIOD_TO = dt.date(2026, 9, 1), dt.date(2026, 11, 30)


@pytest.fixture(scope="session")
def audited(warehouse, tmp_path_factory) -> Path:
    """A copy of the session warehouse (320 studies), audited for Sep-Nov 2026."""
    from pipeline.audit import run_audit

    db, _ = warehouse
    copy = tmp_path_factory.mktemp("audited") / "kerma.duckdb"
    shutil.copyfile(db, copy)
    run_audit(copy, date_from=PERIOD_FROM, date_to=PERIOD_TO)
    return copy


@pytest.fixture(scope="session")
def site(audited, tmp_path_factory) -> Path:
    """The static site of the audited warehouse, generated at a fixed time."""
    from dashboards.site import write_site

    out = tmp_path_factory.mktemp("site")
    index = write_site(audited, out, generated_at=GENERATED_AT)
    assert index == out / "index.html"
    return out


@pytest.fixture(scope="session")
def marts(audited):
    """(SiteData, period label, first day, last day, reference sets) read from the warehouse."""
    from dashboards.site import read_site_data
    from pipeline.warehouse.connection import connection

    with connection(audited, read_only=True) as con:
        return read_site_data(con)
