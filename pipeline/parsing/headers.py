"""Dose attributes in image headers (units without a dose report). Pure.

Every attribute read here, with its unit as PS3.3 defines it:

* (0018,115E) Image and Fluoroscopy Area Dose Product: dGy.cm2 (C.8.7.8, C.8.7.2);
  1 dGy.cm2 = 0.1 Gy.cm2. Stored as ``dap_gy_cm2``.
* (0040,8302) Entrance Dose in mGy: mGy; (0040,0302) Entrance Dose: dGy, an integer (US);
  1 dGy = 100 mGy. The dose at the patient's entrance surface (C.8.7.8): stored as
  ``entrance_dose_mgy``, never as reference-point air kerma (``dose_rp_mgy`` holds only
  Dose (RP) of a dose report). (0040,8302) is preferred; an integer 0 in (0040,0302) says
  only "below 1 dGy" and is kept as NULL with an issue. (0040,8303) Entrance Dose Derivation
  (IAK incident air kerma, ESAK entrance surface air kerma, ESDBS / ESDNOBS entrance surface
  dose with / without backscatter) is kept beside it: only ESAK is Ka,e.
* (0040,0316) Organ Dose: dGy (C.8.7.8); for a breast (Organ Exposed (0040,0318) BREAST, or a
  mammography or breast tomosynthesis object) it is the average glandular dose:
  ``agd_mgy`` = 100 x Organ Dose. Read at the top level or, for breast tomosynthesis, in the
  X-Ray 3D Acquisition Sequence (0018,9507).
* (0018,11A0) Body Part Thickness: mm (the compressed breast thickness of a mammogram).
* (0018,9345) CTDIvol: mGy (C.8.15.3.8 CT Exposure Macro, C.8.2.1 CT Image). Read at the top
  level of any image object, in the CT Exposure Sequence (0018,9321) at the top level, and in
  the shared or per-frame functional groups of an enhanced CT object (C.8.15.3.8). The same
  value at the top level and in the sequence of one image is one event.
* (0018,1150) Exposure Time: ms; (0018,9328) Exposure Time in ms; (0018,1152) Exposure: mAs;
  (0018,1153) Exposure in uAs; (0018,1151) X-Ray Tube Current and (0018,9330) X-Ray Tube
  Current in mA: mA; (0018,0060) KVP: kV.
* (0020,0032) Image Position (Patient), (0018,0050) Slice Thickness: mm (for the covered
  length of a header-only CT series).

For CT and enhanced objects the per-image dose repeats the value of the whole irradiation
event: images sharing an Irradiation Event UID (0008,3010) are one event and are never summed.
A CT image without one belongs to the event of its series.
"""

from __future__ import annotations

from statistics import fmean

from pydicom.dataset import Dataset

from ..models import CtEvent, IssueKind, ProjectionEvent
from .common import Measurer, header_float, header_text
from .content_tree import parse_dt

__all__ = ["has_breast_markers", "has_ct_dose", "parse_ct_image_events",
           "parse_projection_image_event", "entrance_dose_mgy"]

_PHANTOM = {"113690": "head_16cm", "113691": "body_32cm"}
_ACQ = {"SPIRAL": "spiral", "SEQUENCED": "sequenced", "CONSTANT_ANGLE": "constant_angle",
        "STATIONARY": "stationary", "FREE": "free"}


def _item(ds: Dataset | None, keyword: str) -> Dataset | None:
    """The first item of sequence `keyword` of `ds`, if any."""
    if ds is None or keyword not in ds:
        return None
    seq = ds.get(keyword)
    return seq[0] if seq else None


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


def has_breast_markers(ds: Dataset) -> bool:
    """Whether the header describes a breast exposure, whatever its SOP class: Organ Exposed
    (0040,0318) BREAST, Body Part Examined BREAST, or an X-Ray 3D Acquisition Sequence item
    (breast tomosynthesis) that says so or carries Organ Dose."""
    if (header_text(ds, "OrganExposed") or "").upper() == "BREAST":
        return True
    if (header_text(ds, "BodyPartExamined") or "").upper() == "BREAST":
        return True
    item = _item(ds, "XRay3DAcquisitionSequence")
    if item is not None and ((header_text(item, "OrganExposed") or "").upper() == "BREAST"
                             or header_text(item, "OrganDose") is not None):
        return True
    return False


def _ct_exposure_items(ds: Dataset) -> list[tuple[Dataset, Dataset | None]]:
    """(CT Exposure item, its frame's functional group item) for each frame that has one;
    per-frame groups first, then shared groups, then the top level (C.8.15.3.8)."""
    out = []
    for frame in ds.get("PerFrameFunctionalGroupsSequence") or []:
        exp = _item(frame, "CTExposureSequence")
        if exp is not None and header_text(exp, "CTDIvol") is not None:
            out.append((exp, frame))
    if out:
        return out
    shared = _item(ds, "SharedFunctionalGroupsSequence")
    exp = _item(shared, "CTExposureSequence")
    if exp is not None and header_text(exp, "CTDIvol") is not None:
        return [(exp, shared)]
    exp = _item(ds, "CTExposureSequence")
    if exp is not None and header_text(exp, "CTDIvol") is not None:
        return [(exp, None)]
    return []


