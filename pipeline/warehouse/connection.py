"""Open the DuckDB warehouse: settings in one place, one clear error when it cannot be opened."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from pathlib import Path

import duckdb

from ..errors import WarehouseError

__all__ = ["connection", "evict_cached_blocks", "missing_warehouse_message", "scan_bounded"]


def missing_warehouse_message(path: Path) -> str:
    """The one line every command prints for a warehouse file that is not there."""
    return (f"warehouse {path} does not exist: check --warehouse (only `kerma ingest`, "
            "`kerma listen --ingest-every` and `kerma demo` create one)")


@contextlib.contextmanager
def connection(db_path: Path | str, read_only: bool = False, *,
               create: bool = False) -> Iterator[duckdb.DuckDBPyConnection]:
    """A DuckDB connection to the warehouse file; WarehouseError if it cannot be opened.

    Only the commands that load data (``ingest``, ``listen --ingest-every``, ``demo`` and the
    ingest step of the monthly flow) pass ``create=True``; every other caller gets
    "warehouse ... does not exist" for a missing file, so a mistyped path is never audited
    as an empty (clean-looking) warehouse. DuckDB lets one process write a database file at a
    time; a second writer (or a reader while a writer holds it) gets "warehouse busy".
    """
    path = Path(db_path)
    if not path.exists() and (read_only or not create):
        raise WarehouseError(missing_warehouse_message(path))
    if not read_only:
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise WarehouseError(f"cannot create the folder of warehouse {path}: {exc.strerror}") from exc
    try:
        con = duckdb.connect(str(path), read_only=read_only)
    except duckdb.IOException as exc:
        text = str(exc)
        if "lock" in text.lower():
            raise WarehouseError(f"warehouse {path} is busy: another Kerma Ledger process is "
                                 "using it; try again when it has finished") from exc
        raise WarehouseError(f"cannot open warehouse {path}: {text.splitlines()[0]}") from exc
    except duckdb.Error as exc:
        raise WarehouseError(f"cannot open warehouse {path}: {str(exc).splitlines()[0]}") from exc
    try:
        con.execute("set threads to 2")
        yield con
    finally:
        con.close()


def evict_cached_blocks(con: duckdb.DuckDBPyConnection) -> None:
    """Let DuckDB drop the table blocks it keeps in memory after reading them. It keeps every
    block it has read until its memory limit (80 % of RAM by default) is reached, so a whole
    scan leaves the table's blocks behind, and they grow with the warehouse. A tiny memory limit
    evicts every block not in use, then the limit is put back. A block DuckDB cannot evict (an
    index with changes not yet checkpointed) makes it refuse the tiny limit after evicting what
    it can: that is fine here. Never inside a transaction: there a refused limit aborts it."""
    (limit,), = con.execute("select current_setting('memory_limit')").fetchall()
    try:
        con.execute("set memory_limit = '1MB'")
    except duckdb.OutOfMemoryException:
        pass
    finally:
        con.execute(f"set memory_limit = '{limit}'")


def scan_bounded(con: duckdb.DuckDBPyConnection, query: str, headroom_mib: int = 64) -> list[tuple]:
    """The rows of `query`, run with DuckDB's memory bounded to what it holds now (once the blocks
    it caches are let go) plus `headroom_mib`: for a statement that scans whole columns of large
    tables but holds little (sums, an existence test, a filter by a small set), so that the blocks
    it reads are evicted as it goes instead of being kept until the limit (80 % of RAM), which
    made them grow with the warehouse. Should DuckDB need more than the bound, the statement is
    run again under the usual limit (the same rows, only more memory). Never inside a
    transaction (evict_cached_blocks; a refused limit there aborts it)."""
    (limit,), = con.execute("select current_setting('memory_limit')").fetchall()
    evict_cached_blocks(con)
    (held,), = con.execute("select coalesce(sum(memory_usage_bytes), 0) from duckdb_memory()"
                           ).fetchall()
    try:
        con.execute(f"set memory_limit = '{int(held / 2**20) + headroom_mib}MiB'")
        try:
            return con.execute(query).fetchall()
        except duckdb.OutOfMemoryException:
            con.execute(f"set memory_limit = '{limit}'")
            return con.execute(query).fetchall()
    finally:
        con.execute(f"set memory_limit = '{limit}'")
