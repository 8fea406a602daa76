"""What one synthetic study is: patient, unit, events, and the reports to write.

Values are held in the canonical units Kerma Ledger uses everywhere (DAP Gy.cm2, air kerma
and CTDIvol mGy, DLP mGy.cm, times s, lengths mm) and already rounded to what the files
carry, so the manifest's true totals are exactly what a correct reader must recover.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

__all__ = [
    "CtEvent",
    "PatientSpec",
    "ProjectionEvent",
    "ReportSpec",
    "StudySpec",
    "study_truth",
]

CodeTriplet = tuple[str, str, str]


@dataclass(frozen=True, slots=True)
class PatientSpec:
    patient_id: str
    issuer: str
    name: str
    sex: str  # DICOM code: F / M / O
    birth_date: dt.date
    weight_kg: float | None
    height_m: float | None


@dataclass(frozen=True, slots=True)
class CtEvent:
    """One CT irradiation event (PS3.16 TID 10013)."""

    event_uid: str
    kind: str  # localizer | spiral | sequenced | stationary
    protocol: str
    target_region: CodeTriplet
    phantom: str  # head | body
    started: dt.datetime
    kvp: float
    tube_current_ma: float
    max_tube_current_ma: float
    exposure_time_s: float
    rotation_time_s: float | None
    scanning_length_mm: float
    single_collimation_mm: float
    total_collimation_mm: float
    pitch_factor: float | None
    ctdivol_mgy: float | None  # None: the unit reports no CT Dose container
    dlp_mgy_cm: float | None


@dataclass(frozen=True, slots=True)
class ProjectionEvent:
    """One projection irradiation event (PS3.16 TID 10003 with 10003A/B/C)."""

    event_uid: str
    event_type: str  # fluoroscopy | stationary | rotational
    plane: str  # single | A | B
    protocol: str
    anatomy: CodeTriplet | None
    started: dt.datetime
    kvp: float
    tube_current_ma: float
    dap_gy_cm2: float | None
    dose_rp_mgy: float | None
    exposure_time_ms: float | None = None
    exposure_uas: float | None = None
    irradiation_duration_s: float | None = None
    pulse_rate_per_s: float | None = None
    number_of_pulses: int | None = None
    pulse_width_ms: float | None = None
    sid_mm: float | None = None
    source_to_isocenter_mm: float | None = None
    field_area_m2: float | None = None
    primary_angle_deg: float | None = None
    secondary_angle_deg: float | None = None
    # TID 10003C table positions; this invented network's units report the table-top height
    # relative to the isocentre (positive up) and longitudinal/lateral from the table home
    table_longitudinal_mm: float | None = None
    table_lateral_mm: float | None = None
    table_height_mm: float | None = None
    # TID 10003 patient position (CID 20 / CID 21 terms); the interventional rooms report it
    patient_orientation_modifier: str | None = None  # supine | prone
    patient_table_relationship: str | None = None    # headfirst | feet-first
    filter_material: str | None = None  # Al | Cu | Rh | Mo | Ag
    filter_thickness_mm: float | None = None
    body_part: str | None = None
    view: str | None = None  # AP, PA, LL (radiography); CC, MLO (mammography)
    laterality: str | None = None  # L / R (mammography)
    exposure_index: float | None = None
    target_exposure_index: float | None = None
    deviation_index: float | None = None
    agd_mgy: float | None = None
    entrance_exposure_mgy: float | None = None
    compressed_thickness_mm: float | None = None
    compression_force_n: float | None = None  # mammography: N (PS3.3 C.8.11.5, (0018,11A2))
    hvl_mm: float | None = None
    anode: str | None = None  # W | Mo | Rh


@dataclass(frozen=True, slots=True)
class ReportSpec:
    """One dose object to write for the study: an RDSR (some events) or an image header.

    ``kind = "rdsr"``: the report covers ``events[:n_events]`` (cumulative reports grow).
    ``kind = "image_header"``: one image of event number ``n_events`` (1-based, so the
    image shows ``events[n_events - 1]``; see :attr:`event_number`). Image headers come
    from units that send no dose report (CR) or, beside the RDSR, from units with
    ``header_images`` (CT, MG); those share the RDSR events' Irradiation Event UIDs.
    ``frame_of_reference_uid``: Frame of Reference UID (0020,0052) of images whose IOD
    has the Frame of Reference module as mandatory (CT, PS3.3 A.3); else None.
    """

    kind: str  # rdsr | image_header | dose_screen
    n_events: int
    sop_instance_uid: str
    series_instance_uid: str
    instance_number: int
    content_time: dt.datetime
    frame_of_reference_uid: str | None = None

    @property
    def event_number(self) -> int:
        """1-based number of the event an image header shows."""
        if self.kind != "image_header":
            raise ValueError(f"a {self.kind} report covers events[:{self.n_events}], "
                             f"not one event")
        return self.n_events


@dataclass(frozen=True, slots=True)
class StudySpec:
    index: int
    study_uid: str
    accession: str
    study_datetime: dt.datetime
    site: str
    device: str
    modality: str
    exam: str
    study_description: str
    patient: PatientSpec
    age_years: float
    ct_events: tuple[CtEvent, ...] = ()
    projection_events: tuple[ProjectionEvent, ...] = ()
    reports: tuple[ReportSpec, ...] = ()
    defect: str | None = None
    story: str | None = None
    notes: dict[str, str] = field(default_factory=dict)

    @property
    def events(self) -> tuple[CtEvent | ProjectionEvent, ...]:
        return self.ct_events or self.projection_events


def _sum(values) -> float | None:
    present = [v for v in values if v is not None]
    return float(sum(present)) if present else None


def study_truth(spec: StudySpec) -> dict[str, float | int | None]:
    """True totals of a study in canonical units (the manifest's check values).

    ``ctdivol_mgy`` is the scanning-length-weighted mean of Mean CTDIvol over spiral and
    sequenced acquisitions (localizers, constant-angle and stationary acquisitions
    excluded): sum(CTDIvol_i * L_i) / sum(L_i).
    ``agd_mgy`` is the sum of the per-view average glandular doses of the study.
    A study known only from image headers (no dose report) states an Entrance Dose
    (0040,8302), a surface dose: it is ``entrance_dose_total_mgy``, never ``dose_rp_total_mgy``
    (the reference-point air kerma of a dose report).
    """
    truth: dict[str, float | int | None] = {
        "event_count": len(spec.events),
        "dap_total_gy_cm2": None,
        "dose_rp_total_mgy": None,
        "fluoro_time_total_s": None,
        "dlp_total_mgy_cm": None,
        "ctdivol_mgy": None,
        "agd_mgy": None,
        "entrance_dose_total_mgy": None,
    }
    if spec.ct_events:
        truth["dlp_total_mgy_cm"] = _sum(e.dlp_mgy_cm for e in spec.ct_events)
        main = [e for e in spec.ct_events
                if e.kind in ("spiral", "sequenced") and e.ctdivol_mgy is not None]
        length = sum(e.scanning_length_mm for e in main)
        if any(r.kind == "dose_screen" for r in spec.reports):
            # a dose screen states no scanning length: L_i = DLP_i / CTDIvol_i
            stated = [e for e in main if e.dlp_mgy_cm and e.ctdivol_mgy > 0]
            if stated:
                truth["ctdivol_mgy"] = sum(e.dlp_mgy_cm for e in stated) / sum(
                    e.dlp_mgy_cm / e.ctdivol_mgy for e in stated)
        elif main and length > 0:
            truth["ctdivol_mgy"] = sum(e.ctdivol_mgy * e.scanning_length_mm for e in main) / length
    else:
        events = spec.projection_events
        truth["dap_total_gy_cm2"] = _sum(e.dap_gy_cm2 for e in events)
        if any(r.kind == "rdsr" for r in spec.reports):
            truth["dose_rp_total_mgy"] = _sum(e.dose_rp_mgy for e in events)
        else:
            truth["entrance_dose_total_mgy"] = _sum(e.dose_rp_mgy for e in events)
        truth["agd_mgy"] = _sum(e.agd_mgy for e in events)
        fluoro = [e for e in events if e.event_type == "fluoroscopy"]
        if fluoro:
            truth["fluoro_time_total_s"] = _sum(e.irradiation_duration_s for e in fluoro)
    return truth
