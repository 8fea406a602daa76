"""``kerma sql``: an ad hoc read-only question to the warehouse."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.table import Table

from .app import app, console, fail

__all__ = ["sql_command"]


@app.command("sql")
def sql_command(
    query: str = typer.Argument(..., help="One SQL statement (read-only)."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    limit: int = typer.Option(50, help="Rows to print at most."),
) -> None:
    """Ask the warehouse an ad hoc question (read-only connection)."""
    import duckdb

    from ..errors import WarehouseError
    from ..warehouse.connection import connection

    try:
        with connection(warehouse, read_only=True) as con:
            try:
                cursor = con.execute(query)
            except duckdb.Error as exc:
                fail(str(exc).splitlines()[0])
            columns = [d[0] for d in cursor.description or []]
            rows = cursor.fetchmany(limit + 1)
    except WarehouseError as exc:
        fail(str(exc))
    table = Table(*columns)
    for row in rows[:limit]:
        table.add_row(*("" if v is None else f"{v:.6g}" if isinstance(v, float) else str(v) for v in row))
    console.print(table)
    if len(rows) > limit:
        console.print(f"(first {limit} rows shown)")
