"""Drain the inbox: ingest what the SCP stored, then move what the warehouse recorded to the archive."""

from __future__ import annotations

import datetime as dt
import logging
from dataclasses import dataclass
from pathlib import Path

from ..ingest import IngestSummary, ingest
from ..warehouse.connection import connection
from ..warehouse.records import recorded_files
from .inbox import ArchiveSummary, archive_recorded

__all__ = ["DrainSummary", "drain_inbox"]

logger = logging.getLogger("kerma.net")


@dataclass(frozen=True, slots=True)
class DrainSummary:
    """One drain: the ingest run (None when the inbox was empty), and what moved to the archive."""

    ingest: IngestSummary | None
    archive: ArchiveSummary


def drain_inbox(inbox: Path, warehouse: Path, archive: Path, key: bytes, *,
                sites: dict[str, str] | None = None, exam_rules: list[dict] | None = None,
                today: dt.date | None = None) -> DrainSummary:
    """Ingest every file in `inbox`, then move those the warehouse recorded to ``archive/<today>/``.

    Every file ends in ``source_object`` (loaded, duplicate, not a dose object or quarantined)
    before it leaves the inbox; a file written while the ingest ran, or replaced by a new copy,
    stays for the next drain. `exam_rules` (rows of pipeline.exams.rule_rows) are the rules the
    ingest keeps its exam matches with; None: the shipped defaults. Raises WarehouseError when the warehouse is busy or unwritable
    (nothing is moved then).
    """
    inbox = Path(inbox)
    day = today or dt.date.today()
    if not any(p.is_file() for p in inbox.rglob("*")):   # nothing arrived: no empty ingest runs
        return DrainSummary(None, ArchiveSummary(Path(archive) / day.isoformat(), 0, 0))
    summary = ingest([inbox], warehouse, key, sites=sites, exam_rules=exam_rules)
    paths = [str(p.resolve()) for p in sorted(inbox.rglob("*")) if p.is_file()]
    with connection(warehouse, read_only=True) as con:
        recorded = recorded_files(con, paths)
    moved = archive_recorded(inbox, archive, recorded, day)
    logger.info("drain %s: seen=%d loaded=%d quarantined=%d archived=%d kept=%d (run %s)",
                inbox, summary.seen, summary.by_status["loaded"],
                summary.by_status["quarantined"], moved.n_moved, moved.n_kept, summary.run_id)
    return DrainSummary(summary, moved)
