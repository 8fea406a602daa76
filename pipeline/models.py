"""Typed records the parsing core produces (Dataset in, these out).

Every numeric field carries its canonical unit in its name and is already converted from the
UCUM code in the file. A missing or rejected value is ``None`` with a ``ParseIssue`` saying why.
Patient identifiers never appear here: the parser passes them to the pseudonymiser and keeps
only the keys.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field, fields
from enum import Enum

__all__ = [
    "Accumulated",
    "CtEvent",
    "DeviceInfo",
    "DoseObject",
    "IssueKind",
    "ObjectKind",
    "ParseIssue",
    "ProjectionEvent",
    "StudyInfo",
    "as_row",
]


class ObjectKind(str, Enum):
    RDSR_CT = "rdsr_ct"                  # X-Ray Radiation Dose SR, root TID 10011
    RDSR_PROJECTION = "rdsr_projection"  # X-Ray Radiation Dose SR, root TID 10001
    RDSR_ENHANCED = "rdsr_enhanced"      # Enhanced X-Ray Radiation Dose SR (TID 10040 family)
    IMAGE_HEADER = "image_header"        # dose attributes of an image object's header
    DOSE_SCREEN = "dose_screen"          # an image object's Exposure Dose Sequence (0040,030E)


class IssueKind(str, Enum):
    MISSING_UNIT = "missing_unit"
    UNKNOWN_UNIT = "unknown_unit"
    MISSING_VALUE = "missing_value"
    NOT_A_NUMBER = "not_a_number"
    NEGATIVE_VALUE = "negative_value"
    IMPLAUSIBLE_VALUE = "implausible_value"
    ZERO_VALUE = "zero_value"
    NO_DEVICE_CONTEXT = "no_device_context"
    MISSING_EVENT_UID = "missing_event_uid"
    TOTAL_MISMATCH = "total_mismatch"
    CONFLICTING_EVENT = "conflicting_event"
    PARSER_WARNING = "parser_warning"
    PIXEL_DATA_TRUNCATED = "pixel_data_truncated"   # the file ends inside its pixel data
    UNPARSED_DOSE_TEXT = "unparsed_dose_text"       # Comments on Radiation Dose not understood
    BELOW_RESOLUTION = "below_resolution"           # e.g. Entrance Dose 0 dGy (integer dGy)


@dataclass(frozen=True, slots=True)
class ParseIssue:
    """A value-level problem: the value is kept as NULL, never guessed."""

    kind: IssueKind
    detail: str
    concept_code: str | None = None  # "scheme:value", e.g. "DCM:113838"
    event_uid: str | None = None
    raw_value: str | None = None
    raw_unit: str | None = None


@dataclass(frozen=True, slots=True)
class DeviceInfo:
    """The irradiating device: TID 1004 device observer, plus the header equipment module."""

    device_key: str
    modality: str
    device_observer_uid: str | None
    observer_name: str | None
    manufacturer: str | None
    model: str | None
    serial_number: str | None
    physical_location: str | None
    station_name: str | None
    institution_name: str | None
    department_name: str | None
    header_manufacturer: str | None  # the creator of the object (may be a gateway)
    header_model: str | None
    header_serial_number: str | None
    software_versions: str | None


@dataclass(frozen=True, slots=True)
class StudyInfo:
    study_key: str
    patient_key: str | None
    study_date: dt.date | None
    study_time: dt.time | None
    study_description: str | None
    procedure_code: str | None      # "scheme:value" of the first Procedure Code Sequence item
    procedure_meaning: str | None
    patient_age_years: float | None
    patient_sex: str | None
    patient_weight_kg: float | None
    patient_height_m: float | None


@dataclass(frozen=True, slots=True)
class CtEvent:
    """One CT irradiation event (PS3.16 TID 10013), from an RDSR or a CT image header."""

    event_uid: str
    sop_instance_uid: str
    source_kind: str  # rdsr | dose_screen | image_header
    acquisition_protocol: str | None = None
    target_region: str | None = None            # code meaning, e.g. "Head"
    target_region_code: str | None = None       # "SCT:69536005"
    ct_acquisition_type: str | None = None      # spiral | sequenced | constant_angle | stationary | free | cone_beam
    started_at: dt.datetime | None = None
    exposure_time_s: float | None = None
    scanning_length_mm: float | None = None
    top_z_scanning_length_mm: float | None = None     # TID 10014, table position (mm)
    bottom_z_scanning_length_mm: float | None = None
    nominal_single_collimation_mm: float | None = None
    nominal_total_collimation_mm: float | None = None
    pitch_factor: float | None = None
    number_of_sources: int | None = None
    kvp: float | None = None                     # source A (first source)
    tube_current_ma: float | None = None
    max_tube_current_ma: float | None = None
    exposure_time_per_rotation_s: float | None = None
    kvp_source_b: float | None = None
    tube_current_ma_source_b: float | None = None
    ctdivol_mgy: float | None = None
    ctdi_phantom: str | None = None              # head_16cm | body_32cm | other
    dlp_mgy_cm: float | None = None
    ssde_mgy: float | None = None
    water_equivalent_diameter_mm: float | None = None
    dose_check_alert_ctdivol_mgy: float | None = None
    dose_check_alert_dlp_mgy_cm: float | None = None
    dose_check_notification_ctdivol_mgy: float | None = None
    dose_check_notification_dlp_mgy_cm: float | None = None
    # image headers only: where the images lie, for the header-only DLP estimate
    series_instance_uid: str | None = None
    image_z_min_mm: float | None = None          # Image Position (Patient) z, lowest image
    image_z_max_mm: float | None = None
    slice_thickness_mm: float | None = None
    n_images: int | None = None                  # images (frames) this row stands for


@dataclass(frozen=True, slots=True)
class ProjectionEvent:
    """One projection irradiation event (PS3.16 TID 10003), from an RDSR or image header."""

    event_uid: str
    sop_instance_uid: str
    source_kind: str
    event_type: str | None = None                # fluoroscopy | stationary | stepping | rotational
    acquisition_plane: str | None = None         # single | A | B
    started_at: dt.datetime | None = None
    acquisition_protocol: str | None = None
    target_region: str | None = None
    target_region_code: str | None = None
    laterality: str | None = None                # L | R | B
    image_view: str | None = None
    dap_gy_cm2: float | None = None
    dose_rp_mgy: float | None = None             # Dose (RP) of a dose report only (Ka,r)
    entrance_exposure_rp_mgy: float | None = None  # Entrance Exposure at RP (DCM 111636), MG report
    entrance_dose_mgy: float | None = None       # image header Entrance Dose (0040,8302)/(0040,0302)
    entrance_dose_derivation: str | None = None  # (0040,8303): IAK | ESAK | ESDBS | ESDNOBS
    kvp: float | None = None
    tube_current_ma: float | None = None
    exposure_mas: float | None = None
    exposure_time_s: float | None = None
    pulse_rate_per_s: float | None = None
    number_of_pulses: float | None = None
    pulse_width_ms: float | None = None
    irradiation_duration_s: float | None = None
    fluoro_mode: str | None = None
    positioner_primary_angle_deg: float | None = None
    positioner_secondary_angle_deg: float | None = None
    source_to_detector_mm: float | None = None
    source_to_isocenter_mm: float | None = None
    collimated_field_area_cm2: float | None = None  # reported, else Height x Width (TID 10003B)
    table_longitudinal_mm: float | None = None   # TID 10003C; signed, device-specific origin
    table_lateral_mm: float | None = None
    table_height_mm: float | None = None
    distance_source_to_rp_mm: float | None = None  # Distance Source to Reference Point (113737)
    reference_point_definition: str | None = None  # per event (TID 10003B), CID 10025 meaning or text
    patient_orientation: str | None = None       # TID 10003 (113743), CID 19: recumbent | erect | ...
    patient_orientation_modifier: str | None = None  # (113744), CID 20: supine | prone | ...
    patient_table_relationship: str | None = None    # (113745), CID 21: headfirst | feet-first | ...
    filter_material: str | None = None
    filter_thickness_mm: float | None = None
    agd_mgy: float | None = None
    compressed_breast_thickness_mm: float | None = None
    half_value_layer_mm: float | None = None
    anode_target: str | None = None
    exposure_index: float | None = None
    target_exposure_index: float | None = None
    deviation_index: float | None = None
    body_part: str | None = None
    view_position: str | None = None


@dataclass(frozen=True, slots=True)
class Accumulated:
    """Reported accumulated totals of one report (per plane for projection; TID 10002/10012)."""

    sop_instance_uid: str
    plane: str                                   # single | A | B | ct
    dap_total_gy_cm2: float | None = None
    dose_rp_total_mgy: float | None = None
    fluoro_dap_total_gy_cm2: float | None = None
    fluoro_dose_rp_total_mgy: float | None = None
    fluoro_time_total_s: float | None = None
    acquisition_dap_total_gy_cm2: float | None = None
    acquisition_dose_rp_total_mgy: float | None = None
    acquisition_time_total_s: float | None = None
    radiographic_frames: float | None = None
    reference_point_definition: str | None = None
    calibration_factor: float | None = None      # stored, never applied (PS3.16 TID 10002)
    calibration_uncertainty_pct: float | None = None
    calibration_datetime: dt.datetime | None = None
    agd_left_mgy: float | None = None
    agd_right_mgy: float | None = None
    dlp_total_mgy_cm: float | None = None
    events_reported: float | None = None


@dataclass(slots=True)
class DoseObject:
    """Everything one dose object yields."""

    sop_instance_uid: str
    sop_class_uid: str
    kind: ObjectKind
    modality: str                                # irradiating modality: CT DX CR RF XA MG
    content_datetime: dt.datetime | None
    instance_number: int | None
    source_of_dose_information: str | None
    series_description: str | None
    protocol_name: str | None
    body_part: str | None
    study: StudyInfo
    device: DeviceInfo
    ct_events: list[CtEvent] = field(default_factory=list)
    projection_events: list[ProjectionEvent] = field(default_factory=list)
    accumulated: list[Accumulated] = field(default_factory=list)
    issues: list[ParseIssue] = field(default_factory=list)
    note: str | None = None                      # a remark stored as the file's reason


def as_row(record) -> dict:
    """A frozen dataclass as a column -> value dict (for Arrow)."""
    return {f.name: getattr(record, f.name) for f in fields(record)}
