"""Pull dose reports from an archive over DIMSE: C-FIND, then C-MOVE (or C-GET) per instance.

The query walks the Study Root information model (PS3.4 C.6.2): studies in the date range,
their SR series, and the instances of those series whose SOP Class is an X-Ray Radiation Dose
SR. What is already in the inbox or the warehouse is not retrieved again, and every object is
written atomically, so an interrupted pull is resumed by running it again.
"""

from __future__ import annotations

import datetime as dt
import logging
import ssl
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

from pydicom.dataset import Dataset
from pynetdicom import AE, build_role, evt
from pynetdicom.sop_class import (StudyRootQueryRetrieveInformationModelFind,
                                  StudyRootQueryRetrieveInformationModelGet,
                                  StudyRootQueryRetrieveInformationModelMove)

from ..errors import ArchiveError
from ..parsing import DOSE_SR_CLASSES
from .inbox import instance_path, is_valid_uid
from .scp import (SR_TRANSFER_SYNTAXES, forget_association, handle_store, make_storage_ae,
                  start_storage_scp)

__all__ = ["Instance", "PullSummary", "close_transport", "date_range", "find_dose_reports",
           "pull_dimse"]

logger = logging.getLogger("kerma.net")

_PENDING = (0xFF00, 0xFF01)


@dataclass(frozen=True, slots=True)
class Instance:
    """One dose report the archive holds."""

    study_instance_uid: str
    series_instance_uid: str
    sop_instance_uid: str
    sop_class_uid: str


@dataclass
class PullSummary:
    """What a pull found and fetched; every instance found is in exactly one count."""

    n_studies: int = 0
    n_found: int = 0
    n_already: int = 0
    n_fetched: int = 0
    failures: list[str] = field(default_factory=list)

    @property
    def n_failed(self) -> int:
        return len(self.failures)

    def to_fetch(self, found: list[Instance], have: set[str]) -> Iterator[Instance]:
        """The instances of `found` still to fetch: those already held and those with an
        invalid UID are counted here and skipped."""
        self.n_found = len(found)
        for item in found:
            if item.sop_instance_uid in have:
                self.n_already += 1
            elif not is_valid_uid(item.sop_instance_uid):
                self.failures.append(f"{item.sop_instance_uid!r}: not a valid UID")
            else:
                yield item


def close_transport(assoc) -> None:
    """Close an association's socket for good.

    pynetdicom 3.0 skips ``close()`` when ``shutdown()`` fails, which it does once the peer
    is gone (refused connection, peer killed), and the socket then leaks until garbage
    collection.
    """
    transport = getattr(assoc.dul, "socket", None)
    raw = getattr(transport, "socket", None)
    if raw is not None:
        raw.close()


def date_range(date_from: dt.date, date_to: dt.date) -> str:
    """A DA range matching value (PS3.4 C.2.2.2.5): ``YYYYMMDD-YYYYMMDD``."""
    if date_to < date_from:
        raise ValueError(f"--to {date_to} is before --from {date_from}")
    return f"{date_from:%Y%m%d}-{date_to:%Y%m%d}"


def _find(assoc, query: Dataset, what: str) -> Iterator[Dataset]:
    for status, identifier in assoc.send_c_find(query, StudyRootQueryRetrieveInformationModelFind):
        if not status:
            raise ArchiveError(f"C-FIND ({what}): the association was aborted or timed out")
        code = int(status.Status)
        if code in _PENDING and identifier is not None:
            yield identifier
        elif code != 0x0000:
            raise ArchiveError(f"C-FIND ({what}) failed with status 0x{code:04X}")


def _text(ds: Dataset, keyword: str) -> str:
    value = ds.get(keyword)
    return str(value).strip() if value is not None else ""


def find_dose_reports(assoc, date_from: dt.date, date_to: dt.date,
                      modalities: Iterable[str] = ()) -> tuple[int, list[Instance]]:
    """(studies in range, dose-report instances) found through an established association.

    Study level: StudyDate in the range (and ModalitiesInStudy, one query per modality when
    given); series level: Modality SR (the X-Ray Radiation Dose SR IOD's series, PS3.3 A.35.8);
    instance level: SOP Class UID, kept when it is a dose SR class.
    """
    studies: dict[str, None] = {}
    for modality in list(modalities) or [None]:
        query = Dataset()
        query.QueryRetrieveLevel = "STUDY"
        query.StudyDate = date_range(date_from, date_to)
        query.StudyInstanceUID = ""
        if modality:
            query.ModalitiesInStudy = modality
        for found in _find(assoc, query, "studies"):
            uid = _text(found, "StudyInstanceUID")
            if uid:
                studies.setdefault(uid)
    instances: list[Instance] = []
    for study in studies:
        query = Dataset()
        query.QueryRetrieveLevel = "SERIES"
        query.StudyInstanceUID = study
        query.SeriesInstanceUID = ""
        query.Modality = "SR"
        series = [_text(s, "SeriesInstanceUID") for s in _find(assoc, query, f"series of {study}")]
        for series_uid in filter(None, series):
            query = Dataset()
            query.QueryRetrieveLevel = "IMAGE"
            query.StudyInstanceUID = study
            query.SeriesInstanceUID = series_uid
            query.SOPInstanceUID = ""
            query.SOPClassUID = ""
            for found in _find(assoc, query, f"instances of {series_uid}"):
                sop_class, sop_uid = _text(found, "SOPClassUID"), _text(found, "SOPInstanceUID")
                if sop_class in DOSE_SR_CLASSES and sop_uid:
                    instances.append(Instance(study, series_uid, sop_uid, sop_class))
    return len(studies), instances


