"""Pieces every dose-object parser shares: measured values, patient, study and device."""

from __future__ import annotations

import datetime as dt
import hashlib
import math
from collections.abc import Callable

from pydicom.dataelem import RawDataElement
from pydicom.dataset import Dataset
from pydicom.sr.coding import Code

from .. import concepts as C
from ..models import DeviceInfo, IssueKind, ParseIssue, StudyInfo
from .content_tree import code_value_of, first, num_raw, text_of, uid_of
from ..units import PLAUSIBLE, Quantity, UnitError, convert

__all__ = [
    "Pseudonymiser",
    "Measurer",
    "device_info",
    "header_float",
    "header_text",
    "patient_age_years",
    "study_info",
]

# zero is suspicious per exposure (a CT localizer or an unused plane may truly report 0)
_ZERO_SUSPECT = {"dap_event", "agd"}

Pseudonymiser = Callable[[str, str], str]  # (namespace, identifier) -> key


def header_text(ds: Dataset, keyword: str) -> str | None:
    """A header attribute as stripped text, read without value validation; None if empty."""
    if keyword not in ds:
        return None
    elem = ds.get_item(keyword)
    value = elem.value
    if isinstance(elem, RawDataElement):
        try:
            value = ds[keyword].value
        except Exception:  # noqa: BLE001 - malformed value: fall back to the raw bytes
            value = bytes(elem.value or b"").decode("latin-1")
    if value is None:
        return None
    if isinstance(value, (list, tuple)) or type(value).__name__ == "MultiValue":
        value = "\\".join(str(v) for v in value)
    text = str(value).strip().strip("\x00").strip()
    return text or None


def header_float(ds: Dataset, keyword: str) -> float | None:
    text = header_text(ds, keyword)
    if text is None:
        return None
    try:
        value = float(text.split("\\")[0])
    except ValueError:
        return None
    return value if math.isfinite(value) else None


def _concept_label(concept: Code) -> str:
    return f"{concept.scheme_designator}:{concept.value}"


class Measurer:
    """Reads NUM items of one object, converting units and collecting issues."""

    def __init__(self) -> None:
        self.issues: list[ParseIssue] = []

    def issue(self, kind: IssueKind, detail: str, concept: Code | None = None,
              event_uid: str | None = None, raw_value: str | None = None,
              raw_unit: str | None = None) -> None:
        self.issues.append(ParseIssue(kind, detail, None if concept is None else _concept_label(concept),
                                      event_uid, raw_value, raw_unit))

    def value(self, parent: Dataset | None, concept: Code, quantity: Quantity, *,
              event_uid: str | None = None, plausible: str | None = None,
              is_signed: bool = False) -> float | None:
        """The NUM child `concept` of `parent` in canonical units; None (with an issue) if bad.

        `is_signed`: a negative value is legitimate (table positions, PS3.16 TID 10003C).
        """
        if parent is None:
            return None
        node = first(parent, concept, "NUM")
        if node is None:
            return None
        return self.num(node, concept, quantity, event_uid=event_uid, plausible=plausible,
                        is_signed=is_signed)

    def num(self, node: Dataset, concept: Code, quantity: Quantity, *,
            event_uid: str | None = None, plausible: str | None = None,
            is_signed: bool = False) -> float | None:
        name = concept.meaning
        text, unit, has_value = num_raw(node)
        if text is None:
            qualifier = None
            seq = node.get("MeasuredValueSequence")
            q = node.get("NumericValueQualifierCodeSequence") or (
                seq[0].get("NumericValueQualifierCodeSequence") if seq else None)
            if q:
                qualifier = q[0].get("CodeMeaning")
            self.issue(IssueKind.MISSING_VALUE,
                       f"{name}: no numeric value" + (f" ({qualifier})" if qualifier else ""),
                       concept, event_uid)
            return None
        try:
            value = float(text.replace(",", ".")) if text.count(",") == 1 and "." not in text \
                else float(text)
        except ValueError:
            self.issue(IssueKind.NOT_A_NUMBER, f"{name}: {text!r} is not a number", concept,
                       event_uid, text, unit)
            return None
        if not math.isfinite(value):
            self.issue(IssueKind.NOT_A_NUMBER, f"{name}: {text!r} is not a finite number",
                       concept, event_uid, text, unit)
            return None
        if unit is None:
            self.issue(IssueKind.MISSING_UNIT,
                       f"{name}: value {text} has no Measurement Units Code Sequence; "
                       f"kept as NULL (expected a unit of {quantity.value})",
                       concept, event_uid, text, None)
            return None
        try:
            converted = convert(value, unit, quantity)
        except UnitError as exc:
            self.issue(IssueKind.UNKNOWN_UNIT, f"{name}: {exc}; kept as NULL", concept,
                       event_uid, text, unit)
            return None
        if converted < 0 and not is_signed:
            self.issue(IssueKind.NEGATIVE_VALUE, f"{name}: negative value {text} {unit}",
                       concept, event_uid, text, unit)
            return None
        if converted == 0 and plausible in _ZERO_SUSPECT:
            self.issue(IssueKind.ZERO_VALUE,
                       f"{name}: reported as exactly 0 {unit}; kept, but an exposure with no "
                       "dose suggests a meter or transfer fault", concept, event_uid, text, unit)
        if plausible is not None:
            low, high = PLAUSIBLE[plausible]
            if not low <= converted <= high:
                self.issue(IssueKind.IMPLAUSIBLE_VALUE,
                           f"{name}: {text} {unit} = {converted:g} {quantity.value} is outside "
                           f"the plausible range {low:g}-{high:g} {quantity.value}; kept as NULL",
                           concept, event_uid, text, unit)
                return None
        return converted


