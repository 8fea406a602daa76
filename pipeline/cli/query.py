"""``kerma sql``: ad hoc read-only questions to the warehouse (one query, or a prompt)."""

from __future__ import annotations

import sys
from pathlib import Path

import typer
from rich.markup import escape
from rich.table import Table

from .app import app, console, fail

__all__ = ["sql_command"]

_EXITS = {".quit", ".exit", "\\q", "quit", "exit"}


@app.command("sql")
def sql_command(
    query: str = typer.Argument(None, help="One SELECT; $name marks a parameter. Without it: "
                                           "an interactive prompt with history."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (opened read-only)."),
    file: Path = typer.Option(None, "--file", help="Read the query from this .sql file "
                                                   "(e.g. queries/examples/*.sql)."),
    param: list[str] = typer.Option([], "--param", help="NAME=VALUE bound to $NAME (repeatable); "
                                                         "never formatted into the SQL."),
    fmt: str = typer.Option("table", "--format", help="table, csv, json or parquet (parquet needs --out)."),
    out: Path = typer.Option(None, "--out", help="Write the rows to this file (csv, json, parquet)."),
    limit: int = typer.Option(50, help="Rows to print at most (table format)."),
) -> None:
    """Ask the warehouse a question: read-only, one SELECT, parameters bound by DuckDB."""
    from ..adhoc import FORMATS, parse_params
    from ..errors import QueryError

    if fmt not in FORMATS:
        fail(f"--format must be one of {', '.join(FORMATS)}, not {fmt!r}")
    if fmt == "parquet" and out is None:
        fail("--format parquet writes a file: give --out FILE.parquet")
    if fmt == "table" and out is not None:
        fail("--out writes csv, json or parquet: add --format csv, json or parquet")
    if out is not None and out.resolve() in {warehouse.resolve(), Path(f"{warehouse}.wal").resolve()}:
        fail(f"--out {out} is the warehouse itself: choose another file (nothing was written)")
    try:
        params = parse_params(param)
    except QueryError as exc:
        fail(str(exc))
    if file is not None:
        if query is not None:
            fail("give the query either as an argument or with --file, not both")
        try:
            query = file.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            fail(f"cannot read --file {file}: {getattr(exc, 'strerror', None) or exc}")
    if query is None:
        if out is not None:
            fail("the interactive prompt prints its results: --out needs a query")
        _prompt(warehouse, params, fmt, limit)
        return
    table = _ask(warehouse, query, params, max_rows=limit + 1 if fmt == "table" else None)
    if table is None:
        raise typer.Exit(code=2)
    _emit(table, fmt, out, limit)


def _ask(warehouse: Path, text: str, params: dict[str, str], *, only_used: bool = False,
         max_rows: int | None = None):
    """The rows of one query, or None after printing the one-line error."""
    from ..adhoc import check_query, read_only, run_query
    from ..errors import QueryError, WarehouseError

    try:
        with read_only(warehouse) as con:
            if only_used:
                names = check_query(con, text)
                params = {k: v for k, v in params.items() if k in names}
            return run_query(con, text, params, max_rows=max_rows)
    except (QueryError, WarehouseError) as exc:
        console.print(f"[red]error:[/red] {escape(str(exc))}", soft_wrap=True, highlight=False)
        return None


def _emit(table, fmt: str, out: Path | None, limit: int) -> None:
    from ..adhoc import write_csv, write_json, write_parquet
    from ..errors import QueryError

    if fmt == "table":
        console.print(_rich_table(table, limit))
        if table.num_rows > limit:
            console.print(f"(first {limit} rows shown; --limit N for more, --format csv for all)")
        return
    if fmt == "parquet":
        try:
            write_parquet(table, out)
        except QueryError as exc:
            fail(str(exc))
        console.print(f"{table.num_rows} rows written to {out}")
        return
    writer = write_csv if fmt == "csv" else write_json
    if out is None:
        writer(table, sys.stdout)
        sys.stdout.flush()
        return
    try:
        with open(out, "w", encoding="utf-8", newline="") as stream:
            writer(table, stream)
    except OSError as exc:
        fail(f"cannot write {out}: {exc.strerror or exc}")
    console.print(f"{table.num_rows} rows written to {out}")


def _rich_table(table, limit: int) -> Table:
    shown = Table(*table.column_names)
    for row in table.slice(0, limit).to_pylist():
        shown.add_row(*("" if v is None else f"{v:.6g}" if isinstance(v, float) else str(v)
                        for v in row.values()))
    return shown


def _prompt(warehouse: Path, params: dict[str, str], fmt: str, limit: int) -> None:
    """Read statements ending in ';' until .quit or end of input; each runs on its own
    read-only connection (a writer is never kept waiting on an idle prompt)."""
    from ..adhoc import history_path
    from ..warehouse.connection import missing_warehouse_message

    if not warehouse.exists():
        fail(missing_warehouse_message(warehouse))
    try:
        import readline
    except ImportError:   # pragma: no cover - Python without GNU readline / libedit
        readline = None
    history = history_path()
    if readline is not None:
        readline.set_auto_history(False)   # whole statements go to the history, not lines
        readline.set_history_length(1000)
        if history.exists():
            readline.read_history_file(history)
    console.print(f"kerma sql on {warehouse} (read-only). End each statement with ';'; "
                  ".quit or Ctrl-D leaves.", highlight=False)
    lines: list[str] = []
    try:
        while True:
            try:
                line = input("kerma> " if not lines else "   ..> ")
            except EOFError:
                break
            except KeyboardInterrupt:
                lines = []
                print()
                continue
            if not lines and line.strip().lower() in _EXITS:
                break
            if not lines and not line.strip():
                continue
            lines.append(line)
            if not line.rstrip().endswith(";"):
                continue
            text, lines = "\n".join(lines), []
            if readline is not None:
                readline.add_history(text.replace("\n", " "))
            table = _ask(warehouse, text, params, only_used=True,
                         max_rows=limit + 1 if fmt == "table" else None)
            if table is not None:
                _emit(table, fmt, None, limit)
    finally:
        if readline is not None:
            try:
                history.parent.mkdir(parents=True, exist_ok=True)
                readline.write_history_file(history)
            except OSError as exc:
                console.print(f"(history not saved to {history}: {exc.strerror})")
    if lines:
        console.print("(unfinished statement without ';' not run)")
