"""`kerma dashboard` and `kerma report` run unchanged on a network warehouse made by merge."""

from __future__ import annotations

import shutil

from typer.testing import CliRunner

from pipeline.cli import app
from tests.network.conftest import SITES


def test_dashboard_and_report_run_on_the_network_warehouse(network, tmp_path):
    db = tmp_path / "network.duckdb"
    shutil.copy(network, db)   # the audit they run replaces the shared fixture's audit tables
    result = CliRunner().invoke(app, ["dashboard", "--warehouse", str(db), "--period", "2026-11",
                                      "--out", str(tmp_path / "site")])
    assert result.exit_code == 0, result.output
    pages = "".join(p.read_text(encoding="utf-8") for p in (tmp_path / "site").glob("*.html"))
    assert all(name in pages for name in SITES.values())       # the site comparison
    result = CliRunner().invoke(app, ["report", "--warehouse", str(db), "--period", "2026-11",
                                      "--out", str(tmp_path / "report.html"), "--format", "html"])
    assert result.exit_code == 0, result.output
    report = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert "investigation level" in report and any(n in report for n in SITES.values())
