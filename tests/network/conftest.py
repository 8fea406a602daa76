"""The combined warehouse (session corpus, four invented sites, test key), one extract per site
made from it with the shared key, and the network warehouse they merge into; both audited."""

from __future__ import annotations

import datetime as dt
import shutil
from pathlib import Path

import pytest

from pipeline.audit import run_audit
from pipeline.network import KeyScope
from pipeline.network_store import export_site, merge_extracts
from tests.helpers import KEY

FIRST, LAST = dt.date(2026, 9, 1), dt.date(2026, 11, 30)
SITES = {"CIC": "Cobbleford Imaging Centre", "MPH": "Marram Point Hospital",
         "OVH": "Oxlade Vale Hospital", "TGH": "Tarnwick General Hospital"}


@pytest.fixture(scope="package")
def combined(warehouse, tmp_path_factory) -> Path:
    """A copy of the session warehouse (all four sites), audited over the three months."""
    db = tmp_path_factory.mktemp("combined") / "kerma.duckdb"
    shutil.copy(warehouse[0], db)
    return db


@pytest.fixture(scope="package")
def extracts(combined, tmp_path_factory) -> dict[str, Path]:
    """One extract per site over the three months, made with the shared key."""
    root = tmp_path_factory.mktemp("extracts")
    return {code: export_site(combined, root / code, site=name, date_from=FIRST, date_to=LAST,
                              key=KEY, key_scope=KeyScope.NETWORK).out_dir
            for code, name in SITES.items()}


@pytest.fixture(scope="package")
def network(combined, extracts, tmp_path_factory) -> Path:
    """The four extracts merged into a network warehouse; both warehouses then audited."""
    db = tmp_path_factory.mktemp("network") / "network.duckdb"
    summary = merge_extracts(list(extracts.values()), db)
    assert len(summary.merged) == 4 and summary.unchanged == []
    run_audit(combined, date_from=FIRST, date_to=LAST)
    run_audit(db, date_from=FIRST, date_to=LAST)
    return db


