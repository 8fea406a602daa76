"""Review notes on audit findings (the shell): append-only table ``review_note``.

A finding is named by its stable ``item_id`` (columns of ``audit_medians``, ``dose_alerts`` and
``drift_flags``; one per finding, the same next period). A note records a reviewer's status of
the finding: ``open``, ``explained`` (e.g. "detector replaced"), ``action`` (a change is under
way) or ``closed``. Notes are never changed or deleted; the latest note is the current status
(view ``latest_review_note``).
"""

from __future__ import annotations

import datetime as dt
import uuid
from pathlib import Path

import duckdb

from queries import sql

from .errors import ConfigError
from .warehouse.connection import connection
from .warehouse.load import ensure_schema

__all__ = ["NOTE_STATUSES", "add_note", "list_notes"]

NOTE_STATUSES = ("open", "explained", "action", "closed")


def add_note(warehouse: Path, item_id: str, status: str, text: str, by: str,
             *, noted_at: dt.datetime | None = None) -> dict:
    """Append one review note to a finding.

    Parameters
    ----------
    warehouse : Path
        An audited DuckDB warehouse.
    item_id : str
        The finding's ``item_id`` (from ``audit_medians``, ``dose_alerts`` or ``drift_flags``).
    status : str
        One of `NOTE_STATUSES`.
    text, by : str
        The note and the reviewer's name (a staff name, never a patient's).
    noted_at : datetime, optional
        When (UTC); now by default.

    Returns
    -------
    dict
        The stored note.

    Raises
    ------
    ConfigError
        Unknown status, empty text or name, no such warehouse, or an item_id no audit produced.
    """
    if status not in NOTE_STATUSES:
        raise ConfigError(f"--status must be one of {', '.join(NOTE_STATUSES)}, not {status!r}")
    if not text.strip() or not by.strip():
        raise ConfigError("a note needs a non-empty --text and --by")
    if not Path(warehouse).exists():
        raise ConfigError(f"no warehouse at {warehouse}: run `kerma ingest` and `kerma audit` first")
    note = {"note_id": uuid.uuid4().hex, "item_id": item_id.strip(), "status": status,
            "note_text": text.strip(), "noted_by": by.strip(),
            "noted_at": (noted_at or dt.datetime.now(dt.UTC)).astimezone(dt.UTC).replace(tzinfo=None)}
    with connection(warehouse) as con:
        ensure_schema(con)
        try:
            known = con.execute(sql("select_known_item"), {"item_id": note["item_id"]}).fetchone()[0]
        except duckdb.CatalogException:   # never audited: no audit tables yet
            known = False
        if not known:
            raise ConfigError(f"unknown item {item_id!r}: no audited finding has this item_id "
                              "(see the item_id column of dose_alerts, audit_medians, drift_flags)")
        con.execute(sql("insert_review_note"), note)
    return note


def list_notes(warehouse: Path, item_id: str | None = None) -> list[dict]:
    """Every review note, oldest first (of one item when `item_id` is given).

    Raises
    ------
    ConfigError
        No such warehouse.
    """
    if not Path(warehouse).exists():
        raise ConfigError(f"no warehouse at {warehouse}")
    with connection(warehouse) as con:
        ensure_schema(con)
        cursor = con.execute(sql("select_review_notes"), {"item_id": item_id})
        columns = [d[0] for d in cursor.description]
        return [dict(zip(columns, row)) for row in cursor.fetchall()]
