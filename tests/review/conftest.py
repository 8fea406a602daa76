"""Fixtures: the session warehouse (320 studies) copied and audited month by month."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest


@pytest.fixture(scope="module")
def monthly(warehouse, tmp_path_factory) -> Path:
    """A copy of the session warehouse audited for 2026-10, then for 2026-11 (left current)."""
    from pipeline.audit import run_audit

    db, _ = warehouse
    copy = tmp_path_factory.mktemp("monthly") / "kerma.duckdb"
    shutil.copyfile(db, copy)
    run_audit(copy, period="2026-10")
    run_audit(copy, period="2026-11")
    return copy
