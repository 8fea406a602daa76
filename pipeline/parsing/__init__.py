"""Pure parsing core: pydicom Dataset in, DoseObject out. No I/O.

``parse_dose_object`` picks a parser by SOP Class UID (a dict, not a ladder); dose SRs are
then routed by root template (TID 10011 CT, TID 10001 projection), recognised by the root's
Content Template Sequence or, when a device omits it, by the Procedure reported code and the
containers present.
"""

from __future__ import annotations

from collections.abc import Callable

from pydicom.dataset import Dataset
from pydicom.uid import UID

from .. import concepts as C
from ..errors import MalformedReportError, NotADoseObjectError
from ..models import DoseObject, IssueKind, ObjectKind
from .common import (Measurer, Pseudonymiser, content_datetime, device_info, header_text,
                     study_info)
from .content_tree import (MAX_DEPTH, TreeTooDeepError, code_value_of, concept_key, depth,
                           first, text_of)
from .ct import parse_ct_accumulated, parse_ct_events
from .dose_screen import has_exposure_dose, looks_like_dose_screen, parse_dose_screen
from .headers import (has_breast_markers, has_ct_dose, parse_ct_image_events,
                      parse_projection_image_event)
from .projection import parse_projection_accumulated, parse_projection_events, projection_modality

__all__ = ["DOSE_SR_CLASSES", "IMAGE_CLASSES", "MAX_ITEMS", "parse_dose_object"]

XRAY_RDSR = "1.2.840.10008.5.1.4.1.1.88.67"
ENHANCED_XRAY_RDSR = "1.2.840.10008.5.1.4.1.1.88.76"
DOSE_SR_CLASSES = {XRAY_RDSR, ENHANCED_XRAY_RDSR}

# Image storage classes whose headers may carry dose attributes -> modality if not in header.
IMAGE_CLASSES = {
    "1.2.840.10008.5.1.4.1.1.2": "CT",        # CT Image
    "1.2.840.10008.5.1.4.1.1.2.1": "CT",      # Enhanced CT Image
    "1.2.840.10008.5.1.4.1.1.1": "CR",        # CR Image
    "1.2.840.10008.5.1.4.1.1.1.1": "DX",      # Digital X-Ray Image - For Presentation
    "1.2.840.10008.5.1.4.1.1.1.1.1": "DX",    # Digital X-Ray Image - For Processing
    "1.2.840.10008.5.1.4.1.1.1.2": "MG",      # Digital Mammography - For Presentation
    "1.2.840.10008.5.1.4.1.1.1.2.1": "MG",    # Digital Mammography - For Processing
    "1.2.840.10008.5.1.4.1.1.12.1": "XA",     # X-Ray Angiographic Image
    "1.2.840.10008.5.1.4.1.1.12.1.1": "XA",   # Enhanced XA Image
    "1.2.840.10008.5.1.4.1.1.12.2": "RF",     # X-Ray Radiofluoroscopic Image
    "1.2.840.10008.5.1.4.1.1.12.2.1": "RF",   # Enhanced XRF Image
    "1.2.840.10008.5.1.4.1.1.13.1.3": "MG",   # Breast Tomosynthesis Image
    "1.2.840.10008.5.1.4.1.1.13.1.4": "MG",   # Breast Projection X-Ray Image - For Presentation
    "1.2.840.10008.5.1.4.1.1.13.1.5": "MG",   # Breast Projection X-Ray Image - For Processing
    "1.2.840.10008.5.1.4.1.1.7": None,        # Secondary Capture Image (dose screens)
    "1.2.840.10008.5.1.4.1.1.7.1": None,      # Multi-frame Single Bit SC
    "1.2.840.10008.5.1.4.1.1.7.2": None,      # Multi-frame Grayscale Byte SC
    "1.2.840.10008.5.1.4.1.1.7.3": None,      # Multi-frame Grayscale Word SC
    "1.2.840.10008.5.1.4.1.1.7.4": None,      # Multi-frame True Color SC
}
_PROJECTION_MODALITIES = ("CR", "DX", "MG", "XA", "RF", "PX", "IO")
_SR_PREFIX = "1.2.840.10008.5.1.4.1.1.88."
_NOT_COUNTED = {
    "1.2.840.10008.5.1.4.1.1.88.73": "Patient Radiation Dose SR: a derived estimate; the source "
                                     "reports are counted instead, never both",
    "1.2.840.10008.5.1.4.1.1.88.68": "Radiopharmaceutical Radiation Dose SR: not an X-ray dose",
}
MAX_ITEMS = 500_000  # a long interventional report has ~100k; more is hostile
_PROJECTION_DOSE_ATTRIBUTES = ("ImageAndFluoroscopyAreaDoseProduct", "EntranceDoseInmGy",
                               "EntranceDose", "OrganDose")