def has_ct_dose(ds: Dataset) -> bool:
    """CTDIvol (0018,9345) at the top level or in a CT Exposure Sequence (any level)."""
    return header_text(ds, "CTDIvol") is not None or bool(_ct_exposure_items(ds))


def entrance_dose_mgy(ds: Dataset, m: Measurer, uid: str) -> float | None:
    """Entrance Dose in mGy: (0040,8302) in mGy, else 100 x (0040,0302) in dGy (1 dGy =
    100 mGy). An integer 0 in (0040,0302) beside a non-zero (0040,8302) is ignored; alone it
    is below the attribute's 1 dGy resolution and kept as NULL with an issue."""
    in_mgy = header_float(ds, "EntranceDoseInmGy")
    in_dgy = header_float(ds, "EntranceDose")
    if in_mgy is not None:
        return _checked(m, in_mgy, "Entrance Dose in mGy (0040,8302)", uid, 30000.0)
    if in_dgy is None:
        return None
    if in_dgy == 0:
        m.issue(IssueKind.BELOW_RESOLUTION,
                "Entrance Dose (0040,0302) is 0 dGy, an integer that says only 'below 1 dGy "
                "(100 mGy)'; kept as NULL", event_uid=uid, raw_value="0", raw_unit="dGy")
        return None
    return _checked(m, in_dgy * 100.0, "Entrance Dose (0040,0302)", uid, 30000.0)


def _organ_dose_dgy(ds: Dataset) -> float | None:
    """Organ Dose (0040,0316) in dGy: top level, else summed over X-Ray 3D Acquisition items."""
    top = header_float(ds, "OrganDose")
    if top is not None:
        return top
    values = [header_float(item, "OrganDose") for item in ds.get("XRay3DAcquisitionSequence") or []]
    values = [v for v in values if v is not None]
    return sum(values) if values else None


def parse_projection_image_event(ds: Dataset, sop_uid: str, modality: str,
                                 m: Measurer) -> ProjectionEvent:
    """The one irradiation event of a projection image (CR, DX, MG, RF, XA) header."""
    uid = _event_uid(ds, sop_uid)
    if header_text(ds, "IrradiationEventUID") is None:
        m.issue(IssueKind.MISSING_EVENT_UID,
                "image has no Irradiation Event UID (0008,3010); the image is its own event",
                event_uid=uid)
    dap_dgy_cm2 = header_float(ds, "ImageAndFluoroscopyAreaDoseProduct")
    dap = _checked(m, None if dap_dgy_cm2 is None else dap_dgy_cm2 * 0.1,
                   "Image and Fluoroscopy Area Dose Product (0018,115E)", uid, 5000.0)
    organ_dgy = _organ_dose_dgy(ds)
    agd = None
    if organ_dgy is not None and (modality == "MG" or has_breast_markers(ds)):
        agd = _checked(m, organ_dgy * 100.0, "Organ Dose (0040,0316)", uid, 100.0)
    tomo = _item(ds, "XRay3DAcquisitionSequence")
    thickness = header_float(ds, "BodyPartThickness")
    if thickness is None and tomo is not None:
        thickness = header_float(tomo, "BodyPartThickness")
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
        entrance_dose_mgy=entrance_dose_mgy(ds, m, uid),
        entrance_dose_derivation=header_text(ds, "EntranceDoseDerivation"),
        kvp=header_float(ds, "KVP"),
        tube_current_ma=header_float(ds, "XRayTubeCurrent"),
        exposure_mas=mas,
        exposure_time_s=None if time_ms is None else time_ms / 1000.0,
        source_to_detector_mm=header_float(ds, "DistanceSourceToDetector"),
        positioner_primary_angle_deg=header_float(ds, "PositionerPrimaryAngle"),
        positioner_secondary_angle_deg=header_float(ds, "PositionerSecondaryAngle"),
        filter_material=header_text(ds, "FilterMaterial"),
        agd_mgy=agd,
        compressed_breast_thickness_mm=thickness if modality == "MG" else None,
        half_value_layer_mm=header_float(ds, "HalfValueLayer"),
        anode_target=header_text(ds, "AnodeTargetMaterial"),
        exposure_index=header_float(ds, "ExposureIndex"),
        target_exposure_index=header_float(ds, "TargetExposureIndex"),
        deviation_index=header_float(ds, "DeviationIndex"),
        body_part=header_text(ds, "BodyPartExamined"),
        view_position=header_text(ds, "ViewPosition"),
    )


def _phantom(node: Dataset | None) -> str | None:
    item = _item(node, "CTDIPhantomTypeCodeSequence")
    return None if item is None else _PHANTOM.get(str(item.get("CodeValue", "")), "other")


