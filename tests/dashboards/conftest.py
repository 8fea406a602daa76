"""Fixtures: the session corpus's warehouse, audited on a copy, and the site written from it
(each built once per run, shared by the pytest-xdist workers: tests.helpers.built_once)."""

from __future__ import annotations

import datetime as dt
import shutil
from pathlib import Path

import pytest

from tests.helpers import built_once

GENERATED_AT = dt.datetime(2026, 12, 1, 8, 30, tzinfo=dt.UTC)
PERIOD_FROM, PERIOD_TO = dt.date(2026, 9, 1), dt.date(2026, 11, 30)


@pytest.fixture(scope="session")
def audited(warehouse, tmp_path_factory) -> Path:
    """A copy of the session warehouse (320 studies), audited for Sep-Nov 2026."""
    from pipeline.audit import run_audit

    def build(root: Path) -> Path:
        copy = root / "kerma.duckdb"
        shutil.copyfile(warehouse[0], copy)
        run_audit(copy, date_from=PERIOD_FROM, date_to=PERIOD_TO)
        return copy

    return built_once(tmp_path_factory, "dashboards-audited", build)


@pytest.fixture(scope="session")
def site(audited, tmp_path_factory) -> Path:
    """The static site of the audited warehouse, generated at a fixed time."""
    from dashboards.site import write_site

    def build(out: Path) -> Path:
        index = write_site(audited, out, generated_at=GENERATED_AT)
        assert index == out / "index.html"
        return out

    return built_once(tmp_path_factory, "site", build)


@pytest.fixture(scope="session")
def marts(audited):
    """(SiteData, period label, first day, last day, reference sets) read from the warehouse."""
    from dashboards.site import read_site_data
    from pipeline.warehouse.connection import connection

    with connection(audited, read_only=True) as con:
        return read_site_data(con)