def _retrieve_query(item: Instance) -> Dataset:
    query = Dataset()
    query.QueryRetrieveLevel = "IMAGE"
    query.StudyInstanceUID = item.study_instance_uid
    query.SeriesInstanceUID = item.series_instance_uid
    query.SOPInstanceUID = item.sop_instance_uid
    return query


def _final_status(responses, what: str) -> int:
    code = None
    for status, _identifier in responses:
        if not status:
            raise ArchiveError(f"{what}: the association was aborted or timed out")
        code = int(status.Status)
    if code is None:
        raise ArchiveError(f"{what}: no response")
    return code


def pull_dimse(*, host: str, port: int, archive_ae: str, ae_title: str, our_port: int,
               date_from: dt.date, date_to: dt.date, inbox: Path, have: set[str],
               modalities: Iterable[str] = (), method: str = "move",
               ssl_context: ssl.SSLContext | None = None, timeout: float = 60) -> PullSummary:
    """Find the dose reports of a date range on an archive and fetch those not in `have`.

    Parameters
    ----------
    host, port, archive_ae
        The archive (its Query/Retrieve SCP).
    ae_title, our_port
        Our AE title, and (for C-MOVE) the port of the temporary Storage SCP we start for
        the archive to send to; the archive must know ``ae_title`` at this host and port.
    date_from, date_to
        Study dates, inclusive.
    inbox
        Where fetched objects are written (``<SOP Instance UID>.dcm``, atomically).
    have
        SOP Instance UIDs already held (inbox, archive folder, warehouse): not fetched again.
    method
        ``"move"`` (C-MOVE to our SCP) or ``"get"`` (C-GET on the same association).

    Raises
    ------
    ArchiveError
        The archive refused the association or a query failed; what was fetched stays.
    """
    if method not in ("move", "get"):
        raise ValueError(f"method must be 'move' or 'get', not {method!r}")
    inbox = Path(inbox)
    inbox.mkdir(parents=True, exist_ok=True)
    ae = AE(ae_title=ae_title)
    ae.acse_timeout = ae.dimse_timeout = ae.network_timeout = timeout
    ae.add_requested_context(StudyRootQueryRetrieveInformationModelFind)
    roles, handlers = [], []
    server = None
    if method == "move":
        ae.add_requested_context(StudyRootQueryRetrieveInformationModelMove)
        scp_ae = make_storage_ae(ae_title, allow=[archive_ae])
        server = start_storage_scp(scp_ae, inbox, port=our_port)
    else:
        ae.add_requested_context(StudyRootQueryRetrieveInformationModelGet)
        for sop_class in sorted(DOSE_SR_CLASSES):
            ae.add_requested_context(sop_class, SR_TRANSFER_SYNTAXES)
            roles.append(build_role(sop_class, scp_role=True))
        handlers = [(evt.EVT_C_STORE, handle_store, [inbox])]
    summary = PullSummary()
    try:
        assoc = ae.associate(host, port, ae_title=archive_ae, ext_neg=roles, evt_handlers=handlers,
                             tls_args=(ssl_context, host) if ssl_context else None)
        if not assoc.is_established:
            close_transport(assoc)
            raise ArchiveError(f"archive {archive_ae} at {host}:{port} refused or did not answer "
                               f"the association from {ae_title}")
        try:
            summary.n_studies, found = find_dose_reports(assoc, date_from, date_to, modalities)
            for item in summary.to_fetch(found, have):
                _fetch(assoc, item, method, ae_title)
                if instance_path(inbox, item.sop_instance_uid).exists():
                    summary.n_fetched += 1
                    have.add(item.sop_instance_uid)
                else:
                    summary.failures.append(f"{item.sop_instance_uid}: the archive reported no "
                                            "object stored")
        finally:
            if assoc.is_established:
                assoc.release()
            close_transport(assoc)
            forget_association(assoc)
    finally:
        if server is not None:
            server.shutdown()
    logger.info("pull from %s@%s:%d: studies=%d dose_reports=%d already=%d fetched=%d failed=%d",
                archive_ae, host, port, summary.n_studies, summary.n_found, summary.n_already,
                summary.n_fetched, summary.n_failed)
    return summary


def _fetch(assoc, item: Instance, method: str, ae_title: str) -> None:
    query = _retrieve_query(item)
    if method == "move":
        responses = assoc.send_c_move(query, ae_title, StudyRootQueryRetrieveInformationModelMove)
    else:
        responses = assoc.send_c_get(query, StudyRootQueryRetrieveInformationModelGet)
    code = _final_status(responses, f"C-{method.upper()} {item.sop_instance_uid}")
    if code not in (0x0000, 0xB000):
        logger.warning("C-%s %s ended with status 0x%04X", method.upper(), item.sop_instance_uid, code)
