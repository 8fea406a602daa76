"""Capture completeness: the archive's studies of a period against the warehouse's dose objects.

The archive is searched by QIDO-RS (PS3.18 10.6) or C-FIND (Study Root, PS3.4 C.6.2): studies
by Study Date, then each study's series with their Modality and Station Name (0008,1010). A study counts for every (modality,
station) of its image series (its SR series when it has no image series). Study Instance UIDs
are pseudonymised with the warehouse's key before they are compared or stored, so the
warehouse never holds an identifier; a study "has a dose object" when the warehouse holds any
dose object (dose report, dose screen or dose-bearing image header) of that study key.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Iterable
from dataclasses import dataclass

import httpx

from .dicomweb import _search, _value
from .dimse import date_range

__all__ = ["ArchiveStudy", "CompletenessSummary", "check_completeness", "completeness_rows",
           "find_archive_studies_dimse", "find_archive_studies_web"]

_STUDY_UID, _STUDY_DATE, _MODALITY, _STATION = "0020000D", "00080020", "00080060", "00081010"
NON_IMAGE_MODALITIES = frozenset({"SR", "PR", "KO", "DOC", "REG", "SEG", "OT"})


@dataclass(frozen=True, slots=True)
class ArchiveStudy:
    """One (study, modality, station) the archive holds; the UID never leaves this process."""

    study_uid: str
    study_date: dt.date | None
    modality: str
    station_name: str | None


def _date(text: str) -> dt.date | None:
    try:
        return dt.datetime.strptime(text[:8], "%Y%m%d").date()
    except ValueError:
        return None


def find_archive_studies_web(client: httpx.Client, date_from: dt.date,
                             date_to: dt.date) -> list[ArchiveStudy]:
    """Every (study, modality, station) of the archive's studies dated `date_from`..`date_to`.

    Raises ArchiveError when the archive cannot be reached or answers with an error.
    """
    out: list[ArchiveStudy] = []
    for study in _search(client, "/studies", {"StudyDate": date_range(date_from, date_to)}):
        uid = _value(study, _STUDY_UID)
        if not uid:
            continue
        day = _date(_value(study, _STUDY_DATE))
        series = _search(client, f"/studies/{uid}/series", {"includefield": _STATION})
        out += _study_rows(uid, day, {(_value(s, _MODALITY).upper(), _value(s, _STATION) or None)
                                      for s in series})
    return out


def _study_rows(uid: str, day: dt.date | None, pairs: set) -> list[ArchiveStudy]:
    """One row per (modality, station) of the study's image series, else of all its series."""
    images = {p for p in pairs if p[0] and p[0] not in NON_IMAGE_MODALITIES}
    return [ArchiveStudy(uid, day, modality or "(none)", station)
            for modality, station in sorted(images or pairs, key=lambda p: (p[0], p[1] or ""))]


def find_archive_studies_dimse(*, host: str, port: int, archive_ae: str, ae_title: str,
                               date_from: dt.date, date_to: dt.date, ssl_context=None,
                               timeout: float = 60) -> list[ArchiveStudy]:
    """As :func:`find_archive_studies_web`, by C-FIND (Study Root) on one association.

    Raises ArchiveError when the association is refused or a query fails.
    """
    from pydicom.dataset import Dataset
    from pynetdicom import AE
    from pynetdicom.sop_class import StudyRootQueryRetrieveInformationModelFind

    from ..errors import ArchiveError
    from .dimse import _find, _text, close_transport
    from .scp import forget_association

    ae = AE(ae_title=ae_title)
    ae.acse_timeout = ae.dimse_timeout = ae.network_timeout = timeout
    ae.add_requested_context(StudyRootQueryRetrieveInformationModelFind)
    assoc = ae.associate(host, port, ae_title=archive_ae,
                         tls_args=(ssl_context, host) if ssl_context else None)
    if not assoc.is_established:
        close_transport(assoc)
        raise ArchiveError(f"archive {archive_ae} at {host}:{port} refused or did not answer "
                           f"the association from {ae_title}")
    out: list[ArchiveStudy] = []
    try:
        query = Dataset()
        query.QueryRetrieveLevel = "STUDY"
        query.StudyDate = date_range(date_from, date_to)
        query.StudyInstanceUID = ""
        studies = {_text(s, "StudyInstanceUID"): _date(_text(s, "StudyDate"))
                   for s in _find(assoc, query, "studies")}
        for uid, day in studies.items():
            if not uid:
                continue
            query = Dataset()
            query.QueryRetrieveLevel = "SERIES"
            query.StudyInstanceUID = uid
            query.SeriesInstanceUID = ""
            query.Modality = ""
            query.StationName = ""
            out += _study_rows(uid, day, {(_text(s, "Modality").upper(), _text(s, "StationName") or None)
                                          for s in _find(assoc, query, f"series of {uid}")})
    finally:
        if assoc.is_established:
            assoc.release()
        close_transport(assoc)
        forget_association(assoc)
    return out


