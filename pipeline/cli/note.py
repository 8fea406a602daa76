"""``kerma note add`` and ``kerma note list``: review notes on audit findings (append-only)."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.table import Table

from .app import app, console, fail

__all__ = ["note_add", "note_app", "note_list"]

note_app = typer.Typer(help="Review notes on audit findings (append-only), by item_id.",
                       no_args_is_help=True)
app.add_typer(note_app, name="note")


@note_app.command("add")
def note_add(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (audited)."),
    item: str = typer.Option(..., "--item", help="The finding's item_id (dose_alerts, audit_medians, drift_flags)."),
    status: str = typer.Option(..., "--status", help="open | explained | action | closed"),
    text: str = typer.Option(..., "--text", help="The note, e.g. 'explained: detector replaced'."),
    by: str = typer.Option(..., "--by", help="Reviewer's name or role."),
) -> None:
    """Append a review note to a finding; the latest note is its current status."""
    from ..errors import ConfigError, WarehouseError
    from ..notes import add_note

    try:
        note = add_note(warehouse, item, status, text, by)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"note {note['note_id'][:8]} added to {note['item_id']}: {note['status']} "
                  f"({note['noted_by']}, {note['noted_at']:%Y-%m-%d %H:%M} UTC)")


@note_app.command("list")
def note_list(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    item: str | None = typer.Option(None, "--item", help="Only this item_id."),
) -> None:
    """Every review note, oldest first."""
    from ..errors import ConfigError, WarehouseError
    from ..notes import list_notes

    try:
        notes = list_notes(warehouse, item)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    if not notes:
        console.print("No review notes.")
        return
    table = Table(title="Review notes")
    for column in ("When (UTC)", "Item", "Status", "By", "Note"):
        table.add_column(column)
    for n in notes:
        table.add_row(f"{n['noted_at']:%Y-%m-%d %H:%M}", n["item_id"], n["status"], n["noted_by"],
                      n["note_text"])
    console.print(table)