def _class_name(uid: str) -> str:
    name = UID(uid).name
    return name if name != uid else f"SOP class {uid}"


def _count_items(ds: Dataset, limit: int) -> int:
    stack, n = [ds], 0
    while stack and n <= limit:
        node = stack.pop()
        seq = node.get("ContentSequence")
        if seq:
            n += len(seq)
            stack.extend(seq)
    return n


def _parse_sr(ds: Dataset, sop_uid: str, sop_class: str, pseudonymise: Pseudonymiser,
              max_items: int = MAX_ITEMS) -> DoseObject:
    if concept_key(ds) != ("DCM", C.XRAY_RADIATION_DOSE_REPORT.value):
        root = ds.get("ConceptNameCodeSequence")
        found = f"({root[0].get('CodeValue')}, {root[0].get('CodingSchemeDesignator')})" if root else "none"
        raise MalformedReportError(
            f"{sop_uid}: root concept is {found}, not (113701, DCM) X-Ray Radiation Dose Report",
            reason="not_a_dose_report", sop_instance_uid=sop_uid, concept="DCM:113701")
    if not ds.get("ContentSequence"):
        raise MalformedReportError(f"{sop_uid}: dose report has an empty content tree",
                                   reason="empty_content_tree", sop_instance_uid=sop_uid)
    try:
        if depth(ds) > MAX_DEPTH:
            raise TreeTooDeepError
    except (TreeTooDeepError, RecursionError):
        raise MalformedReportError(
            f"{sop_uid}: content tree nested deeper than {MAX_DEPTH} levels",
            reason="content_tree_too_deep", sop_instance_uid=sop_uid) from None
    if _count_items(ds, max_items) > max_items:
        raise MalformedReportError(f"{sop_uid}: content tree has more than {max_items} items",
                                   reason="content_tree_too_large", sop_instance_uid=sop_uid)

    template = None
    tpl = ds.get("ContentTemplateSequence")
    if tpl:
        template = str(tpl[0].get("TemplateIdentifier", "") or "").strip() or None
    procedure = code_value_of(first(ds, C.PROCEDURE_REPORTED))
    proc_key = procedure[0] if procedure else None
    is_ct = template == "10011" or proc_key == ("SCT", C.COMPUTED_TOMOGRAPHY_XRAY.value) or (
        template is None and first(ds, C.CT_ACQUISITION, "CONTAINER") is not None)
    is_mammo = proc_key == ("SCT", C.MAMMOGRAPHY.value)
    has_structure = first(ds, C.CT_ACQUISITION, "CONTAINER") is not None or \
        first(ds, C.IRRADIATION_EVENT_XRAY_DATA, "CONTAINER") is not None or \
        first(ds, C.ACCUMULATED_XRAY_DOSE_DATA, "CONTAINER") is not None or \
        first(ds, C.CT_ACCUMULATED_DOSE_DATA, "CONTAINER") is not None
    if sop_class == ENHANCED_XRAY_RDSR and not has_structure:
        raise MalformedReportError(
            f"{sop_uid}: Enhanced X-Ray Radiation Dose SR (TID 10040 family) without classic "
            "TID 10001/10011 structure is not read by this version",
            reason="enhanced_rdsr_unsupported", sop_instance_uid=sop_uid)

    m = Measurer()
    study = study_info(ds, pseudonymise, m)
    if is_ct:
        kind = ObjectKind.RDSR_CT
        ct_events = parse_ct_events(ds, sop_uid, m)
        accumulated = parse_ct_accumulated(ds, sop_uid, m)
        projection_events = []
        modality = "CT"
    else:
        kind = ObjectKind.RDSR_PROJECTION
        ct_events = []
        projection_events = parse_projection_events(ds, sop_uid, m)
        accumulated = parse_projection_accumulated(ds, sop_uid, m)
        modality = projection_modality(ds, projection_events, is_mammo)
    if sop_class == ENHANCED_XRAY_RDSR:
        kind = ObjectKind.RDSR_ENHANCED
    if not ct_events and not projection_events and not accumulated:
        raise MalformedReportError(
            f"{sop_uid}: dose report has neither irradiation events nor accumulated dose data",
            reason="no_dose_content", sop_instance_uid=sop_uid)
    device, has_observer = device_info(ds, modality, from_tree=True)
    note = None
    if not has_observer:
        note = "no device observer context (TID 1004): device identified from the equipment module"
        m.issue(IssueKind.NO_DEVICE_CONTEXT, note, C.DEVICE_OBSERVER_UID)
    source = code_value_of(first(ds, C.SOURCE_OF_DOSE_INFORMATION))
    return DoseObject(
        sop_instance_uid=sop_uid,
        sop_class_uid=sop_class,
        kind=kind,
        modality=modality,
        content_datetime=content_datetime(ds),
        instance_number=_int(header_text(ds, "InstanceNumber")),
        source_of_dose_information=source[1] if source else None,
        series_description=header_text(ds, "SeriesDescription"),
        protocol_name=header_text(ds, "ProtocolName"),
        body_part=header_text(ds, "BodyPartExamined"),
        study=study,
        device=device,
        ct_events=ct_events,
        projection_events=projection_events,
        accumulated=accumulated,
        issues=m.issues,
        note=note,
    )


