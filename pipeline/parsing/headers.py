"""Dose attributes in image headers (units without a dose report). Pure.

Units are fixed by the attribute definitions in PS3.3:
* (0018,115E) Image and Fluoroscopy Area Dose Product: dGy.cm2 (C.8.7.8 / C.8.7.2);
  1 dGy.cm2 = 0.1 Gy.cm2.
* (0040,0302) Entrance Dose: dGy (US, integer); (0040,8302) Entrance Dose in mGy: mGy.
* (0040,0316) Organ Dose: dGy (C.8.31.5; for mammography the average glandular dose).
* (0018,9345) CTDIvol: mGy (C.8.15.3.8 CT Exposure Macro).
* (0018,1150) Exposure Time: ms; (0018,1152) Exposure: mAs; (0018,1153) Exposure in uAs: uAs;
  (0018,1151) X-Ray Tube Current: mA; (0018,11A0) Body Part Thickness: mm.

For CT and enhanced objects the per-image dose repeats the value of the whole irradiation
event: images sharing an Irradiation Event UID (0008,3010) are one event and are never summed.
"""

from __future__ import annotations

from pydicom.dataset import Dataset

from ..models import CtEvent, IssueKind, ProjectionEvent
from .common import Measurer, header_float, header_text
from .content_tree import parse_dt

__all__ = ["parse_ct_image_event", "parse_projection_image_event"]

_PHANTOM = {"113690": "head_16cm", "113691": "body_32cm"}
_ACQ = {"SPIRAL": "spiral", "SEQUENCED": "sequenced", "CONSTANT_ANGLE": "constant_angle",
        "STATIONARY": "stationary", "FREE": "free"}


def _event_uid(ds: Dataset, sop_uid: str) -> str:
    value = header_text(ds, "IrradiationEventUID")
    return value.split("\\")[0] if value else f"{sop_uid}.img"


def _started(ds: Dataset):
    date = header_text(ds, "AcquisitionDate") or header_text(ds, "ContentDate")
    time = header_text(ds, "AcquisitionTime") or header_text(ds, "ContentTime") or ""
    return parse_dt(f"{date}{time.split('.')[0]}") if date else None


def _checked(m: Measurer, value: float | None, name: str, uid: str, high: float) -> float | None:
    if value is None:
        return None
    if value < 0:
        m.issue(IssueKind.NEGATIVE_VALUE, f"{name}: negative value {value:g}", event_uid=uid,
                raw_value=repr(value))
        return None
    if value > high:
        m.issue(IssueKind.IMPLAUSIBLE_VALUE, f"{name}: {value:g} is implausibly large; kept as NULL",
                event_uid=uid, raw_value=repr(value))
        return None
    return value