def _z(node: Dataset | None) -> float | None:
    """z of Image Position (Patient) (0020,0032) of `node` (or its Plane Position item)."""
    if node is None:
        return None
    text = header_text(node, "ImagePositionPatient")
    if text is None:
        text = header_text(_item(node, "PlanePositionSequence") or Dataset(),
                           "ImagePositionPatient")
    parts = (text or "").split("\\")
    try:
        return float(parts[2]) if len(parts) == 3 else None
    except ValueError:
        return None


def _frame_event_uid(frame: Dataset | None) -> str | None:
    item = _item(frame, "IrradiationEventIdentificationSequence")
    return None if item is None else header_text(item, "IrradiationEventUID")


def parse_ct_image_events(ds: Dataset, sop_uid: str, m: Measurer) -> list[CtEvent]:
    """The CT irradiation event(s) of a CT image header: one for a classic image; for an
    enhanced (multi-frame) object one per Irradiation Event UID of its frames, with the mean
    of the frames' CTDIvol (each frame's value is the average dose for that frame,
    C.8.15.3.8)."""
    series = header_text(ds, "SeriesInstanceUID")
    fallback = header_text(ds, "IrradiationEventUID")
    fallback = fallback.split("\\")[0] if fallback else (
        f"{series}.series" if series else f"{sop_uid}.img")
    shared = _item(ds, "SharedFunctionalGroupsSequence")
    thickness = header_float(ds, "SliceThickness")
    if thickness is None:
        thickness = header_float(_item(shared, "PixelMeasuresSequence") or Dataset(),
                                 "SliceThickness")
    frames = _ct_exposure_items(ds)
    if not frames:  # a classic image with CTDIvol at the top level only
        frames = [(ds, None)]
    groups: dict[str, list[tuple[Dataset, Dataset | None]]] = {}
    for exp, frame in frames:
        uid = _frame_event_uid(frame) or _frame_event_uid(shared) or fallback
        groups.setdefault(uid, []).append((exp, frame))
    events = []
    for uid, members in groups.items():
        exp0, frame0 = members[0]
        values = [header_float(exp, "CTDIvol") for exp, _ in members]
        values = [v for v in values if v is not None]
        ctdivol = fmean(values) if values else None
        zs = [z for z in (_z(frame) for _, frame in members) if z is not None]
        if not zs and frame0 is shared and frame0 is not None:  # CTDIvol shared, positions per frame
            zs = [z for z in (_z(f) for f in ds.get("PerFrameFunctionalGroupsSequence") or [])
                  if z is not None]
        if not zs:
            zs = [z for z in (_z(ds),) if z is not None]
        acq = _item(frame0, "CTAcquisitionTypeSequence") or _item(shared, "CTAcquisitionTypeSequence")
        details = _item(frame0, "CTXRayDetailsSequence") or _item(shared, "CTXRayDetailsSequence")
        time_ms = header_float(exp0, "ExposureTimeInms")
        if time_ms is None:
            time_ms = header_float(ds, "ExposureTime")
        current = header_float(exp0, "XRayTubeCurrentInmA")
        if current is None:
            current = header_float(ds, "XRayTubeCurrent")
        acq_type = header_text(acq, "AcquisitionType") if acq is not None else None
        acq_type = acq_type or header_text(ds, "AcquisitionType")
        if not acq_type and "LOCALIZER" in (header_text(ds, "ImageType") or "").upper():
            acq_type = "CONSTANT_ANGLE"  # PS3.3 C.8.2.1.1.1: a CT localizer (scout) image
        events.append(CtEvent(
            event_uid=uid,
            sop_instance_uid=sop_uid,
            source_kind="image_header",
            acquisition_protocol=header_text(ds, "ProtocolName") or header_text(ds, "SeriesDescription"),
            target_region=header_text(ds, "BodyPartExamined"),
            ct_acquisition_type=_ACQ.get((acq_type or "").upper()),
            started_at=_started(ds),
            exposure_time_s=None if time_ms is None else time_ms / 1000.0,
            nominal_single_collimation_mm=header_float(ds, "SingleCollimationWidth"),
            nominal_total_collimation_mm=header_float(ds, "TotalCollimationWidth"),
            pitch_factor=header_float(ds, "SpiralPitchFactor"),
            kvp=header_float(details, "KVP") if details is not None and header_text(details, "KVP")
            else header_float(ds, "KVP"),
            tube_current_ma=current,
            exposure_time_per_rotation_s=header_float(ds, "RevolutionTime"),
            ctdivol_mgy=_checked(m, ctdivol, "CTDIvol (0018,9345)", uid, 3000.0),
            ctdi_phantom=_phantom(exp0) or _phantom(ds),
            water_equivalent_diameter_mm=header_float(ds, "WaterEquivalentDiameter"),
            series_instance_uid=series,
            image_z_min_mm=min(zs) if zs else None,
            image_z_max_mm=max(zs) if zs else None,
            slice_thickness_mm=thickness,
            n_images=len(members) if len(frames) > 1 else int(header_float(ds, "NumberOfFrames") or 1),
        ))
    return events
