"""Pull dose reports from an archive's web interface: QIDO-RS search, WADO-RS retrieve (PS3.18).

The same walk as the DIMSE pull (studies in the date range, their SR series, dose-SR
instances), over HTTP with httpx. Instances are requested as
``multipart/related; type="application/dicom"; transfer-syntax=*`` so they arrive as stored.
"""

from __future__ import annotations

import datetime as dt
import logging
from collections.abc import Iterable, Iterator
from pathlib import Path

import httpx

from ..errors import ArchiveError
from ..parsing import DOSE_SR_CLASSES
from .dimse import Instance, PullSummary, date_range
from .inbox import write_atomic

__all__ = ["ACCEPT_DICOM", "find_dose_reports_web", "pull_dicomweb", "split_multipart"]

logger = logging.getLogger("kerma.net")

ACCEPT_DICOM = 'multipart/related; type="application/dicom"; transfer-syntax=*'
_STUDY_UID, _SERIES_UID, _SOP_CLASS, _SOP_UID = "0020000D", "0020000E", "00080016", "00080018"


def _value(item: dict, tag: str) -> str:
    values = item.get(tag, {}).get("Value") or [""]
    return str(values[0]).strip()


def _search(client: httpx.Client, path: str, params: dict[str, str]) -> list[dict]:
    try:
        response = client.get(path, params=params, headers={"Accept": "application/dicom+json"})
    except httpx.HTTPError as exc:
        raise ArchiveError(f"QIDO-RS {client.base_url}{path}: {exc}") from exc
    if response.status_code == 204:
        return []
    if response.status_code != 200:
        raise ArchiveError(f"QIDO-RS {response.url} answered HTTP {response.status_code}")
    return response.json() or []


def find_dose_reports_web(client: httpx.Client, date_from: dt.date, date_to: dt.date,
                          modalities: Iterable[str] = ()) -> tuple[int, list[Instance]]:
    """(studies in range, dose-report instances) by QIDO-RS (PS3.18 10.6)."""
    studies: dict[str, None] = {}
    for modality in list(modalities) or [None]:
        params = {"StudyDate": date_range(date_from, date_to)}
        if modality:
            params["ModalitiesInStudy"] = modality
        for found in _search(client, "/studies", params):
            if uid := _value(found, _STUDY_UID):
                studies.setdefault(uid)
    instances = []
    for study in studies:
        for series in _search(client, f"/studies/{study}/series", {"Modality": "SR"}):
            series_uid = _value(series, _SERIES_UID)
            if not series_uid:
                continue
            for found in _search(client, f"/studies/{study}/series/{series_uid}/instances", {}):
                sop_class, sop_uid = _value(found, _SOP_CLASS), _value(found, _SOP_UID)
                if sop_class in DOSE_SR_CLASSES and sop_uid:
                    instances.append(Instance(study, series_uid, sop_uid, sop_class))
    return len(studies), instances


def split_multipart(body: bytes, content_type: str) -> Iterator[bytes]:
    """The bodies of a ``multipart/related`` response (RFC 2387), in order."""
    import email.message

    header = email.message.Message()
    header["Content-Type"] = content_type
    boundary = header.get_param("boundary")
    if not isinstance(boundary, str) or not boundary:
        raise ArchiveError(f"WADO-RS answer is not multipart (Content-Type: {content_type})")
    delimiter = b"--" + boundary.encode("ascii")
    for part in body.split(delimiter)[1:]:
        if part.startswith(b"--"):
            break  # the close delimiter
        head, sep, payload = part.partition(b"\r\n\r\n")
        if not sep:
            raise ArchiveError("WADO-RS answer has a part without headers")
        yield payload[:-2] if payload.endswith(b"\r\n") else payload


def _retrieve(client: httpx.Client, item: Instance) -> bytes:
    path = (f"/studies/{item.study_instance_uid}/series/{item.series_instance_uid}"
            f"/instances/{item.sop_instance_uid}")
    try:
        response = client.get(path, headers={"Accept": ACCEPT_DICOM})
    except httpx.HTTPError as exc:
        raise ArchiveError(f"WADO-RS {client.base_url}{path}: {exc}") from exc
    if response.status_code != 200:
        raise ArchiveError(f"WADO-RS {response.url} answered HTTP {response.status_code}")
    parts = list(split_multipart(response.content, response.headers.get("content-type", "")))
    if len(parts) != 1:
        raise ArchiveError(f"WADO-RS {response.url}: expected one instance, got {len(parts)} parts")
    return parts[0]


def pull_dicomweb(url: str, *, date_from: dt.date, date_to: dt.date, inbox: Path, have: set[str],
                  modalities: Iterable[str] = (), timeout: float = 60,
                  verify: bool | str = True, auth: tuple[str, str] | None = None) -> PullSummary:
    """Find the dose reports of a date range at DICOMweb root `url` and fetch those not in `have`.

    Parameters
    ----------
    url
        The DICOMweb service root (e.g. ``https://archive:8042/dicom-web``).
    date_from, date_to, inbox, have, modalities
        As for :func:`pipeline.net.dimse.pull_dimse`.
    verify
        TLS verification: True (system store), False, or a CA bundle path.
    auth
        HTTP basic credentials, if the archive asks for them.

    Raises
    ------
    ArchiveError
        The archive cannot be reached or answered an error; what was fetched stays.
    """
    summary = PullSummary()
    # connection-level retries only (a refused or reset connect); HTTP errors are reported
    transport = httpx.HTTPTransport(retries=2, verify=verify)
    with httpx.Client(base_url=url.rstrip("/"), transport=transport, timeout=timeout,
                      auth=auth, follow_redirects=True) as client:
        summary.n_studies, found = find_dose_reports_web(client, date_from, date_to, modalities)
        for item in summary.to_fetch(found, have):
            write_atomic(Path(inbox), item.sop_instance_uid, [_retrieve(client, item)])
            have.add(item.sop_instance_uid)
            summary.n_fetched += 1
    logger.info("pull from %s: studies=%d dose_reports=%d already=%d fetched=%d failed=%d",
                url, summary.n_studies, summary.n_found, summary.n_already, summary.n_fetched,
                summary.n_failed)
    return summary