def completeness_rows(studies: Iterable[ArchiveStudy], pseudonymise: Callable[[str, str], str],
                      held: set[str], devices: dict[str, str], period: str
                      ) -> tuple[list[dict], list[dict]]:
    """(per modality and station: studies in the archive, with a dose object, share;
    the archive's studies without any dose object). Pure.

    Parameters
    ----------
    studies
        What the archive holds (:func:`find_archive_studies_web`).
    pseudonymise
        The warehouse key's pseudonymiser (``pipeline.pseudonym.make_pseudonymiser``).
    held
        Study keys with at least one dose object in the warehouse.
    devices
        Upper-cased Station Name -> device_key of the warehouse's devices (unique names only).
    period
        Label stored with every row.
    """
    groups: dict[tuple[str, str | None], list[int]] = {}
    missing = []
    for s in studies:
        key = pseudonymise("study", s.study_uid)
        has = key in held
        counts = groups.setdefault((s.modality, s.station_name), [0, 0])
        counts[0] += 1
        counts[1] += has
        if not has:
            missing.append({"period": period, "study_key": key, "study_date": s.study_date,
                            "modality": s.modality, "station_name": s.station_name,
                            "device_key": devices.get((s.station_name or "").strip().upper())})
    rows = [{"period": period, "modality": m, "station_name": st,
             "device_key": devices.get((st or "").strip().upper()),
             "n_archive_studies": n, "n_with_dose_object": k, "share_with_dose_object": k / n}
            for (m, st), (n, k) in sorted(groups.items(), key=lambda g: (g[0][0], g[0][1] or ""))]
    missing.sort(key=lambda r: (r["modality"], r["station_name"] or "", r["study_date"] or dt.date.min,
                                r["study_key"]))
    return rows, missing


@dataclass(frozen=True)
class CompletenessSummary:
    """What one completeness check found (rows as stored)."""

    period: str
    devices: list[dict]
    missing: list[dict]

    @property
    def n_archive_studies(self) -> int:
        return sum(r["n_archive_studies"] for r in self.devices)

    @property
    def n_with_dose_object(self) -> int:
        return sum(r["n_with_dose_object"] for r in self.devices)


def check_completeness(find: Callable[[], list[ArchiveStudy]], warehouse, key: bytes, *,
                       period: str) -> CompletenessSummary:
    """Search the archive with `find`, compare with `warehouse`, store the result.

    `find` is e.g. ``lambda: find_archive_studies_web(client, first, last)`` or
    ``functools.partial(find_archive_studies_dimse, ...)``.

    Writes ``capture_completeness`` and ``capture_missing_studies`` (replaced on each run).

    Raises
    ------
    ArchiveError
        The archive cannot be searched.
    WarehouseError
        The warehouse does not exist or cannot be opened.
    """
    import pyarrow as pa

    from queries import sql

    from ..pseudonym import make_pseudonymiser
    from ..warehouse.connection import connection
    from ..warehouse.load import ensure_schema

    with connection(warehouse, read_only=True):   # refuse a missing warehouse before the search
        pass
    studies = find()
    with connection(warehouse) as con:
        ensure_schema(con)
        held = {r[0] for r in con.execute(sql("select_held_study_keys")).fetchall()}
        devices = dict(con.execute(sql("select_station_devices")).fetchall())
        rows, missing = completeness_rows(studies, make_pseudonymiser(key), held, devices, period)
        for name, data, schema in (
                ("capture_completeness", rows, _COMPLETENESS_SCHEMA),
                ("capture_missing_studies", missing, _MISSING_SCHEMA)):
            con.register(f"incoming_{name}", pa.Table.from_pylist(data, schema=pa.schema(schema)))
            try:
                con.execute(sql(f"create_{name}"))
            finally:
                con.unregister(f"incoming_{name}")
    return CompletenessSummary(period, rows, missing)


_COMPLETENESS_SCHEMA = [("period", "string"), ("modality", "string"), ("station_name", "string"),
                        ("device_key", "string"), ("n_archive_studies", "int64"),
                        ("n_with_dose_object", "int64"), ("share_with_dose_object", "float64")]
_MISSING_SCHEMA = [("period", "string"), ("study_key", "string"), ("study_date", "date32"),
                   ("modality", "string"), ("station_name", "string"), ("device_key", "string")]
