"""``kerma exams``: standard exam types and the rules that map descriptions onto them."""

from __future__ import annotations

from pathlib import Path

import typer

from .app import app, console, fail, rows_table

__all__ = ["exams_app", "exams_unmapped"]

exams_app = typer.Typer(help="Standard exam types and the rules that map descriptions onto them.",
                        no_args_is_help=True)
app.add_typer(exams_app, name="exams")


@exams_app.command("unmapped")
def exams_unmapped(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    config: Path | None = typer.Option(None, "--config", help="Settings file with your [[exam_rule]]s."),
) -> None:
    """List study descriptions no exam rule maps, most frequent first, to extend the rules."""
    from queries import sql

    from ..config import DEFAULT_CONFIG
    from ..errors import WarehouseError
    from ..exams import load_exam_rules, rule_rows
    from ..warehouse.connection import connection
    from ..warehouse.load import ensure_schema, replace_exam_rules

    try:
        with connection(warehouse) as con:
            ensure_schema(con)
            replace_exam_rules(con, rule_rows(load_exam_rules(config or DEFAULT_CONFIG)))
            frame = con.execute(sql("unmapped_descriptions")).df()
    except WarehouseError as exc:
        fail(str(exc))
    if frame.empty:
        console.print("Every study maps to a standard exam type.")
        return
    console.print(rows_table("Unmapped study descriptions", frame))
    console.print("Add [[exam_rule]] entries to kerma.toml (see pipeline/exam_rules.toml for the syntax).")
