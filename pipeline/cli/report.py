"""``kerma report``: the committee report of a period (PDF or HTML)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import typer

from .app import app, console, fail, parse_day

__all__ = ["report_command"]


@app.command("report")
def report_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    out: Path = typer.Option(..., "--out", help="The report file to write (report.pdf)."),
    fmt: str = typer.Option("pdf", "--format", help="pdf or html."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id(s), as for `kerma audit`."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Audit the period and the previous one of the same length, then write the committee report.

    Page 1 is the executive summary: patients needing follow-up, then protocol reviews, then
    statistical findings; new / persisting / resolved since the previous period; coverage per
    modality; the cautions. Detail sections follow.
    """
    from ..audit import audit_is_current, period_bounds, previous_period, run_audit
    from ..config import DEFAULT_CONFIG
    from ..errors import ConfigError, WarehouseError
    from ..report import write_report

    if fmt not in ("pdf", "html"):
        fail(f"--format must be pdf or html, not {fmt!r}")
    try:
        d_from, d_to = parse_day(date_from, "--from"), parse_day(date_to, "--to")
        first, after, _ = period_bounds(period, d_from, d_to)
        if not Path(warehouse).exists():
            raise WarehouseError(f"no warehouse at {warehouse}: run `kerma ingest` first")
        prev_first, prev_after = previous_period(first, after)
        settings = {"reference_sets": reference or None, "config": config or DEFAULT_CONFIG}
        previous = {"date_from": prev_first, "date_to": prev_after - dt.timedelta(days=1)}
        current = {"period": period, "date_from": d_from, "date_to": d_to}
        # an audit whose inputs have not changed since is not re-run (pipeline.audit.audit_is_current);
        # auditing the previous period replaces the audit tables, so the current one follows it
        previous_current = audit_is_current(warehouse, **previous, **settings, holds_tables=False)
        if not previous_current:
            try:
                run_audit(warehouse, **previous, **settings)
            except ConfigError as exc:   # e.g. no reference set in force then: compare nothing
                console.print(f"[yellow]previous period not audited:[/yellow] {exc}")
        if not previous_current or not audit_is_current(warehouse, **current, **settings):
            run_audit(warehouse, **current, **settings)
        else:
            console.print("The audits of this period and the previous one are current: not re-run.")
        written = write_report(warehouse, out, fmt=fmt)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"Report written: {written}")