def _int(text: str | None) -> int | None:
    """An IS value (PS3.5: -2^31 .. 2^31-1) as int; None if absent, not an integer or out of
    that range (it must fit the warehouse's BIGINT)."""
    try:
        value = int(text) if text is not None else None
    except ValueError:
        return None
    return value if value is None or -2**31 <= value < 2**31 else None


def _header_modality(ds: Dataset, sop_class: str, ct_dose: bool) -> str | None:
    """The irradiating modality of an image header, from its content first: CT dose is read
    only where CTDIvol exists; a breast exposure under any class (a tomosynthesis object stored
    as CT Image, a Secondary Capture) is MG; else the header's Modality, else the class's."""
    if ct_dose:
        return "CT"
    if has_breast_markers(ds):
        return "MG"
    stated = (header_text(ds, "Modality") or "").upper()
    if stated in _PROJECTION_MODALITIES:
        return stated
    by_class = IMAGE_CLASSES.get(sop_class)
    return by_class if by_class in _PROJECTION_MODALITIES else None


def _parse_image(ds: Dataset, sop_uid: str, sop_class: str, pseudonymise: Pseudonymiser,
                 max_items: int = MAX_ITEMS) -> DoseObject:
    """An image object of any class: a dose screen (Exposure Dose Sequence), CT dose
    (CTDIvol, classic or enhanced), or projection dose attributes in its header."""
    screen = has_exposure_dose(ds)
    ct_dose = screen or has_ct_dose(ds)
    modality = _header_modality(ds, sop_class, ct_dose)
    projection_dose = modality is not None and modality != "CT" and any(
        header_text(ds, a) is not None for a in _PROJECTION_DOSE_ATTRIBUTES) or (
        modality == "MG" and has_breast_markers(ds))
    if not ct_dose and not projection_dose:
        if looks_like_dose_screen(ds, sop_class):
            raise NotADoseObjectError(
                f"{sop_uid}: {_class_name(sop_class)} looks like a dose screen but holds its "
                "numbers only as pixels (no Exposure Dose Sequence (0040,030E), no CTDIvol); "
                "reading burned-in text is not done", reason="dose_screen_pixels_only",
                sop_instance_uid=sop_uid)
        if IMAGE_CLASSES.get(sop_class) == "CT":
            raise NotADoseObjectError(
                f"{sop_uid}: {_class_name(sop_class)} without CTDIvol (0018,9345) in its header",
                reason="image_without_dose_attributes", sop_instance_uid=sop_uid)
        raise NotADoseObjectError(
            f"{sop_uid}: {_class_name(sop_class)} without dose attributes in its header",
            reason="image_without_dose_attributes" if sop_class in IMAGE_CLASSES
            else "not_a_dose_class", sop_instance_uid=sop_uid)
    m = Measurer()
    study = study_info(ds, pseudonymise, m)
    device, _ = device_info(ds, modality, from_tree=False)
    ct, proj, accumulated = [], [], []
    kind, source = ObjectKind.IMAGE_HEADER, "Copied From Image Attributes"
    if screen:
        kind, source = ObjectKind.DOSE_SCREEN, "Dose Screen Attributes"
        ct, accumulated = parse_dose_screen(ds, sop_uid, m)
    elif modality == "CT":
        ct = parse_ct_image_events(ds, sop_uid, m)
    else:
        proj = [parse_projection_image_event(ds, sop_uid, modality, m)]
    return DoseObject(
        sop_instance_uid=sop_uid, sop_class_uid=sop_class, kind=kind,
        modality=modality, content_datetime=content_datetime(ds),
        instance_number=_int(header_text(ds, "InstanceNumber")),
        source_of_dose_information=source,
        series_description=header_text(ds, "SeriesDescription"),
        protocol_name=header_text(ds, "ProtocolName"),
        body_part=header_text(ds, "BodyPartExamined"),
        study=study, device=device, ct_events=ct, projection_events=proj,
        accumulated=accumulated, issues=m.issues)


