"""CT dose screens: the Exposure Dose Sequence of a scanner without dose reports. Pure.

Some CT scanners send no dose report but an image object, often Secondary Capture, whose
header carries the dose in the Radiation Dose attributes of the old PS3.3 C.4.16 (retired from
the current standard; older scanners still send them):

* (0040,030E) Exposure Dose Sequence: one item per exposure (irradiation event), with
  (0018,9345) CTDIvol in mGy, (0018,0060) KVP in kV, (0018,1150) Exposure Time in ms,
  (0018,8151) X-Ray Tube Current in uA or (0018,1151) in mA, (0018,9302) Acquisition Type,
  (0018,9346) CTDI Phantom Type Code Sequence and (0040,0310) Comments on Radiation Dose.
* (0040,0301) Total Number of Exposures; (0040,0310) Comments on Radiation Dose (free text).

The free text is where such screens put the DLP. Its common forms are ``key=value`` or
``key: value`` pairs separated by ``;``, ``,`` or new lines, with an optional unit after the
number (``DLP=123.4``, ``TotalDLP = 456.7 mGy*cm``, ``Total DLP: 456.7``). A DLP without a
unit is taken as mGy.cm, the unit every CT console shows (common practice, no source); an
unrecognised unit leaves the value NULL with an issue, never scaled by guess. Text that names
no known quantity is kept in the issue detail, so nothing is lost.

A dose screen that holds its numbers only as burned-in pixels is recognised by its
description (``looks_like_dose_screen``) and recorded as not a dose object with reason
``dose_screen_pixels_only``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from pydicom.dataset import Dataset

from ..models import Accumulated, CtEvent, IssueKind
from .common import Measurer, header_float, header_text
from .headers import _ACQ, _checked, _phantom, _started

__all__ = ["DoseText", "has_exposure_dose", "looks_like_dose_screen", "parse_dose_screen",
           "parse_dose_text"]

# normalised key (lower case, letters and digits only) -> quantity
_KEYS = {
    "totaldlp": "dlp_total", "dlptotal": "dlp_total", "accumulateddlp": "dlp_total",
    "examdlp": "dlp_total", "studydlp": "dlp_total", "cumulativedlp": "dlp_total",
    "sumdlp": "dlp_total", "dlpsum": "dlp_total", "totaldoselengthproduct": "dlp_total",
    "dlp": "dlp", "doselengthproduct": "dlp", "eventdlp": "dlp",
    "ctdivol": "ctdivol", "meanctdivol": "ctdivol", "ctdi": "ctdivol", "ctdiv": "ctdivol",
}
# identifiers and labels that may stand beside the numbers without being a quantity
_LABELS = {"event", "series", "scan", "acquisition", "exposure", "no", "number", "nr", "id",
           "phantom", "type", "mode", "kv", "kvp", "ma", "mas", "time", "s", "protocol"}
# normalised unit -> factor to mGy.cm (DLP) or mGy (CTDIvol)
_DLP_UNITS = {"": 1.0, "mgycm": 1.0, "mgyxcm": 1.0, "dgycm": 100.0, "cgycm": 10.0,
              "gycm": 1000.0, "mgym": 100.0, "ugym": 0.1}
_DOSE_UNITS = {"": 1.0, "mgy": 1.0, "ugy": 1e-3, "cgy": 10.0, "dgy": 100.0, "gy": 1000.0}
_PAIR = re.compile(
    r"(?P<key>[A-Za-z][A-Za-z _.\-]*?)\s*(?:\((?P<kunit>[^)]*)\))?\s*[=:]\s*"
    r"(?P<value>[-+]?\d+(?:[.,]\d+)?(?:[eE][-+]?\d+)?)"
    r"(?:[ \t]*(?P<unit>[A-Za-z\u00b5\u03bc][A-Za-z0-9*.\u00b7\u22c5\u00b5\u03bc/\-]*+"
    r"(?:[ \t]?[*\u00b7\u22c5x]?[ \t]?c?m\b)?)(?![ \t]*[=:(]))?")
_SCREEN_WORDS = re.compile(r"\bdose\b|dose\s*(report|info|summary|screen)|patient\s*protocol|"
                           r"radiation\s*(dose|report)|exposure\s*(report|summary)", re.I)
_SECONDARY_CAPTURE = "1.2.840.10008.5.1.4.1.1.7"


def _norm(text: str) -> str:
    return re.sub(r"[^a-z0-9]", "", text.lower().replace("\u00b5", "u").replace("\u03bc", "u"))


@dataclass
class DoseText:
    """What one Comments on Radiation Dose text says, in canonical units."""

    dlp_total_mgy_cm: float | None = None
    dlp_mgy_cm: float | None = None
    ctdivol_mgy: float | None = None
    problems: list[str] = field(default_factory=list)
    understood: bool = False


def parse_dose_text(text: str | None) -> DoseText:
    """Read the ``key=value [unit]`` pairs of a Comments on Radiation Dose (0040,0310) text.

    Returns
    -------
    DoseText
        ``understood`` is False when the text names no known quantity; ``problems`` lists
        values left out (unknown unit, not finite, negative).
    """
    out = DoseText()
    if not text:
        return out
    for match in _PAIR.finditer(text):
        key = _norm(match["key"])
        quantity = _KEYS.get(key)
        if quantity is None:
            # "Event=1 DLP=12": the key may carry a leading label word
            for known in sorted(_KEYS, key=len, reverse=True):
                if key.endswith(known):
                    quantity = _KEYS[known]
                    break
        if quantity is None:
            continue
        raw = match["value"].replace(",", ".")
        unit = _norm(match["kunit"] or match["unit"] or "")
        units = _DOSE_UNITS if quantity == "ctdivol" else _DLP_UNITS
        factor = units.get(unit)
        if factor is None:
            out.problems.append(f"{match.group(0).strip()!r}: unit {unit!r} not recognised")
            out.understood = True
            continue
        value = float(raw) * factor
        if not math.isfinite(value) or value < 0:
            out.problems.append(f"{match.group(0).strip()!r}: not a dose")
            continue
        out.understood = True
        name = {"dlp_total": "dlp_total_mgy_cm", "dlp": "dlp_mgy_cm", "ctdivol": "ctdivol_mgy"}[quantity]
        if getattr(out, name) is None:
            setattr(out, name, value)
    return out


def has_exposure_dose(ds: Dataset) -> bool:
    """An Exposure Dose Sequence (0040,030E) with at least one item carrying CTDIvol."""
    return any(header_text(item, "CTDIvol") is not None
               for item in ds.get("ExposureDoseSequence") or [])


def looks_like_dose_screen(ds: Dataset, sop_class: str) -> bool:
    """A secondary-capture or derived CT image whose description says it shows dose (the
    numbers are in its pixels only): Series Description, Protocol Name, Image Comments or
    Derivation Description mention dose, or Image Type says SCREEN SAVE on a CT."""
    secondary = sop_class.startswith(_SECONDARY_CAPTURE)
    image_type = (header_text(ds, "ImageType") or "").upper()
    modality = (header_text(ds, "Modality") or "").upper()
    if not (secondary or "SECONDARY" in image_type or "SCREEN SAVE" in image_type):
        return False
    texts = [header_text(ds, k) or "" for k in ("SeriesDescription", "ProtocolName",
                                               "ImageComments", "DerivationDescription")]
    if any(_SCREEN_WORDS.search(t) for t in texts):
        return True
    return "SCREEN SAVE" in image_type and modality == "CT"


def _text_issue(m: Measurer, where: str, text: str, parsed: DoseText, uid: str | None) -> None:
    if not parsed.understood and re.search(r"\d", text):
        m.issue(IssueKind.UNPARSED_DOSE_TEXT,
                f"{where} Comments on Radiation Dose (0040,0310) names no quantity this "
                f"reader knows; text kept here: {text[:500]!r}", event_uid=uid, raw_value=text[:500])
    for problem in parsed.problems:
        m.issue(IssueKind.UNKNOWN_UNIT,
                f"{where} Comments on Radiation Dose (0040,0310): {problem}; kept as NULL "
                f"(text: {text[:300]!r})", event_uid=uid, raw_value=text[:300])


def parse_dose_screen(ds: Dataset, sop_uid: str, m: Measurer) -> tuple[list[CtEvent], list[Accumulated]]:
    """Events (one per Exposure Dose Sequence item) and the stated totals of a CT dose screen.

    Event UIDs: an item's Irradiation Event UID if present, else ``<SOP Instance UID>.doseN``
    (so the same screen sent twice is one set of events).
    """
    events: list[CtEvent] = []
    for n, item in enumerate(ds.get("ExposureDoseSequence") or [], start=1):
        uid = header_text(item, "IrradiationEventUID") or f"{sop_uid}.dose{n}"
        text = header_text(item, "CommentsOnRadiationDose") or ""
        said = parse_dose_text(text)
        _text_issue(m, f"Exposure Dose Sequence item {n}:", text, said, uid)
        ctdivol = header_float(item, "CTDIvol")
        if ctdivol is None:
            ctdivol = said.ctdivol_mgy
        time_ms = header_float(item, "ExposureTime")
        ua = header_float(item, "XRayTubeCurrentInuA")
        ma = ua / 1000.0 if ua is not None else header_float(item, "XRayTubeCurrent")
        acq = (header_text(item, "AcquisitionType") or "").upper()
        options = (header_text(item, "ScanOptions") or "").upper()
        if not acq:
            acq = "SPIRAL" if ("HELICAL" in options or "SPIRAL" in options) else \
                "SEQUENCED" if "AXIAL" in options else \
                "CONSTANT_ANGLE" if ("SCOUT" in options or "SURVIEW" in options) else ""
        events.append(CtEvent(
            event_uid=uid,
            sop_instance_uid=sop_uid,
            source_kind="dose_screen",
            acquisition_protocol=header_text(item, "AcquisitionProtocolName")
            or header_text(ds, "ProtocolName"),
            ct_acquisition_type=_ACQ.get(acq),
            started_at=_started(ds),
            exposure_time_s=None if time_ms is None else time_ms / 1000.0,
            kvp=header_float(item, "KVP"),
            tube_current_ma=ma,
            ctdivol_mgy=_checked(m, ctdivol, "CTDIvol (0018,9345)", uid, 3000.0),
            ctdi_phantom=_phantom(item),
            dlp_mgy_cm=_checked(m, said.dlp_mgy_cm, "DLP (Comments on Radiation Dose)", uid, 1e5),
        ))
    text = header_text(ds, "CommentsOnRadiationDose") or ""
    said = parse_dose_text(text)
    _text_issue(m, "Object", text, said, None)
    total = said.dlp_total_mgy_cm if said.dlp_total_mgy_cm is not None else said.dlp_mgy_cm
    accumulated = [Accumulated(
        sop_instance_uid=sop_uid,
        plane="ct",
        dlp_total_mgy_cm=_checked(m, total, "total DLP (Comments on Radiation Dose)",
                                  f"{sop_uid}.total", 1e5),
        events_reported=header_float(ds, "TotalNumberOfExposures"),
    )]
    return events, accumulated
