"""Storage SCP: receive dose reports and images over DICOM and write them to the inbox.

The SCP never parses and never touches the warehouse: it writes each object as received (the
transfer syntax of the presentation context, compressed or not) with
:func:`pipeline.net.inbox.write_atomic`, and returns Success only once the file is on disk
(PS3.4 B.2.3). ``handle_store`` is the one place in Kerma Ledger with a broad ``except``: it
sits at the network boundary, where any failure must become a DICOM status for the sender
instead of killing the association thread.
"""

from __future__ import annotations

import logging
import ssl
import threading
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

from pydicom import uid as pdu
from pynetdicom import AE, evt
from pynetdicom.sop_class import Verification
from pynetdicom.transport import ThreadedAssociationServer

from ..parsing import DOSE_SR_CLASSES, IMAGE_CLASSES
from .inbox import clear_partial, is_valid_uid, write_atomic

__all__ = ["IMAGE_TRANSFER_SYNTAXES", "SR_TRANSFER_SYNTAXES", "STATUS", "STORAGE_CLASSES",
           "AssociationLog", "forget_association", "handle_store", "make_storage_ae",
           "start_storage_scp"]

logger = logging.getLogger("kerma.net")

# The encodings pydicom reads (PS3.5 A.1-A.4). Structured reports are never pixel-compressed;
# images may arrive in any syntax pydicom can read, and are stored as received.
SR_TRANSFER_SYNTAXES = [pdu.ExplicitVRLittleEndian, pdu.ImplicitVRLittleEndian,
                        pdu.DeflatedExplicitVRLittleEndian, pdu.ExplicitVRBigEndian]
IMAGE_TRANSFER_SYNTAXES = SR_TRANSFER_SYNTAXES + [
    *pdu.JPEGTransferSyntaxes, *pdu.JPEGLSTransferSyntaxes, *pdu.JPEG2000TransferSyntaxes,
    *pdu.RLETransferSyntaxes]
STORAGE_CLASSES = sorted(DOSE_SR_CLASSES) + sorted(IMAGE_CLASSES)

# C-STORE statuses we return (PS3.4 Annex B.2.3, PS3.7 Annex C).
STATUS = {"success": 0x0000, "out_of_resources": 0xA700, "cannot_understand": 0xC210,
          "processing_failure": 0x0110}


@dataclass
class AssociationLog:
    """Counts of one association, logged as one line when its connection closes."""

    calling_ae: str = ""
    peer: str = ""
    stored: int = 0
    failed: int = 0
    outcome: str = "closed"
    statuses: list[int] = field(default_factory=list)


_LOGS: dict[int, AssociationLog] = {}
_LOGS_LOCK = threading.Lock()


def _log_of(event) -> AssociationLog:
    with _LOGS_LOCK:
        entry = _LOGS.get(id(event.assoc))
        if entry is None:
            requestor = event.assoc.requestor
            entry = _LOGS[id(event.assoc)] = AssociationLog(
                calling_ae=str(requestor.ae_title).strip(),
                peer=f"{requestor.address}:{requestor.port}")
        return entry


def forget_association(assoc) -> AssociationLog | None:
    """Drop and return the counts of `assoc` (for associations we requested, e.g. C-GET)."""
    with _LOGS_LOCK:
        return _LOGS.pop(id(assoc), None)


