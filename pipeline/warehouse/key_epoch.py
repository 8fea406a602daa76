"""One pseudonymisation key per warehouse: record its fingerprint, refuse another key.

The same patient gets the same pseudonym only under the same key; an ingest with a different
key would silently split patients in two and make cumulative-dose checks undercount. The
first ingest records epoch 1 with the key's fingerprint (``pipeline.pseudonym.key_fingerprint``;
never the key); a later ingest with another key stops with KeyMismatchError before loading
anything, unless a new epoch is asked for, which is recorded with its start time.
"""

from __future__ import annotations

import datetime as dt

import duckdb

from queries import sql

from ..errors import KeyMismatchError

__all__ = ["check_key_epoch", "current_key_epoch"]


def current_key_epoch(con: duckdb.DuckDBPyConnection) -> tuple[int, str, dt.datetime] | None:
    """(epoch, key fingerprint, started at) of the newest key epoch; None before the first ingest."""
    rows = con.execute(sql("select_current_key_epoch")).fetchall()   # fetch all: no result left open
    return None if not rows else (int(rows[0][0]), str(rows[0][1]), rows[0][2])


def check_key_epoch(con: duckdb.DuckDBPyConnection, fingerprint: str, *, new_epoch: bool = False,
                    run_id: str | None = None, now: dt.datetime | None = None) -> int:
    """The key epoch an ingest with the key of `fingerprint` loads into; records a new one if needed.

    Parameters
    ----------
    con
        Writable connection to a warehouse whose schema exists.
    fingerprint
        ``key_fingerprint(key)`` of the ingest's key.
    new_epoch
        Start a new epoch when the fingerprint differs (``--new-key-epoch``); ignored when it
        matches the current epoch.
    run_id, now
        Recorded with a new epoch.

    Returns
    -------
    int
        The epoch number (1 for the first ingest).

    Raises
    ------
    KeyMismatchError
        The fingerprint differs from the current epoch's and `new_epoch` is false.
    """
    now = now or dt.datetime.now()
    current = current_key_epoch(con)
    if current is not None and current[1] == fingerprint:
        return current[0]
    if current is not None and not new_epoch:
        raise KeyMismatchError(
            f"the pseudonymisation key differs from the one this warehouse was loaded with "
            f"(key epoch {current[0]} since {current[2]:%Y-%m-%d %H:%M}, fingerprint {current[1]}): "
            "patient linkage would break (the same patient would get a second pseudonym); "
            "nothing was loaded. Use the warehouse's key, or give --new-key-epoch to start a new "
            "key epoch on purpose")
    epoch = 1 if current is None else current[0] + 1
    con.execute(sql("insert_key_epoch"), {"epoch": epoch, "key_fingerprint": fingerprint,
                                          "started_at": now, "first_run_id": run_id})
    return epoch
