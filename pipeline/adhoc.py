"""Ad hoc read-only questions to the warehouse (``kerma sql``): one SELECT, bound parameters.

Three layers keep a question from changing anything:

1. the warehouse file is opened read-only, so DuckDB itself refuses INSERT, UPDATE, DELETE,
   CREATE, DROP and ALTER on it;
2. once open, DuckDB's file-system access is switched off and the configuration locked
   (``enable_external_access = false``, ``lock_configuration = true``), so the engine also
   refuses ``COPY ... TO``, ``EXPORT DATABASE``, ``ATTACH``, ``INSTALL`` / ``LOAD`` and any
   ``SET`` (and reading other files: a question is about the warehouse alone);
3. before running, the text is parsed by DuckDB (``extract_statements``) and anything but
   exactly one SELECT (``WITH``, ``FROM``-first, ``DESCRIBE``, ``SHOW``, ``SUMMARIZE`` and
   ``VALUES`` are SELECTs to DuckDB) is refused with one line naming the statement type.

Parameters are DuckDB named parameters (``$name``) bound by the engine, never formatted into
the SQL. Their values are passed as text; DuckDB casts each to the type its context needs
(``study_date >= $from`` binds a DATE), so ``cast($x as ...)`` is only needed where the
context says nothing (``select $x``).
"""

from __future__ import annotations

import contextlib
import csv
import datetime as dt
import decimal
import json
import math
import os
import re
from collections.abc import Iterator
from pathlib import Path
from typing import IO, Any

import duckdb
import pyarrow as pa

from .errors import QueryError
from .warehouse.connection import connection

__all__ = ["FORMATS", "check_query", "history_path", "parse_params", "read_only", "run_query",
           "write_csv", "write_json", "write_parquet"]

FORMATS = ("table", "csv", "json", "parquet")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


def parse_params(items: list[str] | tuple[str, ...]) -> dict[str, str]:
    """``NAME=VALUE`` strings of ``--param`` -> {name: value}; QueryError for a malformed one.

    Parameters
    ----------
    items : list of str
        Each ``NAME=VALUE``; NAME is an SQL identifier (``$NAME`` in the query), VALUE any
        text (it may contain ``=``).

    Returns
    -------
    dict of str to str

    Raises
    ------
    QueryError
        No ``=``, a name that is not an identifier, or the same name twice.
    """
    params: dict[str, str] = {}
    for item in items:
        name, sep, value = item.partition("=")
        if not sep or not _NAME.fullmatch(name):
            raise QueryError(f"--param {item!r}: expected NAME=VALUE with NAME a plain "
                             "identifier (used as $NAME in the query)")
        if name in params:
            raise QueryError(f"--param {name} given twice")
        params[name] = value
    return params


@contextlib.contextmanager
def read_only(db_path: Path | str) -> Iterator[duckdb.DuckDBPyConnection]:
    """A read-only connection with file-system access off and the configuration locked.

    Raises
    ------
    WarehouseError
        The file is missing, busy (a writer holds it) or not a DuckDB database.
    """
    with connection(db_path, read_only=True) as con:
        con.execute("set enable_external_access = false")
        con.execute("set lock_configuration = true")
        yield con


def check_query(con: duckdb.DuckDBPyConnection, text: str) -> set[str]:
    """Refuse anything but exactly one SELECT; returns the ``$names`` the query uses.

    Raises
    ------
    QueryError
        A syntax error, no statement, several statements, a statement other than SELECT, or
        positional (``?``) parameters.
    """
    try:
        statements = con.extract_statements(text)
    except duckdb.Error as exc:
        raise QueryError(_first_line(exc)) from exc
    if not statements:
        raise QueryError("no SQL statement given")
    if len(statements) > 1:
        raise QueryError(f"one statement at a time: found {len(statements)}")
    (statement,) = statements
    if statement.type != duckdb.StatementType.SELECT:
        kind = statement.type.name.replace("_", " ")
        raise QueryError(f"refused: the warehouse is opened read-only and kerma sql runs one "
                         f"SELECT; this is a {kind} statement, nothing was changed")
    names = set(statement.named_parameters)
    if any(n.isdigit() for n in names):
        raise QueryError("use named parameters ($name with --param name=value), not ? or $1")
    return names