def _stable_key(prefix: str, *parts: str | None) -> str:
    digest = hashlib.sha256("\x1f".join(p or "" for p in parts).encode("utf-8")).hexdigest()
    return f"{prefix}{digest[:16]}"


def _norm(text: str | None) -> str:
    return " ".join((text or "").lower().split())


def _observer(ds: Dataset) -> dict[str, str | None]:
    def text(code):
        return text_of(first(ds, code))
    return {
        "uid": uid_of(first(ds, C.DEVICE_OBSERVER_UID)),
        "name": text(C.DEVICE_OBSERVER_NAME),
        "manufacturer": text(C.DEVICE_OBSERVER_MANUFACTURER),
        "model": text(C.DEVICE_OBSERVER_MODEL_NAME),
        "serial": text(C.DEVICE_OBSERVER_SERIAL_NUMBER),
        "location": text(C.DEVICE_OBSERVER_PHYSICAL_LOCATION),
    }


def device_info(ds: Dataset, modality: str, *, from_tree: bool) -> tuple[DeviceInfo, bool]:
    """The irradiating device (TID 1004 observer if present, else the equipment module).

    Returns (device, has_observer_context). The device key is derived from the Device
    Observer UID when present, else from manufacturer, model, serial and station name.
    """
    obs = _observer(ds) if from_tree else dict.fromkeys(
        ("uid", "name", "manufacturer", "model", "serial", "location"))
    station = header_text(ds, "StationName")
    manufacturer = obs["manufacturer"] or header_text(ds, "Manufacturer")
    model = obs["model"] or header_text(ds, "ManufacturerModelName")
    serial = obs["serial"] or header_text(ds, "DeviceSerialNumber")
    has_observer = obs["uid"] is not None
    # Key on what names the physical unit in both dose reports and image headers: maker, model
    # and serial number; else the Device Observer UID; else the equipment module as a whole.
    if serial:
        key = _stable_key("dev-", "serial", _norm(manufacturer), _norm(model), _norm(serial))
    elif has_observer:
        key = _stable_key("dev-", "observer", obs["uid"])
    else:
        key = _stable_key("dev-", "equipment", _norm(manufacturer), _norm(model), _norm(station),
                          _norm(header_text(ds, "InstitutionName")))
    return DeviceInfo(
        device_key=key,
        modality=modality,
        device_observer_uid=obs["uid"],
        observer_name=obs["name"],
        manufacturer=manufacturer,
        model=model,
        serial_number=serial,
        physical_location=obs["location"],
        station_name=station or obs["name"],
        institution_name=header_text(ds, "InstitutionName"),
        department_name=header_text(ds, "InstitutionalDepartmentName"),
        header_manufacturer=header_text(ds, "Manufacturer"),
        header_model=header_text(ds, "ManufacturerModelName"),
        header_serial_number=header_text(ds, "DeviceSerialNumber"),
        software_versions=header_text(ds, "SoftwareVersions"),
    ), has_observer


