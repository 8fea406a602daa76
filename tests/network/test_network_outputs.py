"""The dashboards and the committee report are written from a network warehouse made by merge
(audited over the three months by the fixture) by the same code as from a site warehouse."""

from __future__ import annotations

import shutil

from dashboards.site import write_site
from pipeline.report import write_report
from tests.network.conftest import SITES


def test_dashboards_and_report_are_written_from_the_network_warehouse(network, tmp_path):
    db = tmp_path / "network.duckdb"
    shutil.copy(network, db)   # writers may add their own tables; the shared fixture stays as is
    index = write_site(db, tmp_path / "site")
    assert index.exists()
    pages = "".join(p.read_text(encoding="utf-8") for p in (tmp_path / "site").glob("*.html"))
    assert all(name in pages for name in SITES.values())       # the site comparison
    report = write_report(db, tmp_path / "report.html", fmt="html").read_text(encoding="utf-8")
    assert "investigation level" in report and any(n in report for n in SITES.values())