_PARSERS: dict[str, Callable[..., DoseObject]] = {
    **{uid: _parse_sr for uid in DOSE_SR_CLASSES},
    **{uid: _parse_image for uid in IMAGE_CLASSES},
}


def parse_dose_object(ds: Dataset, pseudonymise: Pseudonymiser, *,
                      max_items: int = MAX_ITEMS) -> DoseObject:
    """Parse one dataset into a DoseObject.

    Raises
    ------
    NotADoseObjectError
        Valid DICOM of a SOP class that carries no X-ray dose we count (status not_dose).
    MalformedReportError
        A dose object whose structure cannot be read (quarantined with the reason).
    """
    sop_class = header_text(ds, "SOPClassUID")
    sop_uid = header_text(ds, "SOPInstanceUID")
    if sop_class is None or sop_uid is None:
        raise MalformedReportError("dataset has no SOP Class UID or SOP Instance UID",
                                   reason="no_sop_identity")
    if sop_class in _NOT_COUNTED:
        raise NotADoseObjectError(f"{sop_uid}: {_NOT_COUNTED[sop_class]}",
                                  reason="not_counted_dose_class", sop_instance_uid=sop_uid)
    parser = _PARSERS.get(sop_class)
    if parser is None and not sop_class.startswith(_SR_PREFIX) and (
            "Rows" in ds or has_exposure_dose(ds) or has_ct_dose(ds)):
        parser = _parse_image  # an image of any other class: read only if its header has dose
    if parser is None:
        raise NotADoseObjectError(f"{sop_uid}: {_class_name(sop_class)} carries no dose information",
                                  reason="not_a_dose_class", sop_instance_uid=sop_uid)
    return parser(ds, sop_uid, sop_class, pseudonymise, max_items)
