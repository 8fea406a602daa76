"""`kerma dashboard`: audit the period, then write the site (the command the issue names)."""

from __future__ import annotations

import shutil

from typer.testing import CliRunner

from pipeline.cli import app


def test_kerma_dashboard_audits_and_writes_the_site(warehouse, tmp_path):
    db, _ = warehouse
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(db, copy)
    out = tmp_path / "site"
    result = CliRunner().invoke(app, ["dashboard", "--warehouse", str(copy), "--from", "2026-09-01",
                                      "--to", "2026-11-30", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert f"Dashboards written: {out / 'index.html'}" in " ".join(result.output.split())
    assert (out / "plotly.min.js").exists() and (out / "sites.html").exists()
    assert "01 Sep 2026 to 30 Nov 2026" in (out / "index.html").read_text(encoding="utf-8")


def test_kerma_dashboard_single_month(warehouse, tmp_path):
    db, _ = warehouse
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(db, copy)
    result = CliRunner().invoke(app, ["dashboard", "--warehouse", str(copy), "--period", "2026-10",
                                      "--out", str(tmp_path / "site")])
    assert result.exit_code == 0, result.output
    index = (tmp_path / "site" / "index.html").read_text(encoding="utf-8")
    assert "2026-10 (01 Oct 2026 to 31 Oct 2026)" in index
    assert "<h1>Monthly dose audit: overview</h1>" in index      # one calendar month


def test_kerma_dashboard_bad_period_exits_2_with_a_message(warehouse, tmp_path):
    db, _ = warehouse
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(db, copy)
    result = CliRunner().invoke(app, ["dashboard", "--warehouse", str(copy), "--period", "Oct 2026",
                                      "--out", str(tmp_path / "site")])
    assert result.exit_code == 2 and "--period must be YYYY-MM" in result.output
    assert not (tmp_path / "site").exists()


def test_kerma_dashboard_does_not_re_run_a_current_audit(warehouse, tmp_path, monkeypatch):
    """Issue 14: a second `kerma dashboard` of the same period, with nothing changed, writes the
    site from the audit already there (pipeline.audit.audit_is_current) without re-running it."""
    import pipeline.audit

    db, _ = warehouse
    copy = tmp_path / "kerma.duckdb"
    shutil.copyfile(db, copy)
    args = ["dashboard", "--warehouse", str(copy), "--from", "2026-09-01", "--to", "2026-11-30"]
    first = CliRunner().invoke(app, [*args, "--out", str(tmp_path / "one")])
    assert first.exit_code == 0, first.output

    def no_audit(*_args, **_kwargs):
        raise AssertionError("the audit was re-run although it is current")

    monkeypatch.setattr(pipeline.audit, "run_audit", no_audit)
    second = CliRunner().invoke(app, [*args, "--out", str(tmp_path / "two")])
    assert second.exit_code == 0, second.output
    assert "The audit of this period is current" in " ".join(second.output.split())
    assert (tmp_path / "two" / "index.html").exists()
