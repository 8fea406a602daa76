"""The ``kerma`` Typer application and the helpers its command modules share."""

from __future__ import annotations

import datetime as dt
import os
from typing import NoReturn

import typer
from rich.console import Console
from rich.table import Table

__all__ = ["app", "console", "fail", "parse_day", "rows_table"]

# Prefect's local server gets 20 s to start by default; on a busy shared machine (a test run
# beside other work) that is not always enough, and a run would fail before doing anything.
os.environ.setdefault("PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS", "120")
# An offline tool sends no usage telemetry; Prefect's local server otherwise runs a heartbeat
# service whose writes could collide with the flow's on its SQLite database ("database is
# locked" tracebacks in the demo's output).
os.environ.setdefault("PREFECT_SERVER_ANALYTICS_ENABLED", "false")

app = typer.Typer(
    name="kerma",
    help="Kerma Ledger: patient radiation dose audit from DICOM dose reports.",
    no_args_is_help=True,
    add_completion=False,
)
console = Console(width=None if Console().is_terminal else 110)


def fail(message: str) -> NoReturn:
    """Print one red line and leave with exit code 2 (a fatal problem the user can fix)."""
    console.print(f"[red]error:[/red] {message}", soft_wrap=True)
    raise typer.Exit(code=2)


def parse_day(text: str | None, option: str) -> dt.date | None:
    """YYYY-MM-DD of option `option`, or exit 2 naming it."""
    if text is None:
        return None
    try:
        return dt.date.fromisoformat(text)
    except ValueError as exc:
        fail(f"{option} must be YYYY-MM-DD ({exc})")


def rows_table(title: str, frame, floats: str = "{:.4g}") -> Table:
    """A rich table of a DataFrame (NaN and None shown empty)."""
    table = Table(title=title)
    for column in frame.columns:
        table.add_column(str(column))
    for row in frame.itertuples(index=False):
        table.add_row(*("" if v is None or v != v else floats.format(v) if isinstance(v, float)
                        else str(v) for v in row))
    return table

