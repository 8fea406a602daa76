"""Turn a StudySpec into DICOM datasets: pure (no I/O) and deterministic.

* CT studies: X-Ray Radiation Dose SR, root TID 10011 (TID 10012 accumulated data,
  TID 10013 per acquisition).
* Radiography, fluoroscopy, interventional and mammography studies: the same SOP class with
  root TID 10001 (TID 10002 per plane with TID 10004/10005/10007, TID 10003 per event).
* Units that send no dose report: CR Image Storage objects carrying the dose attributes of
  the X-Ray Acquisition Dose module in their headers, with a tiny pixel matrix.
* Units that send their images beside the RDSR (``header_images``): CT Image Storage
  (CTDIvol in the CT Image module) and Digital Mammography X-Ray Image Storage - For
  Presentation (Organ Dose in the X-Ray Acquisition Dose module) headers, tiny pixel
  matrices, each with the Irradiation Event UID of the RDSR event it shows.
* A Basic Text SR that is not a dose report (for the corpus's "not a dose object" files).

``make_dataset`` gives each object as a pydicom Dataset; ``make_parts`` gives dose reports
and image headers as an ``encoder.Header`` (and a report's content tree as ``sr`` Items),
which encoder.py writes byte for byte as pydicom would, without building the Dataset.
"""

from __future__ import annotations

import datetime as dt

from pydicom.dataset import Dataset
from pydicom.sequence import Sequence
from pydicom.uid import ExplicitVRLittleEndian, UID

from pipeline import concepts as C

from .encoder import Header
from .sampling import device_observer_uid, uid
from .scenario import DeviceSpec, Scenario
from .specs import CtEvent, ProjectionEvent, ReportSpec, StudySpec
from .sr import (
    HAS_CONCEPT_MOD,
    HAS_OBS_CONTEXT,
    HAS_PROPERTIES,
    Item,
    code_node,
    code_sequence_item,
    code_sequence_node,
    container_node,
    datetime_node,
    element_key,
    format_ds,
    num_node,
    text_item,
    text_node,
    to_dataset,
    uid_node,
)

__all__ = [
    "BASIC_TEXT_SR",
    "CR_IMAGE",
    "CT_IMAGE",
    "IMPLEMENTATION_CLASS_UID",
    "MG_IMAGE",
    "XRAY_RADIATION_DOSE_SR",
    "make_basic_text_sr",
    "make_cr_image",
    "make_ct_image",
    "make_ct_rdsr",
    "make_dataset",
    "make_mg_image",
    "make_parts",
    "make_projection_rdsr",
]

XRAY_RADIATION_DOSE_SR = UID("1.2.840.10008.5.1.4.1.1.88.67")
BASIC_TEXT_SR = UID("1.2.840.10008.5.1.4.1.1.88.11")
CR_IMAGE = UID("1.2.840.10008.5.1.4.1.1.1")
CT_IMAGE = UID("1.2.840.10008.5.1.4.1.1.2")
MG_IMAGE = UID("1.2.840.10008.5.1.4.1.1.1.2")  # Digital Mammography X-Ray - For Presentation
IMPLEMENTATION_CLASS_UID = UID(uid("kerma-ledger", "implementation-class", 1))
IMPLEMENTATION_VERSION = "KERMALEDGER01"

_CT_KIND = {
    "localizer": C.CONSTANT_ANGLE_ACQUISITION,
    "spiral": C.SPIRAL_ACQUISITION,
    "sequenced": C.SEQUENCED_ACQUISITION,
    "stationary": C.STATIONARY_ACQUISITION_CT,
}
_PHANTOM = {"head": C.IEC_HEAD_DOSIMETRY_PHANTOM, "body": C.IEC_BODY_DOSIMETRY_PHANTOM}
_EVENT_TYPE = {
    "fluoroscopy": C.FLUOROSCOPY,
    "stationary": C.STATIONARY_ACQUISITION,
    "stepping": C.STEPPING_ACQUISITION,
    "rotational": C.ROTATIONAL_ACQUISITION,
}
_PLANE = {"single": C.SINGLE_PLANE, "A": C.PLANE_A, "B": C.PLANE_B}
_MATERIAL = {"Al": C.ALUMINUM, "Cu": C.COPPER, "Rh": C.RHODIUM, "Mo": C.MOLYBDENUM,
             "W": C.TUNGSTEN, "Ag": C.SILVER}
_MATERIAL_TERM = {"Al": "ALUMINUM", "Cu": "COPPER", "Rh": "RHODIUM", "Mo": "MOLYBDENUM",
                  "W": "TUNGSTEN", "Ag": "SILVER"}
_VIEW = {"CC": ("399162004", "SCT", "cranio-caudal"),
         "MLO": ("399368009", "SCT", "medio-lateral oblique")}
_SIDE = {"L": C.LEFT, "R": C.RIGHT}
_VIEW_MODIFIERS = element_key("ViewModifierCodeSequence")


# --- header modules -------------------------------------------------------------------------

def _file_meta(sop_class: UID, sop_instance: str) -> Header:
    meta = Header()
    meta.MediaStorageSOPClassUID = sop_class
    meta.MediaStorageSOPInstanceUID = sop_instance
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    meta.ImplementationClassUID = IMPLEMENTATION_CLASS_UID
    meta.ImplementationVersionName = IMPLEMENTATION_VERSION
    return meta


def _da(d: dt.date) -> str:
    return d.strftime("%Y%m%d")


def _tm(t: dt.datetime) -> str:
    return t.strftime("%H%M%S")


def _age_string(age_years: float) -> str:
    """Patient's Age (AS, PS3.5): nnnD / nnnW / nnnM / nnnY."""
    if age_years >= 2:
        return f"{int(age_years):03d}Y"
    months = int(age_years * 12)
    if months >= 1:
        return f"{months:03d}M"
    return f"{max(1, int(age_years * 52)):03d}W"


