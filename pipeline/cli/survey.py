"""``kerma survey``: per exam type, the per-room figures national dose surveys ask for (CSV)."""

from __future__ import annotations

from pathlib import Path

import typer

from .app import app, console, fail, parse_day

__all__ = ["survey_command"]


@app.command("survey")
def survey_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    out: Path = typer.Option(..., "--out", help="Folder for one CSV per exam type."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id(s), as for `kerma audit`."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Audit the period, then write one CSV per exam type: per room n, median and mean of each
    reference quantity, median age, weight and kVp, and the reference set compared."""
    from ..audit import load_audit_settings, period_bounds, run_audit
    from ..config import DEFAULT_CONFIG
    from ..errors import ConfigError, WarehouseError
    from ..survey import write_survey

    try:
        d_from, d_to = parse_day(date_from, "--from"), parse_day(date_to, "--to")
        first, after, _ = period_bounds(period, d_from, d_to)
        if not Path(warehouse).exists():
            raise WarehouseError(f"no warehouse at {warehouse}: run `kerma ingest` first")
        settings = load_audit_settings(config or DEFAULT_CONFIG)
        run_audit(warehouse, period=period, date_from=d_from, date_to=d_to,
                  reference_sets=reference or None, settings=settings)
        written = write_survey(warehouse, out, first=first, after=after,
                               adult_min_age=settings.adult_min_age_years)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"Survey extract: {len(written)} files in {out}")
