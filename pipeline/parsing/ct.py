"""CT Radiation Dose (PS3.16 TID 10011, 10012, 10013, 10014, 10015) -> records. Pure."""

from __future__ import annotations

from pydicom.dataset import Dataset

from .. import concepts as C
from ..models import Accumulated, CtEvent, IssueKind
from .common import Measurer, code_label
from .content_tree import (code_value_of, datetime_of, find, find_all, first, num_raw, text_of,
                           uid_of)
from ..units import Quantity, UnitError, convert

__all__ = ["parse_ct_accumulated", "parse_ct_events"]

_ACQ_TYPE = {
    ("SCT", "116152004"): "spiral",
    ("DCM", "113804"): "sequenced",
    ("DCM", "113805"): "constant_angle",
    ("DCM", "113806"): "stationary",
    ("DCM", "113807"): "free",
    ("SCT", "702569007"): "cone_beam",
}
_PHANTOM = {
    ("DCM", "113690"): "head_16cm",
    ("DCM", "113691"): "body_32cm",
    ("DCM", "130541"): "other",
    ("DCM", "113692"): "other",
}


def parse_ct_accumulated(root: Dataset, sop_uid: str, m: Measurer) -> list[Accumulated]:
    """TID 10012 CT Accumulated Dose Data."""
    node = first(root, C.CT_ACCUMULATED_DOSE_DATA, "CONTAINER")
    if node is None:
        return []
    return [Accumulated(
        sop_instance_uid=sop_uid,
        plane="ct",
        dlp_total_mgy_cm=m.value(node, C.CT_DLP_TOTAL, Quantity.DLP, plausible="dlp_total"),
        events_reported=m.value(node, C.TOTAL_NUMBER_OF_IRRADIATION_EVENTS, Quantity.COUNT),
    )]


def _source_values(params: Dataset, uid: str, m: Measurer) -> list[dict]:
    out = []
    for src in find(params, C.CT_XRAY_SOURCE_PARAMETERS, "CONTAINER"):
        out.append({
            "id": text_of(first(src, C.IDENTIFICATION_OF_XRAY_SOURCE)),
            "kvp": m.value(src, C.KVP, Quantity.VOLTAGE, event_uid=uid, plausible="kvp"),
            "ma": m.value(src, C.XRAY_TUBE_CURRENT, Quantity.CURRENT, event_uid=uid),
            "max_ma": m.value(src, C.MAXIMUM_XRAY_TUBE_CURRENT, Quantity.CURRENT, event_uid=uid),
            "rotation": m.value(src, C.EXPOSURE_TIME_PER_ROTATION, Quantity.TIME, event_uid=uid),
        })
    return out


def _scanning_length(params: Dataset, uid: str, m: Measurer) -> float | None:
    """Scanning Length (113825): a direct NUM in old files, or inside TID 10014 rows."""
    direct = m.value(params, C.SCANNING_LENGTH, Quantity.LENGTH, event_uid=uid)
    if direct is not None:
        return direct
    for node in find_all(params, C.SCANNING_LENGTH, "NUM"):
        return m.num(node, C.SCANNING_LENGTH, Quantity.LENGTH, event_uid=uid)
    return None


def _z_location(params: Dataset, concept, uid: str, m: Measurer) -> float | None:
    """A TID 10014 z location (mm, may be negative: a table position, not a length)."""
    for node in find_all(params, concept, "NUM"):
        text, unit, _ = num_raw(node)
        if text is None:
            return None
        try:
            value = float(text)
        except ValueError:
            m.issue(IssueKind.NOT_A_NUMBER, f"{concept.meaning}: {text!r} is not a number",
                    concept, uid, text, unit)
            return None
        if unit is None:
            m.issue(IssueKind.MISSING_UNIT, f"{concept.meaning}: value {text} has no unit; "
                    "kept as NULL", concept, uid, text, None)
            return None
        try:
            return convert(value, unit, Quantity.LENGTH)
        except UnitError as exc:
            m.issue(IssueKind.UNKNOWN_UNIT, f"{concept.meaning}: {exc}; kept as NULL", concept,
                    uid, text, unit)
            return None
    return None


def _dose_check(event: Dataset, uid: str, m: Measurer) -> dict[str, float | None]:
    out = {}
    for container, dlp, ctdi, prefix in (
            (C.DOSE_CHECK_ALERT_DETAILS, C.DLP_ALERT_VALUE, C.CTDIVOL_ALERT_VALUE, "alert"),
            (C.DOSE_CHECK_NOTIFICATION_DETAILS, C.DLP_NOTIFICATION_VALUE,
             C.CTDIVOL_NOTIFICATION_VALUE, "notification")):
        node = next(iter(find_all(event, container, "CONTAINER")), None)
        out[f"dose_check_{prefix}_dlp_mgy_cm"] = m.value(node, dlp, Quantity.DLP, event_uid=uid)
        out[f"dose_check_{prefix}_ctdivol_mgy"] = m.value(node, ctdi, Quantity.AIR_KERMA, event_uid=uid)
    return out