def _base(scenario: Scenario, spec: StudySpec, report: ReportSpec, sop_class: UID,
          modality: str, series_number: int) -> Header:
    """The header modules every object has, as a Header (``.dataset()`` makes the Dataset)."""
    device = scenario.device(spec.device)
    site = scenario.sites[device.site]
    ds = Header()
    ds.file_meta = _file_meta(sop_class, report.sop_instance_uid)
    ds.SpecificCharacterSet = "ISO_IR 100"
    ds.InstanceCreationDate = _da(report.content_time.date())
    ds.InstanceCreationTime = _tm(report.content_time)
    ds.SOPClassUID = sop_class
    ds.SOPInstanceUID = report.sop_instance_uid
    ds.TimezoneOffsetFromUTC = "+0000"
    ds.StudyDate = _da(spec.study_datetime.date())
    ds.StudyTime = _tm(spec.study_datetime)
    ds.ContentDate = _da(report.content_time.date())
    ds.ContentTime = _tm(report.content_time)
    ds.AccessionNumber = spec.accession
    ds.Modality = modality
    ds.Manufacturer = device.manufacturer
    ds.InstitutionName = site.institution
    ds.InstitutionAddress = site.address
    ds.ReferringPhysicianName = ""
    ds.StationName = device.station_name
    ds.StudyDescription = spec.study_description
    ds.InstitutionalDepartmentName = device.department
    ds.ManufacturerModelName = device.model
    p = spec.patient
    ds.PatientName = p.name
    ds.PatientID = p.patient_id
    ds.IssuerOfPatientID = p.issuer
    ds.PatientBirthDate = _da(p.birth_date)
    ds.PatientSex = p.sex
    ds.PatientAge = _age_string(spec.age_years)
    if p.height_m is not None:
        ds.PatientSize = format_ds(p.height_m)
    if p.weight_kg is not None:
        ds.PatientWeight = format_ds(p.weight_kg)
    ds.DeviceSerialNumber = device.serial
    ds.SoftwareVersions = device.software
    ds.StudyInstanceUID = spec.study_uid
    ds.SeriesInstanceUID = report.series_instance_uid
    ds.StudyID = f"S{spec.index:07d}"
    ds.SeriesNumber = series_number
    ds.InstanceNumber = report.instance_number
    return ds


def _sr_document(ds: Header, device: DeviceSpec) -> None:
    """SR Document Series and General modules' remaining attributes (PS3.3 C.17.1, C.17.2)."""
    ds.ReferencedPerformedProcedureStepSequence = Sequence()
    ds.CompletionFlag = "COMPLETE"
    ds.VerificationFlag = "UNVERIFIED"
    ds.PerformedProcedureCodeSequence = Sequence()


def _observer_context(scenario: Scenario, device: DeviceSpec) -> list[Item]:
    """TID 1002 Observer Context with TID 1004 device observer attributes."""
    return [
        code_node(C.OBSERVER_TYPE, C.DEVICE, HAS_OBS_CONTEXT),
        uid_node(C.DEVICE_OBSERVER_UID, device_observer_uid(scenario, device.id), HAS_OBS_CONTEXT),
        text_node(C.DEVICE_OBSERVER_NAME, device.station_name, HAS_OBS_CONTEXT),
        text_node(C.DEVICE_OBSERVER_MANUFACTURER, device.manufacturer, HAS_OBS_CONTEXT),
        text_node(C.DEVICE_OBSERVER_MODEL_NAME, device.model, HAS_OBS_CONTEXT),
        text_node(C.DEVICE_OBSERVER_SERIAL_NUMBER, device.serial, HAS_OBS_CONTEXT),
        text_node(C.DEVICE_OBSERVER_PHYSICAL_LOCATION, device.location, HAS_OBS_CONTEXT),
        code_node(C.DEVICE_ROLE_IN_PROCEDURE, C.IRRADIATING_DEVICE, HAS_OBS_CONTEXT),
    ]


def _scope(spec: StudySpec) -> Item:
    return code_node(C.SCOPE_OF_ACCUMULATION, C.SCOPE_STUDY, HAS_OBS_CONTEXT, children=[
        uid_node(C.STUDY_INSTANCE_UID, spec.study_uid, HAS_PROPERTIES)])


def _procedure_reported(procedure) -> Item:
    return code_node(C.PROCEDURE_REPORTED, procedure, HAS_CONCEPT_MOD, children=[
        code_node(C.HAS_INTENT, C.DIAGNOSTIC_INTENT, HAS_CONCEPT_MOD)])


def _root(template: str, children: list[Item]) -> Item:
    """The document's root content item (its elements sit at the top level of the dataset)."""
    return container_node(C.XRAY_RADIATION_DOSE_REPORT, children, relationship=None,
                          template=template)


def _with_content(ds: Dataset, root: Item) -> Dataset:
    """`ds` with the elements of its root content item added (Value Type, Concept Name,
    Continuity Of Content, Content Template Sequence, Content Sequence)."""
    for elem in to_dataset(root):
        ds[elem.tag] = elem
    return ds


# --- CT: TID 10011 --------------------------------------------------------------------------

def _ct_event(e: CtEvent) -> Item:
    source = [
        text_node(C.IDENTIFICATION_OF_XRAY_SOURCE, "A"),
        num_node(C.KVP, e.kvp, C.UNIT_KV),
        num_node(C.MAXIMUM_XRAY_TUBE_CURRENT, e.max_tube_current_ma, C.UNIT_MA),
        num_node(C.XRAY_TUBE_CURRENT, e.tube_current_ma, C.UNIT_MA),
    ]
    if e.rotation_time_s is not None and e.kind in ("spiral", "sequenced"):
        source.append(num_node(C.EXPOSURE_TIME_PER_ROTATION, e.rotation_time_s, C.UNIT_S))
    params = [
        num_node(C.EXPOSURE_TIME, e.exposure_time_s, C.UNIT_S),
        num_node(C.SCANNING_LENGTH, e.scanning_length_mm, C.UNIT_MM),
        num_node(C.NOMINAL_SINGLE_COLLIMATION_WIDTH, e.single_collimation_mm, C.UNIT_MM),
        num_node(C.NOMINAL_TOTAL_COLLIMATION_WIDTH, e.total_collimation_mm, C.UNIT_MM),
    ]
    if e.pitch_factor is not None:
        params.append(num_node(C.PITCH_FACTOR, e.pitch_factor, C.UNIT_RATIO))
    params += [
        num_node(C.NUMBER_OF_XRAY_SOURCES, 1, C.UNIT_XRAY_SOURCES),
        container_node(C.CT_XRAY_SOURCE_PARAMETERS, source),
    ]
    children = [
        text_node(C.ACQUISITION_PROTOCOL, e.protocol),
        code_node(C.TARGET_REGION, e.target_region),
        code_node(C.CT_ACQUISITION_TYPE, _CT_KIND[e.kind]),
        uid_node(C.IRRADIATION_EVENT_UID, e.event_uid),
        datetime_node(C.DATETIME_STARTED, e.started),
        container_node(C.CT_ACQUISITION_PARAMETERS, params),
    ]
    if e.ctdivol_mgy is not None:
        children.append(container_node(C.CT_DOSE, [
            num_node(C.MEAN_CTDIVOL, e.ctdivol_mgy, C.UNIT_MGY),
            code_node(C.CTDIW_PHANTOM_TYPE, _PHANTOM[e.phantom]),
            num_node(C.DLP, e.dlp_mgy_cm, C.UNIT_MGY_CM),
        ]))
    return container_node(C.CT_ACQUISITION, children)


