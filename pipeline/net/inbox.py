"""The inbox on disk: objects written atomically, named by SOP Instance UID, archived once recorded.

A received or retrieved object is written under a temporary name in a sibling folder
(``.<inbox>.partial``, same file system, outside the inbox so an ingest never sees a half-written
file), flushed and fsynced, then renamed to ``<inbox>/<SOP Instance UID>.dcm``; the folder entry
is fsynced too. Only after that does the network layer report success (PS3.4 B.2.3: the
Storage SCP stores the object before returning Success).
"""

from __future__ import annotations

import datetime as dt
import os
import re
import shutil
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

__all__ = ["SUFFIX", "ArchiveSummary", "archive_recorded", "clear_partial", "have_instances",
           "instance_path", "is_valid_uid", "partial_dir", "write_atomic"]

SUFFIX = ".dcm"
_UID = re.compile(r"^(0|[1-9][0-9]*)(\.(0|[1-9][0-9]*))*$")


def is_valid_uid(uid: str) -> bool:
    """True for a UID of PS3.5 §9.1 (digits and dots, at most 64 characters); safe as a file name."""
    return 0 < len(uid) <= 64 and _UID.match(uid) is not None


def partial_dir(inbox: Path) -> Path:
    """The folder of temporary files beside `inbox` (never inside it)."""
    inbox = Path(inbox).resolve()
    return inbox.parent / f".{inbox.name}.partial"


def instance_path(inbox: Path, sop_instance_uid: str) -> Path:
    """Where the object with this SOP Instance UID lives in `inbox`."""
    if not is_valid_uid(sop_instance_uid):
        raise ValueError(f"SOP Instance UID {sop_instance_uid!r} is not a valid UID (PS3.5 9.1); "
                         "refusing to use it as a file name")
    return Path(inbox) / f"{sop_instance_uid}{SUFFIX}"


def _fsync_dir(folder: Path) -> None:
    fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def write_atomic(inbox: Path, sop_instance_uid: str, chunks: Iterable[bytes]) -> Path:
    """Write one object to ``inbox/<uid>.dcm`` atomically and durably; returns its path.

    Parameters
    ----------
    inbox
        Destination folder (created if missing).
    sop_instance_uid
        The object's SOP Instance UID; the file name. ValueError if it is not a valid UID.
    chunks
        The bytes of the file (DICOM Part 10), as received.

    Raises
    ------
    OSError
        The object could not be written (full disk, read-only folder); nothing is left under
        the final name and the temporary file is removed.
    """
    final = instance_path(inbox, sop_instance_uid)
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp_dir = partial_dir(final.parent)
    tmp_dir.mkdir(exist_ok=True)
    tmp = tmp_dir / f"{sop_instance_uid}.{os.getpid()}.{os.urandom(4).hex()}.tmp"
    try:
        with open(tmp, "wb") as handle:
            for chunk in chunks:
                handle.write(chunk)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, final)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    _fsync_dir(final.parent)
    return final


def clear_partial(inbox: Path) -> int:
    """Remove temporary files left by a process that was killed mid-write; returns how many."""
    folder = partial_dir(inbox)
    if not folder.is_dir():
        return 0
    removed = 0
    for path in folder.glob("*.tmp"):
        path.unlink(missing_ok=True)
        removed += 1
    return removed


def have_instances(*folders: Path) -> set[str]:
    """SOP Instance UIDs of the objects already stored under `folders` (by file name)."""
    found: set[str] = set()
    for folder in folders:
        if Path(folder).is_dir():
            found.update(p.name[:-len(SUFFIX)] for p in Path(folder).rglob(f"*{SUFFIX}")
                         if is_valid_uid(p.name[:-len(SUFFIX)]))
    return found


@dataclass(frozen=True, slots=True)
class ArchiveSummary:
    """What one archive step moved, and where."""

    folder: Path
    n_moved: int
    n_kept: int


def archive_recorded(inbox: Path, archive: Path, recorded: set[tuple[str, str]],
                     day: dt.date) -> ArchiveSummary:
    """Move every inbox file the warehouse has recorded to ``archive/<day>/``, keeping its name.

    Parameters
    ----------
    inbox, archive
        The folders.
    recorded
        (absolute path, SHA-256) of the files ``source_object`` holds; a file whose content
        changed since it was recorded (the same object sent again) stays for the next ingest.
    day
        Names the dated folder (the day of the ingest).
    """
    import hashlib

    target = Path(archive) / day.isoformat()
    moved = kept = 0
    for path in sorted(p for p in Path(inbox).rglob("*") if p.is_file()):
        key = str(path.resolve())
        digest = hashlib.sha256(path.read_bytes()).hexdigest()
        if (key, digest) not in recorded:
            kept += 1
            continue
        dest = target / path.relative_to(inbox)
        dest.parent.mkdir(parents=True, exist_ok=True)
        shutil.move(path, dest)
        moved += 1
    if moved:
        _fsync_dir(target)
    return ArchiveSummary(target, moved, kept)