def parse_projection_image_event(ds: Dataset, sop_uid: str, modality: str,
                                 m: Measurer) -> ProjectionEvent:
    uid = _event_uid(ds, sop_uid)
    if header_text(ds, "IrradiationEventUID") is None:
        m.issue(IssueKind.MISSING_EVENT_UID,
                "image has no Irradiation Event UID (0008,3010); the image is its own event",
                event_uid=uid)
    dap_dgy_cm2 = header_float(ds, "ImageAndFluoroscopyAreaDoseProduct")
    dap = _checked(m, None if dap_dgy_cm2 is None else dap_dgy_cm2 * 0.1,
                   "Image and Fluoroscopy Area Dose Product (0018,115E)", uid, 5000.0)
    entrance_mgy = header_float(ds, "EntranceDoseInmGy")
    if entrance_mgy is None:
        entrance_dgy = header_float(ds, "EntranceDose")
        entrance_mgy = None if entrance_dgy is None else entrance_dgy * 100.0
    organ_dgy = header_float(ds, "OrganDose")
    organ_exposed = (header_text(ds, "OrganExposed") or "").upper()
    agd = None
    if organ_dgy is not None and (modality == "MG" or organ_exposed == "BREAST"):
        agd = _checked(m, organ_dgy * 100.0, "Organ Dose (0040,0316)", uid, 100.0)
    uas = header_float(ds, "ExposureInuAs")
    mas = uas / 1000.0 if uas is not None else header_float(ds, "Exposure")
    time_ms = header_float(ds, "ExposureTime")
    laterality = header_text(ds, "ImageLaterality") or header_text(ds, "Laterality")
    return ProjectionEvent(
        event_uid=uid,
        sop_instance_uid=sop_uid,
        source_kind="image_header",
        event_type="fluoroscopy" if header_text(ds, "RadiationSetting") == "SC" else "stationary",
        acquisition_plane="single",
        started_at=_started(ds),
        acquisition_protocol=header_text(ds, "ProtocolName") or header_text(ds, "SeriesDescription"),
        laterality=laterality if laterality in ("L", "R", "B") else None,
        dap_gy_cm2=dap,
        dose_rp_mgy=_checked(m, entrance_mgy if modality != "MG" else None,
                             "Entrance Dose", uid, 30000.0),
        entrance_exposure_rp_mgy=entrance_mgy if modality == "MG" else None,
        kvp=header_float(ds, "KVP"),
        tube_current_ma=header_float(ds, "XRayTubeCurrent"),
        exposure_mas=mas,
        exposure_time_s=None if time_ms is None else time_ms / 1000.0,
        source_to_detector_mm=header_float(ds, "DistanceSourceToDetector"),
        positioner_primary_angle_deg=header_float(ds, "PositionerPrimaryAngle"),
        positioner_secondary_angle_deg=header_float(ds, "PositionerSecondaryAngle"),
        filter_material=header_text(ds, "FilterMaterial"),
        agd_mgy=agd,
        compressed_breast_thickness_mm=header_float(ds, "BodyPartThickness") if modality == "MG" else None,
        half_value_layer_mm=header_float(ds, "HalfValueLayer"),
        anode_target=header_text(ds, "AnodeTargetMaterial"),
        exposure_index=header_float(ds, "ExposureIndex"),
        target_exposure_index=header_float(ds, "TargetExposureIndex"),
        deviation_index=header_float(ds, "DeviationIndex"),
        body_part=header_text(ds, "BodyPartExamined"),
        view_position=header_text(ds, "ViewPosition"),
    )


def parse_ct_image_event(ds: Dataset, sop_uid: str, m: Measurer) -> CtEvent:
    uid = _event_uid(ds, sop_uid)
    phantom = None
    seq = ds.get("CTDIPhantomTypeCodeSequence")
    if seq:
        phantom = _PHANTOM.get(str(seq[0].get("CodeValue", "")), "other")
    time_ms = header_float(ds, "ExposureTime")
    return CtEvent(
        event_uid=uid,
        sop_instance_uid=sop_uid,
        source_kind="image_header",
        acquisition_protocol=header_text(ds, "ProtocolName") or header_text(ds, "SeriesDescription"),
        target_region=header_text(ds, "BodyPartExamined"),
        ct_acquisition_type=_ACQ.get((header_text(ds, "AcquisitionType") or "").upper()),
        started_at=_started(ds),
        exposure_time_s=None if time_ms is None else time_ms / 1000.0,
        nominal_single_collimation_mm=header_float(ds, "SingleCollimationWidth"),
        nominal_total_collimation_mm=header_float(ds, "TotalCollimationWidth"),
        pitch_factor=header_float(ds, "SpiralPitchFactor"),
        kvp=header_float(ds, "KVP"),
        tube_current_ma=header_float(ds, "XRayTubeCurrent"),
        exposure_time_per_rotation_s=header_float(ds, "RevolutionTime"),
        ctdivol_mgy=_checked(m, header_float(ds, "CTDIvol"), "CTDIvol (0018,9345)", uid, 3000.0),
        ctdi_phantom=phantom,
        water_equivalent_diameter_mm=header_float(ds, "WaterEquivalentDiameter"),
    )
