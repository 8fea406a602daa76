"""``kerma reference``: reference-level sets (national, local, derived)."""

from __future__ import annotations

from pathlib import Path

import typer

from .app import app, console, fail, rows_table

__all__ = ["reference_app", "reference_derive", "reference_import", "reference_list"]

reference_app = typer.Typer(help="Reference-level sets (national, local, derived).", no_args_is_help=True)
app.add_typer(reference_app, name="reference")


@reference_app.command("list")
def reference_list(warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file.")) -> None:
    """Show the reference-level sets in the warehouse: body, country, validity, verification."""
    from queries import sql

    from ..errors import WarehouseError
    from ..reference_store import install_reference_sets
    from ..warehouse.connection import connection
    from ..warehouse.load import ensure_schema

    try:
        with connection(warehouse) as con:
            ensure_schema(con)
            install_reference_sets(con)
            frame = con.execute(sql("describe_reference_sets")).df()
    except WarehouseError as exc:
        fail(str(exc))
    console.print(rows_table("Reference-level sets", frame))


@reference_app.command("import")
def reference_import(
    file: Path = typer.Argument(..., help="CSV in the shipped format (see queries/seeds/reference_levels)."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
) -> None:
    """Add or replace a national or local reference-level set from a CSV file."""
    from ..errors import ConfigError, WarehouseError
    from ..reference_store import import_reference_csv
    from ..warehouse.connection import connection
    from ..warehouse.load import ensure_schema

    try:
        with connection(warehouse) as con:
            ensure_schema(con)
            set_id, n = import_reference_csv(con, file)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"Imported reference set {set_id!r}: {n} values. Use it with "
                  f"`kerma audit --reference {set_id}`.")


@reference_app.command("derive")
def reference_derive(
    set_id: str = typer.Argument(..., help="Name of the new local set, e.g. local_2026q4."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    allow_few_rooms: bool = typer.Option(False, "--allow-few-rooms", help="Save values from fewer than min_rooms_local_drl rooms (labelled; not a local DRL per ICRP 135)."),
) -> None:
    """Save the network's 75th percentile of room medians (ICRP 135) from the last audit as a set."""
    from ..errors import ConfigError, WarehouseError
    from ..reference_store import derive_local_set
    from ..warehouse.connection import connection

    try:
        with connection(warehouse) as con:
            n = derive_local_set(con, set_id, f"Local reference levels derived from {warehouse.name}",
                                 allow_few_rooms=allow_few_rooms)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"Saved local set {set_id!r} with {n} values (75th percentile of room medians).")