def _da(text: str | None) -> dt.date | None:
    if not text or len(text) < 8:
        return None
    try:
        return dt.datetime.strptime(text[:8], "%Y%m%d").date()
    except ValueError:
        return None


def _tm(text: str | None) -> dt.time | None:
    if not text:
        return None
    digits = text.split(".")[0].replace(":", "")
    try:
        h = int(digits[0:2])
        m = int(digits[2:4]) if len(digits) >= 4 else 0
        s = int(digits[4:6]) if len(digits) >= 6 else 0
        return dt.time(h, m, min(s, 59))
    except ValueError:
        return None


def patient_age_years(age: str | None, birth: dt.date | None, on: dt.date | None) -> float | None:
    """Age at the study in years: from birth date and study date when both exist, else from
    Patient's Age (AS, PS3.5: nnnD/W/M/Y). '000Y' without a birth date is ambiguous (unknown
    or under one year) and gives None."""
    if birth is not None and on is not None and birth <= on:
        return round((on - birth).days / 365.25, 2)
    if not age or len(age) != 4 or not age[:3].isdigit():
        return None
    n, unit = int(age[:3]), age[3].upper()
    if unit == "Y":
        return None if n == 0 else float(n)
    per_year = {"M": 12.0, "W": 52.1775, "D": 365.25}.get(unit)
    return None if per_year is None else round(n / per_year, 3)


def study_info(ds: Dataset, pseudonymise: Pseudonymiser, measurer: Measurer) -> StudyInfo:
    """Study and patient attributes; identifiers become keyed pseudonyms here."""
    study_uid = header_text(ds, "StudyInstanceUID")
    if study_uid is None:
        from ..errors import MalformedReportError
        raise MalformedReportError("object has no Study Instance UID (0020,000D)",
                                   reason="no_study_uid")
    patient_id = header_text(ds, "PatientID")
    issuer = header_text(ds, "IssuerOfPatientID") or ""
    patient_key = pseudonymise("patient", f"{issuer}\x1f{patient_id}") if patient_id else None
    study_date = _da(header_text(ds, "StudyDate"))
    birth = _da(header_text(ds, "PatientBirthDate"))
    sex = header_text(ds, "PatientSex")
    sex = sex.upper() if sex and sex.upper() in ("F", "M", "O") else None
    weight = header_float(ds, "PatientWeight")
    if weight is not None and not 0.2 < weight < 500:
        if weight != 0:
            measurer.issue(IssueKind.IMPLAUSIBLE_VALUE,
                           f"Patient's Weight {weight:g} kg is implausible; kept as NULL")
        weight = None
    height = header_float(ds, "PatientSize")
    if height is not None and not 0.2 < height < 2.6:
        if height != 0:
            measurer.issue(IssueKind.IMPLAUSIBLE_VALUE,
                           f"Patient's Size {height:g} is not a height in metres (PS3.3 C.7.2.2); "
                           "kept as NULL")
        height = None
    code, meaning = None, None
    procedures = ds.get("ProcedureCodeSequence")
    if procedures:
        item = procedures[0]
        if item.get("CodeValue"):
            code = f"{item.get('CodingSchemeDesignator', '')}:{item.CodeValue}"
            meaning = item.get("CodeMeaning")
    return StudyInfo(
        study_key=pseudonymise("study", study_uid),
        patient_key=patient_key,
        study_date=study_date,
        study_time=_tm(header_text(ds, "StudyTime")),
        study_description=header_text(ds, "StudyDescription"),
        procedure_code=code,
        procedure_meaning=str(meaning) if meaning else None,
        patient_age_years=patient_age_years(header_text(ds, "PatientAge"), birth, study_date),
        patient_sex=sex,
        patient_weight_kg=weight,
        patient_height_m=height,
    )


def code_label(item: Dataset | None) -> tuple[str | None, str | None]:
    """(meaning, 'scheme:value') of a CODE item's value."""
    found = code_value_of(item)
    if found is None:
        return None, None
    (scheme, value), meaning = found
    return meaning or None, f"{scheme}:{value}"


def content_datetime(ds: Dataset) -> dt.datetime | None:
    d = _da(header_text(ds, "ContentDate"))
    t = _tm(header_text(ds, "ContentTime"))
    if d is None:
        return None
    return dt.datetime.combine(d, t or dt.time(0, 0))
