"""``kerma schema``: the data dictionary of the public tables and views."""

from __future__ import annotations

import sys

import typer

from .app import app, fail

__all__ = ["schema_command"]


@app.command("schema")
def schema_command(
    fmt: str = typer.Option("markdown", "--format", help="markdown or json."),
) -> None:
    """Print every public table and view with each column's type, unit and meaning.

    Generated from the ``-- columns:`` comments of the SQL files and the column types of a
    freshly created warehouse (made in a temporary folder); docs/schema.md is this output.
    """
    from ..dictionary import (build_dictionary, check_dictionary, fresh_public_columns,
                              render_json, render_markdown)

    if fmt not in ("markdown", "json"):
        fail(f"--format must be markdown or json, not {fmt!r}")
    relations = build_dictionary(fresh_public_columns())
    sys.stdout.write(render_markdown(relations) if fmt == "markdown" else render_json(relations))
    for problem in check_dictionary(relations):
        print(f"warning: {problem}", file=sys.stderr)