def parse_ct_events(root: Dataset, sop_uid: str, m: Measurer) -> list[CtEvent]:
    """Every TID 10013 CT Acquisition under the root, in document order."""
    events = []
    for n, node in enumerate(find(root, C.CT_ACQUISITION, "CONTAINER")):
        uid = uid_of(first(node, C.IRRADIATION_EVENT_UID))
        if uid is None:
            uid = f"{sop_uid}.ct{n + 1}"
            m.issue(IssueKind.MISSING_EVENT_UID,
                    f"CT Acquisition #{n + 1} has no Irradiation Event UID (DCM 113769); keyed "
                    "by report and position, so it cannot be matched across reports",
                    C.IRRADIATION_EVENT_UID, uid)
        params = first(node, C.CT_ACQUISITION_PARAMETERS, "CONTAINER")
        dose = first(node, C.CT_DOSE, "CONTAINER")
        acq = code_value_of(first(node, C.CT_ACQUISITION_TYPE))
        target, target_code = code_label(first(node, C.TARGET_REGION))
        phantom = code_value_of(first(dose, C.CTDIW_PHANTOM_TYPE)) if dose is not None else None
        sources = _source_values(params, uid, m) if params is not None else []
        a = sources[0] if sources else {}
        b = sources[1] if len(sources) > 1 else {}
        n_sources = m.value(params, C.NUMBER_OF_XRAY_SOURCES, Quantity.COUNT, event_uid=uid,
                            plausible="xray_sources")
        ssde = next(iter(find_all(node, C.SIZE_SPECIFIC_DOSE_ESTIMATE, "NUM")), None)
        wed = next(iter(find_all(node, C.WATER_EQUIVALENT_DIAMETER, "NUM")), None)
        events.append(CtEvent(
            event_uid=uid,
            sop_instance_uid=sop_uid,
            source_kind="rdsr",
            acquisition_protocol=text_of(first(node, C.ACQUISITION_PROTOCOL)),
            target_region=target,
            target_region_code=target_code,
            ct_acquisition_type=_ACQ_TYPE.get(acq[0], "other") if acq else None,
            started_at=datetime_of(first(node, C.DATETIME_STARTED)),
            exposure_time_s=m.value(params, C.EXPOSURE_TIME, Quantity.TIME, event_uid=uid, plausible="time"),
            scanning_length_mm=_scanning_length(params, uid, m) if params is not None else None,
            top_z_scanning_length_mm=_z_location(params, C.TOP_Z_SCANNING_LENGTH, uid, m)
            if params is not None else None,
            bottom_z_scanning_length_mm=_z_location(params, C.BOTTOM_Z_SCANNING_LENGTH, uid, m)
            if params is not None else None,
            nominal_single_collimation_mm=m.value(params, C.NOMINAL_SINGLE_COLLIMATION_WIDTH, Quantity.LENGTH, event_uid=uid),
            nominal_total_collimation_mm=m.value(params, C.NOMINAL_TOTAL_COLLIMATION_WIDTH, Quantity.LENGTH, event_uid=uid),
            pitch_factor=m.value(params, C.PITCH_FACTOR, Quantity.COUNT, event_uid=uid),
            number_of_sources=int(n_sources) if n_sources is not None else (len(sources) or None),
            kvp=a.get("kvp"),
            tube_current_ma=a.get("ma"),
            max_tube_current_ma=a.get("max_ma"),
            exposure_time_per_rotation_s=a.get("rotation"),
            kvp_source_b=b.get("kvp"),
            tube_current_ma_source_b=b.get("ma"),
            ctdivol_mgy=m.value(dose, C.MEAN_CTDIVOL, Quantity.AIR_KERMA, event_uid=uid, plausible="ctdivol"),
            ctdi_phantom=_PHANTOM.get(phantom[0], "other") if phantom else None,
            dlp_mgy_cm=m.value(dose, C.DLP, Quantity.DLP, event_uid=uid, plausible="dlp_event"),
            ssde_mgy=None if ssde is None else m.num(ssde, C.SIZE_SPECIFIC_DOSE_ESTIMATE, Quantity.AIR_KERMA, event_uid=uid),
            water_equivalent_diameter_mm=None if wed is None else m.num(wed, C.WATER_EQUIVALENT_DIAMETER, Quantity.LENGTH, event_uid=uid),
            **_dose_check(node, uid, m),
        ))
    return events