def handle_store(event, inbox: Path) -> int:
    """C-STORE handler: write the object to `inbox` atomically, then return its status.

    Returns 0x0000 only when the file is on disk under its final name; 0xA700 (out of
    resources) when it cannot be written, 0xC210 (cannot understand) when the SOP Instance
    UID cannot name a file, 0x0110 (processing failure) for anything unforeseen, logged with
    its traceback.
    """
    record = _log_of(event)
    sop_uid = str(event.request.AffectedSOPInstanceUID or "").strip()
    try:
        if not is_valid_uid(sop_uid):
            logger.error("C-STORE from %s: SOP Instance UID %r is not a valid UID; refused",
                         record.calling_ae, sop_uid)
            status = STATUS["cannot_understand"]
        else:
            # encoded_dataset() is the object exactly as received, with a File Meta header
            # built from the presentation context; nothing is decoded here (pydicom decodes
            # lazily, so decoding errors belong to the ingest, which quarantines them).
            write_atomic(inbox, sop_uid, [event.encoded_dataset(include_meta=True)])
            status = STATUS["success"]
    except OSError as exc:
        logger.error("C-STORE %s from %s: cannot write to %s: %s", sop_uid, record.calling_ae,
                     inbox, exc)
        status = STATUS["out_of_resources"]
    except Exception:  # noqa: BLE001 - the network boundary: any failure becomes a status
        logger.exception("C-STORE %s from %s: unexpected failure", sop_uid, record.calling_ae)
        status = STATUS["processing_failure"]
    if status == STATUS["success"]:
        record.stored += 1
    else:
        record.failed += 1
    record.statuses.append(status)
    return status


def _handle_echo(event) -> int:
    _log_of(event)
    return 0x0000


def _outcome(outcome: str):
    def handler(event) -> None:
        _log_of(event).outcome = outcome
    return handler


def _handle_close(event) -> None:
    with _LOGS_LOCK:
        entry = _LOGS.pop(id(event.assoc), None)
    if entry is None:  # a connection that never reached association negotiation
        requestor = event.assoc.requestor
        entry = AssociationLog(peer=f"{requestor.address}:{requestor.port}", outcome="no association")
    if entry.outcome == "accepted":
        entry.outcome = "closed without release"
    logger.info("association calling_ae=%s peer=%s objects=%d failed=%d outcome=%s",
                entry.calling_ae or "-", entry.peer, entry.stored, entry.failed, entry.outcome)


def make_storage_ae(ae_title: str, *, allow: Iterable[str] = ()) -> AE:
    """An AE that accepts Verification and the storage classes the ingest reads.

    Parameters
    ----------
    ae_title
        Our AE title (at most 16 characters, PS3.5 Table 6.2-1 AE).
    allow
        Calling AE titles allowed to associate; empty allows any. Others are rejected at
        association (A-ASSOCIATE-RJ, reason "calling AE title not recognised").
    """
    if not 0 < len(ae_title.strip()) <= 16:
        raise ValueError(f"AE title {ae_title!r} must be 1 to 16 characters")
    ae = AE(ae_title=ae_title)
    ae.add_supported_context(Verification)
    for sop_class in STORAGE_CLASSES:
        syntaxes = SR_TRANSFER_SYNTAXES if sop_class in DOSE_SR_CLASSES else IMAGE_TRANSFER_SYNTAXES
        ae.add_supported_context(sop_class, syntaxes)
    ae.require_calling_aet = [a.strip() for a in allow]
    ae.maximum_pdu_size = 0  # no limit on what we accept
    return ae


def start_storage_scp(ae: AE, inbox: Path, *, host: str = "", port: int = 11112,
                      ssl_context: ssl.SSLContext | None = None) -> ThreadedAssociationServer:
    """Start serving `ae` on (host, port) in background threads; returns the server.

    Temporary files a killed predecessor left beside `inbox` are removed first. Call
    ``server.shutdown()`` to stop.
    """
    inbox = Path(inbox)
    inbox.mkdir(parents=True, exist_ok=True)
    removed = clear_partial(inbox)
    if removed:
        logger.info("removed %d partial file(s) a previous run left beside %s", removed, inbox)
    handlers = [(evt.EVT_C_STORE, handle_store, [inbox]), (evt.EVT_C_ECHO, _handle_echo),
                (evt.EVT_ACCEPTED, _outcome("accepted")), (evt.EVT_REJECTED, _outcome("rejected")),
                (evt.EVT_RELEASED, _outcome("released")), (evt.EVT_ABORTED, _outcome("aborted")),
                (evt.EVT_CONN_CLOSE, _handle_close)]
    return ae.start_server((host, port), block=False, ssl_context=ssl_context, evt_handlers=handlers)