def run_query(con: duckdb.DuckDBPyConnection, text: str,
              params: dict[str, str] | None = None, *, max_rows: int | None = None) -> pa.Table:
    """Run one SELECT on a `read_only` connection with `params` bound; the rows as Arrow.

    Parameters
    ----------
    con : duckdb.DuckDBPyConnection
        From `read_only`.
    text : str
        One SELECT; ``$name`` marks a parameter.
    params : dict of str to str, optional
        Every ``$name`` the query uses, and no other.
    max_rows : int, optional
        Fetch at most this many rows (the rest is never materialised).

    Returns
    -------
    pyarrow.Table

    Raises
    ------
    QueryError
        Refused by `check_query`, a parameter missing or unused, or DuckDB's own error (first
        line; a write the engine refused says the warehouse is opened read-only).
    """
    params = params or {}
    names = check_query(con, text)
    if missing := sorted(names - params.keys()):
        raise QueryError("no value for " + ", ".join(f"${n}" for n in missing)
                         + " (give --param NAME=VALUE)")
    if unused := sorted(params.keys() - names):
        raise QueryError("--param " + ", ".join(unused) + " not used by the query (it uses "
                         + (", ".join(f"${n}" for n in sorted(names)) or "no parameters") + ")")
    try:
        relation = con.sql(text, params=params or None)
        if max_rows is not None:
            relation = relation.limit(max_rows)
        return relation.to_arrow_table()
    except duckdb.Error as exc:
        message = _first_line(exc)
        if "read-only" in message:
            message = f"refused: the warehouse is opened read-only ({message})"
        elif isinstance(exc, duckdb.PermissionException):
            message = ("refused: kerma sql reads the warehouse only; file access is off "
                       f"({message})")
        raise QueryError(message) from exc


def _first_line(exc: Exception) -> str:
    return str(exc).strip().splitlines()[0]


def _plain(value: Any) -> Any:
    """A JSON-ready value: dates ISO 8601, decimals as numbers, NaN/inf as null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, decimal.Decimal):
        return float(value)
    if isinstance(value, dt.date | dt.datetime | dt.time):
        return value.isoformat()
    if isinstance(value, dt.timedelta):
        return value.total_seconds()
    if isinstance(value, bytes):
        return value.hex()
    if isinstance(value, list):
        return [_plain(v) for v in value]
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    return value


def write_csv(table: pa.Table, stream: IO[str]) -> None:
    """A header line of column names, then one line per row (RFC 4180 quoting; NULL empty)."""
    writer = csv.writer(stream, lineterminator="\n")
    writer.writerow(table.column_names)
    for row in table.to_pylist():
        writer.writerow(["" if v is None else v.isoformat() if isinstance(v, dt.date | dt.time)
                         else v for v in row.values()])


def write_json(table: pa.Table, stream: IO[str]) -> None:
    """A JSON array with one object per row (one per line); NULL as null, dates ISO 8601."""
    rows = table.to_pylist()
    stream.write("[\n" + ",\n".join(json.dumps(_plain(r), ensure_ascii=False) for r in rows)
                 + ("\n" if rows else "") + "]\n")


def write_parquet(table: pa.Table, path: Path) -> None:
    """The rows as one Parquet file (pyarrow), column types as DuckDB returned them."""
    import pyarrow.parquet as pq

    try:
        pq.write_table(table, path)
    except OSError as exc:
        raise QueryError(f"cannot write {path}: {exc}") from exc


def history_path(environ: dict[str, str] | None = None) -> Path:
    """Where the interactive prompt keeps its history: ``$KERMA_SQL_HISTORY``, else
    ``$XDG_STATE_HOME/kerma/sql_history``, else ``~/.local/state/kerma/sql_history`` (XDG
    Base Directory Specification: state data)."""
    env = os.environ if environ is None else environ
    if env.get("KERMA_SQL_HISTORY"):
        return Path(env["KERMA_SQL_HISTORY"])
    state = env.get("XDG_STATE_HOME") or str(Path(env.get("HOME") or Path.home()) / ".local" / "state")
    return Path(state) / "kerma" / "sql_history"