def make_ct_rdsr(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    """X-Ray Radiation Dose SR with root TID 10011 for the first `report.n_events` events."""
    header, root = _ct_rdsr(scenario, spec, report)
    return _with_content(header.dataset(), root)


def _ct_rdsr(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> tuple[Header, Item]:
    device = scenario.device(spec.device)
    ds = _base(scenario, spec, report, XRAY_RADIATION_DOSE_SR, "SR", 990)
    ds.SeriesDescription = "Radiation Dose Information"
    _sr_document(ds, device)
    events = spec.ct_events[: report.n_events]
    dlp_total = sum(e.dlp_mgy_cm for e in events if e.dlp_mgy_cm is not None)
    children = [
        _procedure_reported(C.COMPUTED_TOMOGRAPHY_XRAY),
        *_observer_context(scenario, device),
        datetime_node(C.START_OF_XRAY_IRRADIATION, events[0].started, HAS_OBS_CONTEXT),
        datetime_node(C.END_OF_XRAY_IRRADIATION, events[-1].started
                      + dt.timedelta(seconds=max(1, int(events[-1].exposure_time_s))),
                      HAS_OBS_CONTEXT),
        _scope(spec),
        container_node(C.CT_ACCUMULATED_DOSE_DATA, [
            num_node(C.TOTAL_NUMBER_OF_IRRADIATION_EVENTS, len(events), C.UNIT_EVENTS),
            num_node(C.CT_DLP_TOTAL, round(dlp_total, 4), C.UNIT_MGY_CM),
        ]),
        *(_ct_event(e) for e in events),
        code_node(C.SOURCE_OF_DOSE_INFORMATION, C.AUTOMATED_DATA_COLLECTION),
    ]
    return ds, _root("10011", children)


# --- projection: TID 10001 ------------------------------------------------------------------

def _gy_m2(gy_cm2: float) -> float:
    """Gy.cm2 -> Gy.m2 (1 Gy.m2 = 1e4 Gy.cm2), as PS3.16 TID 10003/10007 prescribe."""
    return gy_cm2 / 1e4


def _gy(mgy: float) -> float:
    return mgy / 1e3


def _filters(e: ProjectionEvent) -> Item:
    return container_node(C.XRAY_FILTERS, [
        code_node(C.XRAY_FILTER_TYPE, C.FLAT_FILTER),
        code_node(C.XRAY_FILTER_MATERIAL, _MATERIAL[e.filter_material]),
        num_node(C.XRAY_FILTER_THICKNESS_MINIMUM, e.filter_thickness_mm, C.UNIT_MM),
        num_node(C.XRAY_FILTER_THICKNESS_MAXIMUM, e.filter_thickness_mm, C.UNIT_MM),
    ])


_POSITION = {"supine": C.SUPINE, "prone": C.PRONE, "headfirst": C.HEADFIRST,
             "feet-first": C.FEET_FIRST}


def _patient_position(e: ProjectionEvent) -> list[Item]:
    """TID 10003 Patient Table Relationship (CID 21) and Patient Orientation (CID 19) with its
    Modifier (CID 20), when the spec carries them."""
    items = []
    if e.patient_table_relationship is not None:
        items.append(code_node(C.PATIENT_TABLE_RELATIONSHIP, _POSITION[e.patient_table_relationship]))
    if e.patient_orientation_modifier is not None:
        items.append(code_node(C.PATIENT_ORIENTATION, C.RECUMBENT, children=[
            code_node(C.PATIENT_ORIENTATION_MODIFIER, _POSITION[e.patient_orientation_modifier],
                      HAS_CONCEPT_MOD)]))
    return items


def _projection_event(e: ProjectionEvent, is_mammo: bool, rp_definition) -> Item:
    children = [
        code_node(C.ACQUISITION_PLANE, _PLANE[e.plane], HAS_CONCEPT_MOD),
        uid_node(C.IRRADIATION_EVENT_UID, e.event_uid),
        datetime_node(C.DATETIME_STARTED, e.started),
        code_node(C.IRRADIATION_EVENT_TYPE, _EVENT_TYPE[e.event_type]),
        text_node(C.ACQUISITION_PROTOCOL, e.protocol),
    ]
    if e.anatomy is not None:
        mods = [code_node(C.LATERALITY, _SIDE[e.laterality], HAS_CONCEPT_MOD)] if e.laterality else None
        children.append(code_node(C.TARGET_REGION, e.anatomy, children=mods))
    if is_mammo and e.view in _VIEW:
        children.append(code_node(C.IMAGE_VIEW, _VIEW[e.view]))
    children += _patient_position(e)
    if e.entrance_exposure_mgy is not None:
        children.append(num_node(C.ENTRANCE_EXPOSURE_AT_RP, e.entrance_exposure_mgy, C.UNIT_MGY))
    if e.dap_gy_cm2 is not None:
        children.append(num_node(C.DOSE_AREA_PRODUCT, _gy_m2(e.dap_gy_cm2), C.UNIT_GY_M2))
    # TID 10003A detector data
    if e.exposure_index is not None:
        children += [
            num_node(C.EXPOSURE_INDEX, e.exposure_index, C.UNIT_NONE),
            num_node(C.TARGET_EXPOSURE_INDEX, e.target_exposure_index, C.UNIT_NONE),
            num_node(C.DEVIATION_INDEX, e.deviation_index, C.UNIT_NONE),
        ]
    # TID 10003B source data
    if e.dose_rp_mgy is not None:
        children += [
            num_node(C.DOSE_RP, _gy(e.dose_rp_mgy), C.UNIT_GY),
            code_node(C.REFERENCE_POINT_DEFINITION, rp_definition),
        ]
    if e.agd_mgy is not None:
        children.append(num_node(C.AVERAGE_GLANDULAR_DOSE, e.agd_mgy, C.UNIT_MGY))
    if e.event_type == "fluoroscopy":
        children.append(code_node(C.FLUORO_MODE, C.PULSED))
    if e.pulse_rate_per_s is not None:
        children.append(num_node(C.PULSE_RATE, e.pulse_rate_per_s, C.UNIT_PULSE_PER_S))
    if e.number_of_pulses is not None:
        children.append(num_node(C.NUMBER_OF_PULSES, e.number_of_pulses, C.UNIT_NONE))
    if e.pulse_width_ms is not None:
        children.append(num_node(C.PULSE_WIDTH, e.pulse_width_ms, C.UNIT_MS))
    if e.irradiation_duration_s is not None:
        children.append(num_node(C.IRRADIATION_DURATION, e.irradiation_duration_s, C.UNIT_S))
    children += [
        num_node(C.KVP, e.kvp, C.UNIT_KV),
        num_node(C.XRAY_TUBE_CURRENT, e.tube_current_ma, C.UNIT_MA),
    ]
    if e.exposure_time_ms is not None:
        children.append(num_node(C.EXPOSURE_TIME, e.exposure_time_ms, C.UNIT_MS))
    if e.exposure_uas is not None:
        children.append(num_node(C.EXPOSURE, e.exposure_uas, C.UNIT_UAS))
    if e.anode is not None:
        children.append(code_node(C.ANODE_TARGET_MATERIAL, _MATERIAL[e.anode]))
    if e.filter_material is not None:
        children.append(_filters(e))
    if e.hvl_mm is not None:
        children.append(num_node(C.HALF_VALUE_LAYER, e.hvl_mm, C.UNIT_MM))
    if e.field_area_m2 is not None:
        children.append(num_node(C.COLLIMATED_FIELD_AREA, e.field_area_m2, C.UNIT_M2))
    # TID 10003C mechanical data
    if e.primary_angle_deg is not None:
        children += [
            num_node(C.POSITIONER_PRIMARY_ANGLE, e.primary_angle_deg, C.UNIT_DEG),
            num_node(C.POSITIONER_SECONDARY_ANGLE, e.secondary_angle_deg, C.UNIT_DEG),
        ]
    if e.compressed_thickness_mm is not None:
        children.append(num_node(C.COMPRESSION_THICKNESS, e.compressed_thickness_mm, C.UNIT_MM))
    if e.source_to_isocenter_mm is not None:
        children.append(num_node(C.DISTANCE_SOURCE_TO_ISOCENTER, e.source_to_isocenter_mm, C.UNIT_MM))
    if e.sid_mm is not None:
        children.append(num_node(C.DISTANCE_SOURCE_TO_DETECTOR, e.sid_mm, C.UNIT_MM))
    for concept, value in ((C.TABLE_LONGITUDINAL_POSITION, e.table_longitudinal_mm),
                           (C.TABLE_LATERAL_POSITION, e.table_lateral_mm),
                           (C.TABLE_HEIGHT_POSITION, e.table_height_mm)):
        if value is not None:
            children.append(num_node(concept, value, C.UNIT_MM))
    return container_node(C.IRRADIATION_EVENT_XRAY_DATA, children)


def _accumulated(plane: str, events: list[ProjectionEvent], modality: str, rp_definition) -> Item:
    """TID 10002 for one plane, with TID 10004 / 10005 / 10007 as the device type requires."""
    children = [code_node(C.ACQUISITION_PLANE, _PLANE[plane], HAS_CONCEPT_MOD)]
    if modality == "MG":
        for side in ("L", "R"):
            agd = [e.agd_mgy for e in events if e.laterality == side and e.agd_mgy is not None]
            if agd:
                children.append(num_node(C.ACCUMULATED_AVERAGE_GLANDULAR_DOSE, round(sum(agd), 6),
                                         C.UNIT_MGY, children=[
                                             code_node(C.LATERALITY, _SIDE[side], HAS_CONCEPT_MOD)]))
        return container_node(C.ACCUMULATED_XRAY_DOSE_DATA, children)

    def total(values) -> float:
        return round(sum(v for v in values if v is not None), 6)

    if modality in ("RF", "XA"):
        fluoro = [e for e in events if e.event_type == "fluoroscopy"]
        acq = [e for e in events if e.event_type != "fluoroscopy"]
        children += [
            num_node(C.FLUORO_DOSE_AREA_PRODUCT_TOTAL, _gy_m2(total(e.dap_gy_cm2 for e in fluoro)), C.UNIT_GY_M2),
            num_node(C.FLUORO_DOSE_RP_TOTAL, _gy(total(e.dose_rp_mgy for e in fluoro)), C.UNIT_GY),
            num_node(C.TOTAL_FLUORO_TIME, total(e.irradiation_duration_s for e in fluoro), C.UNIT_S),
            num_node(C.ACQUISITION_DOSE_AREA_PRODUCT_TOTAL, _gy_m2(total(e.dap_gy_cm2 for e in acq)), C.UNIT_GY_M2),
            num_node(C.ACQUISITION_DOSE_RP_TOTAL, _gy(total(e.dose_rp_mgy for e in acq)), C.UNIT_GY),
            num_node(C.TOTAL_ACQUISITION_TIME, total(e.irradiation_duration_s for e in acq), C.UNIT_S),
            num_node(C.TOTAL_NUMBER_OF_RADIOGRAPHIC_FRAMES,
                     sum(e.number_of_pulses or 1 for e in acq), C.UNIT_NONE),
        ]
    children += [
        num_node(C.DOSE_AREA_PRODUCT_TOTAL, _gy_m2(total(e.dap_gy_cm2 for e in events)), C.UNIT_GY_M2),
        num_node(C.DOSE_RP_TOTAL, _gy(total(e.dose_rp_mgy for e in events)), C.UNIT_GY),
        code_node(C.REFERENCE_POINT_DEFINITION, rp_definition),
    ]
    return container_node(C.ACCUMULATED_XRAY_DOSE_DATA, children)


def make_projection_rdsr(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    """X-Ray Radiation Dose SR with root TID 10001 (projection radiography, fluoroscopy,
    interventional or mammography) for the first `report.n_events` events."""
    header, root = _projection_rdsr(scenario, spec, report)
    return _with_content(header.dataset(), root)


def _projection_rdsr(scenario: Scenario, spec: StudySpec,
                     report: ReportSpec) -> tuple[Header, Item]:
    device = scenario.device(spec.device)
    modality = device.modality
    ds = _base(scenario, spec, report, XRAY_RADIATION_DOSE_SR, "SR", 990)
    ds.SeriesDescription = "Radiation Dose Information"
    _sr_document(ds, device)
    events = list(spec.projection_events[: report.n_events])
    is_mammo = modality == "MG"
    # Interventional C-arms report Ka,r at 15 cm from the isocentre toward the source (IEC
    # 60601-2-43); a conventional fluoroscopy room here uses "1cm above Tabletop" (CID 10025;
    # the choice for an under-couch tube is from memory); radiography the patient surface.
    rp = {"XA": C.RP_15CM_FROM_ISOCENTER, "RF": C.RP_1CM_ABOVE_TABLETOP}.get(
        modality, C.RP_AT_SURFACE_OF_PATIENT)
    children = [_procedure_reported(C.MAMMOGRAPHY if is_mammo else C.PROJECTION_XRAY)]
    if not is_mammo:
        kind = C.FLUORO_GUIDED_PROJECTION_SYSTEM if modality in ("RF", "XA") \
            else C.INTEGRATED_PROJECTION_SYSTEM
        children.append(code_node(C.ACQUISITION_DEVICE_TYPE, kind))
    children += [*_observer_context(scenario, device), _scope(spec)]
    children += [
        code_node(C.XRAY_DETECTOR_DATA_AVAILABLE, C.YES if modality in ("DX", "CR") else C.NO),
        code_node(C.XRAY_SOURCE_DATA_AVAILABLE, C.YES),
        code_node(C.XRAY_MECHANICAL_DATA_AVAILABLE, C.YES),
    ]
    planes = ["A", "B"] if device.biplane else ["single"]
    for plane in planes:
        mine = [e for e in events if e.plane == plane]
        children.append(_accumulated(plane, mine, modality, rp))
    children += [_projection_event(e, is_mammo, rp) for e in events]
    children.append(code_node(C.SOURCE_OF_DOSE_INFORMATION, C.AUTOMATED_DATA_COLLECTION))
    return ds, _root("10001", children)


# --- image headers (units that send no dose report) -----------------------------------------

def make_cr_image(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    return _cr_image(scenario, spec, report).dataset()


def _cr_image(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Header:
    """CR Image Storage object for one radiograph, dose in the header (PS3.3 C.8.1, C.8.7.8).

    (0018,115E) Image and Fluoroscopy Area Dose Product is in dGy.cm2 (1 dGy.cm2 =
    0.1 Gy.cm2); (0040,8302) Entrance Dose in mGy is in mGy.
    """
    e = spec.projection_events[report.n_events - 1]
    ds = _base(scenario, spec, report, CR_IMAGE, "CR", report.n_events)
    ds.ImageType = ["ORIGINAL", "PRIMARY"]
    ds.AcquisitionDate = _da(e.started.date())
    ds.AcquisitionTime = _tm(e.started)
    ds.SeriesDescription = e.protocol
    ds.ProtocolName = e.protocol
    ds.BodyPartExamined = e.body_part
    ds.ViewPosition = e.view
    ds.PatientOrientation = ""
    ds.KVP = format_ds(e.kvp)
    ds.DistanceSourceToDetector = format_ds(e.sid_mm)
    ds.ExposureTime = str(int(round(e.exposure_time_ms)))
    ds.XRayTubeCurrent = str(int(round(e.tube_current_ma)))
    ds.Exposure = str(int(round(e.exposure_uas / 1000.0)))
    ds.ExposureInuAs = str(int(round(e.exposure_uas)))
    ds.ImageAndFluoroscopyAreaDoseProduct = format_ds(round(e.dap_gy_cm2 * 10.0, 6))
    ds.EntranceDoseInmGy = format_ds(e.dose_rp_mgy)
    ds.EntranceDoseDerivation = "IAK"
    ds.ExposureIndex = format_ds(e.exposure_index)
    ds.TargetExposureIndex = format_ds(e.target_exposure_index)
    ds.DeviationIndex = format_ds(e.deviation_index)
    ds.IrradiationEventUID = e.event_uid
    ds.ImagerPixelSpacing = ["0.2", "0.2"]
    ds.PixelSpacing = ["0.2", "0.2"]
    ds.SamplesPerPixel = 1
    ds.PhotometricInterpretation = "MONOCHROME2"
    ds.Rows = 8
    ds.Columns = 8
    ds.BitsAllocated = 16
    ds.BitsStored = 12
    ds.HighBit = 11
    ds.PixelRepresentation = 0
    ds.PixelData = bytes(range(128))
    return ds


# --- image headers beside an RDSR (units with `header_images`) -------------------------------

# Body Part Examined (0018,0015) for a CT target region, by SCT code (PS3.16 Annex L,
# "Correspondence of Anatomic Region Codes and Body Part Examined Defined Terms").
# Annex L has no term for the paranasal sinuses alone: they are in the head.
_BODY_PART = {
    "69536005": "HEAD",
    "2095001": "HEAD",
    "816094009": "CHEST",
    "818982008": "ABDOMENPELVIS",
    "416775004": "CHESTABDPELVIS",
    "122494005": "CSPINE",
}
_SCAN_OPTIONS = {"spiral": "HELICAL", "sequenced": "AXIAL", "stationary": "AXIAL"}
# Demo reconstruction geometry (no source): field of view and slice thickness, mm.
_RECON_DIAMETER_MM = {"head": 240.0, "body": 400.0}
_DATA_COLLECTION_DIAMETER_MM = {"head": 320.0, "body": 500.0}
_BREAST = ("76752008", "SCT", "Breast")
# Patient Orientation (0020,0020) of a mammogram, (row direction, column direction)
# (PS3.3 C.7.6.1.1.1), for the usual back-to-back hanging (from memory): right breast on
# the viewer's left, chest walls toward the midline. The oblique column direction (FL/FR)
# is simplified to F.
_MG_ORIENTATION = {("L", "CC"): ["A", "R"], ("R", "CC"): ["P", "L"],
                   ("L", "MLO"): ["A", "F"], ("R", "MLO"): ["P", "F"]}
CONTRAST_AGENT = "Iodinated contrast agent"  # generic description, no product name


def _tiny_pixels(ds: Header | Dataset, values) -> None:
    """8x8 MONOCHROME2, 16 bits allocated, 12 stored, unsigned (PS3.3 C.7.6.3 Image Pixel)."""
    import numpy as np

    array = np.asarray(values, dtype="<u2")
    if array.shape != (8, 8) or int(array.max()) >= 1 << 12:
        raise ValueError("need an 8x8 matrix of 12-bit values")
    ds.SamplesPerPixel = 1
    ds.PhotometricInterpretation = "MONOCHROME2"
    ds.Rows = 8
    ds.Columns = 8
    ds.BitsAllocated = 16
    ds.BitsStored = 12
    ds.HighBit = 11
    ds.PixelRepresentation = 0
    ds.PixelData = array.tobytes()


def _water_disc() -> list[list[int]]:
    """A water disc in air: stored 1024 = 0 HU, 0 = -1024 HU with the rescale written."""
    return [[1024 if (r - 3.5) ** 2 + (c - 3.5) ** 2 <= 10.0 else 0 for c in range(8)]
            for r in range(8)]


def _per_image_exposure_ms(e: CtEvent) -> float:
    """X-ray exposure time of one reconstructed image, ms (PS3.3 C.8.2.1: ExposureTime ms).

    Spiral: one rotation spread over the table feed, Revolution Time / Spiral Pitch Factor;
    sequenced and stationary: one rotation. (The RDSR's Exposure Time, TID 10013, is the
    total for the whole acquisition instead.)
    """
    if e.kind == "spiral":
        return e.rotation_time_s / e.pitch_factor * 1000.0
    return e.rotation_time_s * 1000.0


def make_ct_image(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    return _ct_image(scenario, spec, report).dataset()


def _ct_image(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Header:
    """CT Image Storage (PS3.3 A.3) header for one CT acquisition, beside the study's RDSR.

    One representative image of acquisition number ``report.event_number`` (never a
    localizer). Its Irradiation Event UID (0008,3010) is the RDSR event's, so an ingest
    that reads both counts the acquisition once. Units (PS3.3 C.8.2.1 CT Image module):
    CTDIvol (0018,9345) mGy; KVP (0018,0060) kV; X-Ray Tube Current (0018,1151) mA;
    Exposure Time (0018,1150) ms and Exposure (0018,1152) mAs and Exposure in uAs
    (0018,1153) uAs for this image; Revolution Time (0018,9305) s; Single / Total
    Collimation Width (0018,9306 / 9307) mm; Table Feed per Rotation (0018,9310) mm;
    Table Speed (0018,9309) mm/s. No Acquisition Type (0018,9302): it belongs to the
    Enhanced CT Image IOD (PS3.3 C.8.15.3.2), not the CT Image IOD; Scan Options (0018,0022)
    carries HELICAL / AXIAL instead.
    """
    e = spec.ct_events[report.event_number - 1]
    if e.kind == "localizer":
        raise ValueError("header images are written for non-localizer acquisitions only")
    exam = scenario.exams[spec.exam]
    ds = _base(scenario, spec, report, CT_IMAGE, "CT", report.event_number)
    ds.ImageType = ["ORIGINAL", "PRIMARY", "AXIAL"]
    ds.AcquisitionDate = _da(e.started.date())
    ds.AcquisitionTime = _tm(e.started)
    ds.AcquisitionNumber = report.event_number
    ds.IrradiationEventUID = e.event_uid
    ds.SeriesDescription = e.protocol
    ds.ProtocolName = e.protocol
    ds.BodyPartExamined = _BODY_PART[e.target_region[0]]
    ds.AnatomicRegionSequence = (code_sequence_node(e.target_region),)
    ds.PatientPosition = "HFS"
    # Frame of Reference (PS3.3 C.7.4.1) and Image Plane (PS3.3 C.7.6.2), mm
    ds.FrameOfReferenceUID = report.frame_of_reference_uid
    ds.PositionReferenceIndicator = ""
    recon = _RECON_DIAMETER_MM[e.phantom]
    spacing = recon / 8
    ds.SliceThickness = format_ds(e.total_collimation_mm if e.kind == "stationary"
                                  else (5.0 if e.phantom == "head" else 2.5))
    ds.ImagePositionPatient = [format_ds(-recon / 2 + spacing / 2)] * 2 + ["0"]
    ds.ImageOrientationPatient = ["1", "0", "0", "0", "1", "0"]
    ds.SliceLocation = "0"
    ds.PixelSpacing = [format_ds(spacing)] * 2
    if exam.contrast:  # Contrast/Bolus module (PS3.3 C.7.6.4): required if contrast used
        ds.ContrastBolusAgent = CONTRAST_AGENT
        ds.ContrastBolusRoute = "IV"
    # CT Image module (PS3.3 C.8.2.1)
    ds.ScanOptions = _SCAN_OPTIONS[e.kind]
    ds.KVP = format_ds(e.kvp)
    ds.DataCollectionDiameter = format_ds(_DATA_COLLECTION_DIAMETER_MM[e.phantom])
    ds.ReconstructionDiameter = format_ds(recon)
    ds.GantryDetectorTilt = "0"
    ds.RotationDirection = "CW"
    t_ms = _per_image_exposure_ms(e)
    ds.ExposureTime = str(int(round(t_ms)))
    ds.XRayTubeCurrent = str(int(round(e.tube_current_ma)))
    ds.Exposure = str(int(round(e.tube_current_ma * t_ms / 1000.0)))  # mA.s
    ds.ExposureInuAs = str(int(round(e.tube_current_ma * t_ms)))       # mA.ms = uA.s
    ds.RevolutionTime = e.rotation_time_s
    ds.SingleCollimationWidth = e.single_collimation_mm
    ds.TotalCollimationWidth = e.total_collimation_mm
    if e.kind == "spiral":
        feed = e.pitch_factor * e.total_collimation_mm  # pitch = feed / total collimation
        ds.TableFeedPerRotation = feed
        ds.TableSpeed = feed / e.rotation_time_s
        ds.SpiralPitchFactor = e.pitch_factor
    if e.ctdivol_mgy is not None:
        ds.CTDIvol = e.ctdivol_mgy
        ds.CTDIPhantomTypeCodeSequence = (code_sequence_node(_PHANTOM[e.phantom]),)
    ds.RescaleIntercept = "-1024"
    ds.RescaleSlope = "1"
    ds.RescaleType = "HU"
    ds.WindowCenter = "40"
    ds.WindowWidth = "80" if e.phantom == "head" else "400"
    _tiny_pixels(ds, _water_disc())
    return ds


def make_mg_image(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    return _mg_image(scenario, spec, report).dataset()


def _mg_image(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Header:
    """Digital Mammography X-Ray Image Storage - For Presentation (PS3.3 A.27) for one view.

    Shares the RDSR event's Irradiation Event UID (0008,3010). Units: Organ Dose
    (0040,0316) is in dGy (PS3.3 C.8.7.8), the average glandular dose of this view, so
    dGy = AGD mGy / 100 (1 dGy = 100 mGy); Entrance Dose in mGy (0040,8302) mGy; Body Part
    Thickness (0018,11A0) mm, the compressed breast thickness, and Compression Force
    (0018,11A2) N (PS3.3 C.8.11.5 DX Positioning); Half Value Layer (0040,0314) mm of
    aluminium; Filter Thickness Minimum / Maximum (0018,7052 / 7054) mm; KVP kV, Exposure Time ms, X-Ray Tube
    Current mA, Exposure mAs, Exposure in uAs (PS3.3 C.8.7.8).
    """
    e = spec.projection_events[report.event_number - 1]
    ds = _base(scenario, spec, report, MG_IMAGE, "MG", 1)
    ds.ImageType = ["ORIGINAL", "PRIMARY"]
    ds.AcquisitionDate = _da(e.started.date())
    ds.AcquisitionTime = _tm(e.started)
    ds.AcquisitionNumber = report.event_number
    ds.IrradiationEventUID = e.event_uid
    ds.SeriesDescription = spec.study_description
    ds.ProtocolName = e.protocol
    ds.BodyPartExamined = "BREAST"
    # DX Series (PS3.3 C.8.11.1), DX Anatomy Imaged (C.8.11.2), Mammography Image (C.8.11.7)
    ds.PresentationIntentType = "FOR PRESENTATION"
    ds.AnatomicRegionSequence = (code_sequence_node(_BREAST),)
    ds.ImageLaterality = e.laterality
    ds.PatientOrientation = _MG_ORIENTATION[(e.laterality, e.view)]
    ds.PositionerType = "MAMMOGRAPHIC"
    ds.BreastImplantPresent = "NO"
    ds.OrganExposed = "BREAST"
    ds.ViewCodeSequence = ((*code_sequence_node(_VIEW[e.view]), (_VIEW_MODIFIERS, ())),)
    ds.ViewPosition = e.view
    # DX Positioning (PS3.3 C.8.11.5)
    ds.DistanceSourceToDetector = format_ds(e.sid_mm)
    ds.BodyPartThickness = format_ds(e.compressed_thickness_mm)
    ds.CompressionForce = format_ds(e.compression_force_n)
    # X-Ray Acquisition Dose (PS3.3 C.8.7.8) and X-Ray Generation / Filtration
    ds.KVP = format_ds(e.kvp)
    ds.ExposureTime = str(int(round(e.exposure_time_ms)))
    ds.XRayTubeCurrent = str(int(round(e.tube_current_ma)))
    ds.Exposure = str(int(round(e.exposure_uas / 1000.0)))
    ds.ExposureInuAs = str(int(round(e.exposure_uas)))
    ds.AnodeTargetMaterial = _MATERIAL_TERM[e.anode]
    ds.FilterMaterial = _MATERIAL_TERM[e.filter_material]
    ds.FilterThicknessMinimum = format_ds(e.filter_thickness_mm)
    ds.FilterThicknessMaximum = format_ds(e.filter_thickness_mm)
    ds.HalfValueLayer = format_ds(e.hvl_mm)
    ds.OrganDose = format_ds(e.agd_mgy / 100.0)
    ds.EntranceDoseInmGy = format_ds(e.entrance_exposure_mgy)
    # DX Detector (PS3.3 C.8.11.4), mm
    ds.DetectorType = "DIRECT"
    ds.ImagerPixelSpacing = ["0.1", "0.1"]
    # Acquisition Context (PS3.3 C.7.6.14): type 2, empty
    ds.AcquisitionContextSequence = Sequence()
    # DX Image (PS3.3 C.8.11.3) and VOI LUT (C.11.2): a For Presentation image
    ds.BurnedInAnnotation = "NO"
    ds.PixelIntensityRelationship = "LOG"
    ds.PixelIntensityRelationshipSign = 1
    ds.RescaleIntercept = "0"
    ds.RescaleSlope = "1"
    ds.RescaleType = "US"
    ds.LossyImageCompression = "00"
    ds.PresentationLUTShape = "IDENTITY"
    ds.WindowCenter = "2048"
    ds.WindowWidth = "4096"
    _tiny_pixels(ds, [[(r * 8 + c) * 60 for c in range(8)] for r in range(8)])
    return ds


def make_basic_text_sr(scenario: Scenario, spec: StudySpec, sop_instance_uid: str) -> Dataset:
    """A valid Basic Text SR (a clinical note) filed in a dose study: not a dose object."""
    report = ReportSpec("other", 0, sop_instance_uid,
                        uid(scenario.uid_namespace, spec.study_uid, "text-series"), 1,
                        spec.study_datetime + dt.timedelta(hours=1))
    device = scenario.device(spec.device)
    ds = _base(scenario, spec, report, BASIC_TEXT_SR, "SR", 900).dataset()
    _sr_document(ds, device)
    ds.ValueType = "CONTAINER"
    ds.ConceptNameCodeSequence = Sequence([code_sequence_item(("18748-4", "LN", "Diagnostic imaging study"))])
    ds.ContinuityOfContent = "SEPARATE"
    ds.ContentSequence = Sequence([
        text_item(C.FINDING, "Synthetic note: no dose content."),
    ])
    return ds


SECONDARY_CAPTURE = UID("1.2.840.10008.5.1.4.1.1.7")
_SCREEN_ACQUISITION = {"localizer": "CONSTANT_ANGLE", "spiral": "SPIRAL",
                       "sequenced": "SEQUENCED", "stationary": "STATIONARY"}
_SCREEN_PHANTOM = {"head": ("113690", "IEC Head Dosimetry Phantom"),
                   "body": ("113691", "IEC Body Dosimetry Phantom")}


def make_ct_dose_screen(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    """A CT dose screen: a Secondary Capture Image (PS3.3 A.8.1) a scanner without dose
    reports sends at the end of the exam, its numbers in the Radiation Dose attributes of the
    old PS3.3 C.4.16 (retired from the standard since, still sent by older scanners; dciodvfy
    says so), and, as on a real screen, drawn into the pixels (here a blank 8x8 image).

    One Exposure Dose Sequence (0040,030E) item per acquisition: KVP (0018,0060) kV, Exposure
    Time (0018,1150) ms, X-Ray Tube Current in uA (0018,8151), Acquisition Type (0018,9302),
    CTDIvol (0018,9345) mGy and its phantom (0018,9346), and the event's DLP only as text in
    Comments on Radiation Dose (0040,0310), as such screens do; the total DLP likewise at the
    top level beside Total Number of Exposures (0040,0301). DLPs are written with Python's
    shortest round-trip repr, so the text gives back the exact value.
    """
    events = spec.ct_events[:report.n_events]
    ds = _base(scenario, spec, report, SECONDARY_CAPTURE, "CT", 999).dataset()
    ds.ImageType = ["DERIVED", "SECONDARY", "OTHER"]
    ds.ConversionType = "WSD"
    ds.SeriesDescription = "Dose Report"
    main = next((e for e in events if e.kind != "localizer"), events[0])
    ds.ProtocolName = main.protocol
    ds.PatientOrientation = ""
    ds.BodyPartExamined = _BODY_PART.get(main.target_region[0], "HEAD")  # unpaired: no Laterality
    items = []
    for number, e in enumerate(events, start=1):
        item = Dataset()
        item.KVP = format_ds(e.kvp)
        item.ExposureTime = str(int(round(e.exposure_time_s * 1000.0)))
        item.RadiationMode = "CONTINUOUS"
        item.XRayTubeCurrentInuA = format_ds(round(e.tube_current_ma * 1000.0, 3))
        item.AcquisitionType = _SCREEN_ACQUISITION[e.kind]
        text = f"Event={number}"
        if e.ctdivol_mgy is not None:
            item.CTDIvol = float(e.ctdivol_mgy)
            code, meaning = _SCREEN_PHANTOM[e.phantom]
            phantom = Dataset()
            phantom.CodeValue, phantom.CodingSchemeDesignator, phantom.CodeMeaning = code, "DCM", meaning
            item.CTDIPhantomTypeCodeSequence = Sequence([phantom])
        if e.dlp_mgy_cm is not None:
            text += f"; DLP={float(e.dlp_mgy_cm)!r} mGy*cm"
        item.CommentsOnRadiationDose = text
        items.append(item)
    ds.ExposureDoseSequence = Sequence(items)
    ds.TotalNumberOfExposures = len(events)
    total = sum(e.dlp_mgy_cm for e in events if e.dlp_mgy_cm is not None)
    ds.CommentsOnRadiationDose = f"TotalDLP={float(total)!r} mGy*cm"
    _tiny_pixels(ds, [[0] * 8 for _ in range(8)])
    return ds


_MAKERS = {
    ("dose_screen", "CT"): make_ct_dose_screen,
    ("rdsr", "CT"): make_ct_rdsr,
    ("rdsr", "DX"): make_projection_rdsr,
    ("rdsr", "CR"): make_projection_rdsr,
    ("rdsr", "RF"): make_projection_rdsr,
    ("rdsr", "XA"): make_projection_rdsr,
    ("rdsr", "MG"): make_projection_rdsr,
    ("image_header", "CR"): make_cr_image,
    ("image_header", "DX"): make_cr_image,
    ("image_header", "CT"): make_ct_image,
    ("image_header", "MG"): make_mg_image,
}

_PARTS = {make_ct_rdsr: _ct_rdsr, make_projection_rdsr: _projection_rdsr,
          make_cr_image: lambda *args: (_cr_image(*args), None),
          make_ct_image: lambda *args: (_ct_image(*args), None),
          make_mg_image: lambda *args: (_mg_image(*args), None)}


def make_parts(scenario: Scenario, spec: StudySpec,
               report: ReportSpec) -> tuple[Header | Dataset, Item | None]:
    """What `make_dataset` makes, in the parts encoder.py writes fastest: a dose report's
    header as a Header and its root content item as an Item; an image's header as a
    Header, and None; a dose screen as a Dataset, and None."""
    parts = _PARTS.get(_MAKERS.get((report.kind, spec.modality)))
    if parts is not None:
        return parts(scenario, spec, report)
    return make_dataset(scenario, spec, report), None


def make_dataset(scenario: Scenario, spec: StudySpec, report: ReportSpec) -> Dataset:
    """The dataset for one report of a study, chosen by report kind and unit modality."""
    try:
        maker = _MAKERS[(report.kind, spec.modality)]
    except KeyError:
        raise ValueError(f"no writer for {report.kind} objects of modality {spec.modality}") from None
    return maker(scenario, spec, report)
