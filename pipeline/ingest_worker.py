"""Parsing one input file, in the ingest process or in a worker process (spawned).

Kept apart from pipeline.ingest so that a worker imports only the parsing core (pydicom and
pipeline.parsing), not DuckDB or the warehouse code: a spawned worker starts sooner.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from dataclasses import dataclass

from .errors import InputError
from .models import DoseObject, IssueKind, ParseIssue
from .parsing import parse_dose_object
from .pseudonym import make_pseudonymiser
from .sources.files import lenient_pydicom, read_object

__all__ = ["FileOutcome", "process_file"]


@dataclass(slots=True)
class FileOutcome:
    path: str
    sha256: str
    size_bytes: int
    status: str
    reason: str | None = None
    detail: str | None = None
    sop_instance_uid: str | None = None
    sop_class_uid: str | None = None
    obj: DoseObject | None = None


def process_file(path: str, data: bytes, pseudonymise: Callable[[str, str], str],
                 digest: str | None = None) -> FileOutcome:
    """Bytes of one file -> outcome (parsed object or the reason it was not loaded). No I/O.

    `digest` is the SHA-256 of `data` when the caller has already computed it."""
    digest = digest or hashlib.sha256(data).hexdigest()
    outcome = FileOutcome(path, digest, len(data), "loaded")
    with lenient_pydicom() as caught:
        try:
            read = read_object(data, path)
            ds = read.dataset
            outcome.sop_class_uid = _text(ds, "SOPClassUID")
            outcome.sop_instance_uid = _text(ds, "SOPInstanceUID")
            obj = parse_dose_object(ds, pseudonymise)
        except InputError as exc:
            outcome.status = exc.status
            outcome.reason = exc.reason
            outcome.detail = str(exc)
            return outcome
        except RecursionError:
            outcome.status, outcome.reason = "quarantined", "content_tree_too_deep"
            outcome.detail = f"{path}: structure nested too deeply to read"
            return outcome
    if read.pixel_data_truncated:
        obj.issues.append(ParseIssue(IssueKind.PIXEL_DATA_TRUNCATED, read.pixel_data_truncated))
    if caught:
        seen = set()
        for w in caught:
            text = str(w.message).splitlines()[0][:300]
            if text not in seen:
                seen.add(text)
                obj.issues.append(ParseIssue(IssueKind.PARSER_WARNING, f"pydicom: {text}"))
    outcome.obj = obj
    outcome.reason = "loaded_with_note" if obj.note else None
    outcome.detail = obj.note
    return outcome


def _text(ds, keyword: str) -> str | None:
    try:
        value = ds.get(keyword)
    except Exception:  # noqa: BLE001 - an unreadable UID is reported by the parser
        return None
    return str(value).strip() if value else None


# --- worker processes ---------------------------------------------------------------------------

_WORKER_PSEUDONYMISE: Callable[[str, str], str] | None = None


def _init_worker(key: bytes) -> None:
    global _WORKER_PSEUDONYMISE
    _die_with_parent()
    _WORKER_PSEUDONYMISE = make_pseudonymiser(key)


def _die_with_parent() -> None:
    """End this worker when the ingest process dies (even by SIGKILL): an idle worker would
    otherwise wait on its queue forever. A daemon thread notices the re-parenting."""
    import os
    import threading
    import time

    parent = os.getppid()

    def watch() -> None:
        while os.getppid() == parent:
            time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=watch, name="kerma-parent-watch", daemon=True).start()


def _ready() -> None:
    """A no-op task: submitting one per worker starts the workers early."""


def _work(item: tuple[str, bytes, str]) -> FileOutcome:
    return process_file(item[0], item[1], _WORKER_PSEUDONYMISE, item[2])
