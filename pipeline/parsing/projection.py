"""Projection X-Ray Radiation Dose (PS3.16 TID 10001-10007, 10003A/B/C) -> records. Pure."""

from __future__ import annotations

from pydicom.dataset import Dataset

from .. import concepts as C
from ..models import Accumulated, IssueKind, ProjectionEvent
from .common import Measurer, code_label
from .content_tree import (code_value_of, datetime_of, find, find_all, first, num_raw, text_of,
                           uid_of)
from ..units import Quantity

__all__ = ["parse_projection_accumulated", "parse_projection_events", "projection_modality"]

_PLANE = {("DCM", "113622"): "single", ("DCM", "113620"): "A", ("DCM", "113621"): "B",
          ("DCM", "113890"): "all"}
_EVENT_TYPE = {("SCT", "44491008"): "fluoroscopy", ("DCM", "113611"): "stationary",
               ("DCM", "113612"): "stepping", ("DCM", "113613"): "rotational"}
_SIDE = {("SCT", "7771000"): "L", ("SCT", "24028007"): "R", ("SCT", "51440002"): "B"}
# patient position terms by code (PS3.16 CID 19 / 20 / 21); other codes keep their meaning
_POSITION = {(c.scheme_designator, c.value): c.meaning for c in (
    C.RECUMBENT, C.SEMI_ERECT, C.SUPINE, C.PRONE, C.LEFT_LATERAL_DECUBITUS,
    C.RIGHT_LATERAL_DECUBITUS, C.HEADFIRST, C.FEET_FIRST)}


def _plane(node: Dataset) -> str | None:
    found = code_value_of(first(node, C.ACQUISITION_PLANE))
    return _PLANE.get(found[0], "other") if found else None


def _meaning(node: Dataset | None, code) -> str | None:
    meaning, _ = code_label(first(node, code)) if node is not None else (None, None)
    return meaning


def _position(item: Dataset | None) -> str | None:
    """A CID 19/20/21 code as a term: known codes by code, others by their meaning, lower case."""
    found = code_value_of(item)
    if found is None:
        return None
    key, meaning = found
    return _POSITION.get(key) or (meaning.strip().lower() or f"{key[0]}:{key[1]}")


def _rp_definition(node: Dataset) -> str | None:
    item = first(node, C.REFERENCE_POINT_DEFINITION)
    if item is None:
        return None
    return text_of(item) if item.get("ValueType") == "TEXT" else code_label(item)[0]


def parse_projection_accumulated(root: Dataset, sop_uid: str, m: Measurer) -> list[Accumulated]:
    """One record per TID 10002 Accumulated X-Ray Dose Data container (one per plane)."""
    out = []
    for node in find(root, C.ACCUMULATED_XRAY_DOSE_DATA, "CONTAINER"):
        agd = {"L": None, "R": None}
        for item in find(node, C.ACCUMULATED_AVERAGE_GLANDULAR_DOSE, "NUM"):
            side = code_value_of(first(item, C.LATERALITY))
            value = m.num(item, C.ACCUMULATED_AVERAGE_GLANDULAR_DOSE, Quantity.AIR_KERMA)
            key = _SIDE.get(side[0]) if side else None
            if key in agd:
                agd[key] = value
        cal = first(node, C.CALIBRATION, "CONTAINER")
        out.append(Accumulated(
            sop_instance_uid=sop_uid,
            plane=_plane(node) or "single",
            dap_total_gy_cm2=m.value(node, C.DOSE_AREA_PRODUCT_TOTAL, Quantity.DAP, plausible="dap_total"),
            dose_rp_total_mgy=m.value(node, C.DOSE_RP_TOTAL, Quantity.AIR_KERMA, plausible="dose_rp_total"),
            fluoro_dap_total_gy_cm2=m.value(node, C.FLUORO_DOSE_AREA_PRODUCT_TOTAL, Quantity.DAP, plausible="dap_total"),
            fluoro_dose_rp_total_mgy=m.value(node, C.FLUORO_DOSE_RP_TOTAL, Quantity.AIR_KERMA, plausible="dose_rp_total"),
            fluoro_time_total_s=m.value(node, C.TOTAL_FLUORO_TIME, Quantity.TIME, plausible="time"),
            acquisition_dap_total_gy_cm2=m.value(node, C.ACQUISITION_DOSE_AREA_PRODUCT_TOTAL, Quantity.DAP, plausible="dap_total"),
            acquisition_dose_rp_total_mgy=m.value(node, C.ACQUISITION_DOSE_RP_TOTAL, Quantity.AIR_KERMA, plausible="dose_rp_total"),
            acquisition_time_total_s=m.value(node, C.TOTAL_ACQUISITION_TIME, Quantity.TIME, plausible="time"),
            radiographic_frames=m.value(node, C.TOTAL_NUMBER_OF_RADIOGRAPHIC_FRAMES, Quantity.COUNT),
            reference_point_definition=_rp_definition(node),
            calibration_factor=m.value(cal, C.CALIBRATION_FACTOR, Quantity.COUNT),
            calibration_uncertainty_pct=m.value(cal, C.CALIBRATION_UNCERTAINTY, Quantity.PERCENT),
            calibration_datetime=datetime_of(first(cal, C.CALIBRATION_DATETIME)) if cal is not None else None,
            agd_left_mgy=agd["L"],
            agd_right_mgy=agd["R"],
        ))
    return out


def _filter(node: Dataset, uid: str, m: Measurer) -> tuple[str | None, float | None]:
    filters = first(node, C.XRAY_FILTERS, "CONTAINER")
    if filters is None:
        return None, None
    material = _meaning(filters, C.XRAY_FILTER_MATERIAL)
    thickness = m.value(filters, C.XRAY_FILTER_THICKNESS_MAXIMUM, Quantity.LENGTH, event_uid=uid)
    if thickness is None:
        thickness = m.value(filters, C.XRAY_FILTER_THICKNESS_MINIMUM, Quantity.LENGTH, event_uid=uid)
    return material, thickness


def _area_from_sides(node: Dataset, uid: str, m: Measurer) -> float | None:
    """Collimated Field Height x Width (DCM 113788 x 113789) when no area is reported, in cm2."""
    height = m.value(node, C.COLLIMATED_FIELD_HEIGHT, Quantity.LENGTH, event_uid=uid)
    width = m.value(node, C.COLLIMATED_FIELD_WIDTH, Quantity.LENGTH, event_uid=uid)
    if height is None or width is None:
        return None
    return height * width / 100.0        # mm2 -> cm2


def parse_projection_events(root: Dataset, sop_uid: str, m: Measurer) -> list[ProjectionEvent]:
    """Every TID 10003 Irradiation Event X-Ray Data container, in document order."""
    events = []
    # an event without its own Reference Point Definition takes its plane's (TID 10002)
    report_rp = {_plane(a) or "single": _rp_definition(a)
                 for a in find(root, C.ACCUMULATED_XRAY_DOSE_DATA, "CONTAINER")}
    for n, node in enumerate(find(root, C.IRRADIATION_EVENT_XRAY_DATA, "CONTAINER")):
        uid = uid_of(first(node, C.IRRADIATION_EVENT_UID))
        if uid is None:
            uid = f"{sop_uid}.ev{n + 1}"
            m.issue(IssueKind.MISSING_EVENT_UID,
                    f"Irradiation event #{n + 1} has no Irradiation Event UID (DCM 113769); keyed "
                    "by report and position", C.IRRADIATION_EVENT_UID, uid)
        target_item = first(node, C.TARGET_REGION)
        target, target_code = code_label(target_item)
        side = None
        if target_item is not None:
            lat = code_value_of(first(target_item, C.LATERALITY))
            side = _SIDE.get(lat[0]) if lat else None
        event_type = code_value_of(first(node, C.IRRADIATION_EVENT_TYPE))
        material, thickness = _filter(node, uid, m)
        exposure_uas = m.value(node, C.EXPOSURE, Quantity.CHARGE, event_uid=uid)
        area = m.value(node, C.COLLIMATED_FIELD_AREA, Quantity.AREA, event_uid=uid)
        if area is None:
            area = _area_from_sides(node, uid, m)
        orientation = first(node, C.PATIENT_ORIENTATION, "CODE")
        modifier = first(orientation, C.PATIENT_ORIENTATION_MODIFIER) if orientation else None
        if modifier is None:   # a modifier sent beside, not under, its Patient Orientation
            modifier = first(node, C.PATIENT_ORIENTATION_MODIFIER, "CODE")
        events.append(ProjectionEvent(
            event_uid=uid,
            sop_instance_uid=sop_uid,
            source_kind="rdsr",
            event_type=_EVENT_TYPE.get(event_type[0], "other") if event_type else None,
            acquisition_plane=_plane(node),
            started_at=datetime_of(first(node, C.DATETIME_STARTED)),
            acquisition_protocol=text_of(first(node, C.ACQUISITION_PROTOCOL)),
            target_region=target,
            target_region_code=target_code,
            laterality=side,
            image_view=_meaning(node, C.IMAGE_VIEW),
            dap_gy_cm2=m.value(node, C.DOSE_AREA_PRODUCT, Quantity.DAP, event_uid=uid, plausible="dap_event"),
            dose_rp_mgy=m.value(node, C.DOSE_RP, Quantity.AIR_KERMA, event_uid=uid, plausible="dose_rp_event"),
            entrance_exposure_rp_mgy=m.value(node, C.ENTRANCE_EXPOSURE_AT_RP, Quantity.AIR_KERMA, event_uid=uid),
            kvp=m.value(node, C.KVP, Quantity.VOLTAGE, event_uid=uid, plausible="kvp"),
            tube_current_ma=m.value(node, C.XRAY_TUBE_CURRENT, Quantity.CURRENT, event_uid=uid),
            exposure_mas=exposure_uas,
            exposure_time_s=m.value(node, C.EXPOSURE_TIME, Quantity.TIME, event_uid=uid, plausible="time"),
            pulse_rate_per_s=m.value(node, C.PULSE_RATE, Quantity.RATE, event_uid=uid),
            number_of_pulses=m.value(node, C.NUMBER_OF_PULSES, Quantity.COUNT, event_uid=uid),
            pulse_width_ms=m.value(node, C.PULSE_WIDTH, Quantity.SHORT_TIME, event_uid=uid),
            irradiation_duration_s=m.value(node, C.IRRADIATION_DURATION, Quantity.TIME, event_uid=uid, plausible="time"),
            fluoro_mode=_meaning(node, C.FLUORO_MODE),
            positioner_primary_angle_deg=_angle(node, C.POSITIONER_PRIMARY_ANGLE, uid, m),
            positioner_secondary_angle_deg=_angle(node, C.POSITIONER_SECONDARY_ANGLE, uid, m),
            source_to_detector_mm=m.value(node, C.DISTANCE_SOURCE_TO_DETECTOR, Quantity.LENGTH, event_uid=uid),
            source_to_isocenter_mm=m.value(node, C.DISTANCE_SOURCE_TO_ISOCENTER, Quantity.LENGTH, event_uid=uid),
            collimated_field_area_cm2=area,
            table_longitudinal_mm=m.value(node, C.TABLE_LONGITUDINAL_POSITION, Quantity.LENGTH,
                                          event_uid=uid, is_signed=True),
            table_lateral_mm=m.value(node, C.TABLE_LATERAL_POSITION, Quantity.LENGTH,
                                     event_uid=uid, is_signed=True),
            table_height_mm=m.value(node, C.TABLE_HEIGHT_POSITION, Quantity.LENGTH,
                                    event_uid=uid, is_signed=True),
            distance_source_to_rp_mm=m.value(node, C.DISTANCE_SOURCE_TO_REFERENCE_POINT,
                                             Quantity.LENGTH, event_uid=uid),
            reference_point_definition=(_rp_definition(node)
                                        or report_rp.get(_plane(node) or "single")),
            patient_orientation=_position(orientation),
            patient_orientation_modifier=_position(modifier),
            patient_table_relationship=_position(first(node, C.PATIENT_TABLE_RELATIONSHIP, "CODE")),
            filter_material=material,
            filter_thickness_mm=thickness,
            agd_mgy=m.value(node, C.AVERAGE_GLANDULAR_DOSE, Quantity.AIR_KERMA, event_uid=uid, plausible="agd"),
            compressed_breast_thickness_mm=m.value(node, C.COMPRESSION_THICKNESS, Quantity.LENGTH, event_uid=uid),
            half_value_layer_mm=m.value(node, C.HALF_VALUE_LAYER, Quantity.LENGTH, event_uid=uid),
            anode_target=_meaning(node, C.ANODE_TARGET_MATERIAL),
            exposure_index=m.value(node, C.EXPOSURE_INDEX, Quantity.COUNT, event_uid=uid),
            target_exposure_index=m.value(node, C.TARGET_EXPOSURE_INDEX, Quantity.COUNT, event_uid=uid),
            deviation_index=_signed(node, C.DEVIATION_INDEX, uid, m),
        ))
    return events


def _signed(node, concept, uid, m: Measurer) -> float | None:
    """A NUM that may legitimately be negative (deviation index)."""
    item = first(node, concept, "NUM")
    if item is None:
        return None
    text, unit, _ = num_raw(item)
    try:
        return float(text) if text is not None else None
    except ValueError:
        m.issue(IssueKind.NOT_A_NUMBER, f"{concept.meaning}: {text!r} is not a number", concept, uid, text, unit)
        return None


def _angle(node, concept, uid, m: Measurer) -> float | None:
    """Angles are signed (PS3.3 C.8.7.5: -180..180 / -90..90 deg)."""
    item = first(node, concept, "NUM")
    if item is None:
        return None
    text, unit, _ = num_raw(item)
    if text is None:
        return None
    if unit not in (None, "deg"):
        m.issue(IssueKind.UNKNOWN_UNIT, f"{concept.meaning}: unit {unit!r} is not deg", concept, uid, text, unit)
        return None
    try:
        return float(text)
    except ValueError:
        return None


def projection_modality(root: Dataset, events: list[ProjectionEvent], is_mammo: bool) -> str:
    """Modality of the irradiating unit, which a TID 10001 report does not state directly.

    Mammography from Procedure reported; otherwise from Acquisition Device Type (CID 10032):
    integrated -> DX, cassette-based -> CR, fluoroscopy-guided -> XA when the reference point
    is the interventional one (15 cm from isocentre toward the source, IEC 60601-2-43) or the
    unit is biplane, else RF. Without a device type: any fluoroscopy event makes it RF/XA
    by the same rule, else DX.
    """
    if is_mammo:
        return "MG"
    device_type = code_value_of(first(root, C.ACQUISITION_DEVICE_TYPE))
    key = device_type[0] if device_type else None
    if key == ("DCM", "113958"):
        return "DX"
    if key == ("DCM", "113959"):
        return "CR"
    is_fluoro = key == ("DCM", "113957") or any(e.event_type == "fluoroscopy" for e in events)
    if not is_fluoro:
        return "DX"
    planes = {e.acquisition_plane for e in events}
    rp = [code_value_of(first(n, C.REFERENCE_POINT_DEFINITION))
          for n in find_all(root, C.ACCUMULATED_XRAY_DOSE_DATA, "CONTAINER")]
    interventional_rp = ("DCM", C.RP_15CM_FROM_ISOCENTER.value)
    if {"A", "B"} <= planes or any(r and r[0] == interventional_rp for r in rp):
        return "XA"
    return "RF"
