"""Per-event reference of the peak-skin-dose projection: `compute_skin_dose` as it was before the
events were projected in blocks (pipeline/skin_dose.py at d66eeb2), one event at a time over
every cell of the phantom. tests/pipeline/test_skin_dose_vectorised.py checks the block version
against it; bench/skin_dose.py times the two. The helpers the change left alone (phantom,
surface, patient rotation, backscatter lookup) are imported; the loop, `_rp_distance` and
`beam_direction` are the old text.
"""

import math

import numpy as np

from pipeline.skin_dose import (
    BSF_SOURCE,
    F_SOURCE,
    F_TISSUE_AIR,
    SkinDoseEvent,
    SkinDoseResult,
    SkinDoseSettings,
    _bsf,
    _surface,
    backscatter_factor,
    patient_rotation,
    phantom_for,
)

__all__ = ["reference_compute_skin_dose"]


def beam_direction(primary_deg: float, secondary_deg: float) -> np.ndarray:
    """Unit vector from the isocentre to the detector (PS3.3 C.8.7.5 signs), room frame."""
    a, b = math.radians(primary_deg), math.radians(secondary_deg)
    return np.array([math.sin(a) * math.cos(b), math.sin(b), math.cos(a) * math.cos(b)])


def _rp_distance(e: SkinDoseEvent, source: np.ndarray, d: np.ndarray, table_z: float,
                 s: SkinDoseSettings) -> tuple[float, str]:
    sod = float(e.source_to_isocenter_mm)
    if e.source_to_rp_mm:
        return float(e.source_to_rp_mm), "Distance Source to Reference Point as reported"
    text = (e.reference_point_definition or "").lower()
    if "tabletop" in text and d[2] > 1e-6 and source[2] < table_z:
        # "1cm above Tabletop": where the central ray is 10 mm above the table top
        return (table_z + 10.0 - source[2]) / d[2], "1 cm above the table top (report)"
    note = "report" if "isocenter" in text else "IEC 60601-2-43 default"
    return sod - s.rp_from_isocentre_mm, f"15 cm from the isocentre towards the source ({note})"


def reference_compute_skin_dose(events: list[SkinDoseEvent], *, height_m: float | None = None,
                      weight_kg: float | None = None,
                      settings: SkinDoseSettings = SkinDoseSettings()) -> SkinDoseResult:
    """Skin-dose map and PSD of one study (method in the module docstring).

    Parameters
    ----------
    events : list of SkinDoseEvent
        Projection irradiation events with a Dose (RP); others are not passed.
    height_m, weight_kg : float or None
        Patient size for the phantom (`phantom_for`).
    settings : SkinDoseSettings

    Returns
    -------
    SkinDoseResult
        `factors` names every factor and its source; `event_factors` gives, per event, the
        factors on its central ray (inverse-square, BSF, f, table transmission).
    """
    s = settings
    ph = phantom_for(height_m, weight_kg, s)
    theta, along, around = _surface(ph, s.cell_mm)
    a, b = ph.semi_lateral_mm, ph.semi_ap_mm
    cos_t, sin_t = np.cos(theta)[:, None], np.sin(theta)[:, None]
    # the phantom in the patient frame (x left, y head, z anterior), posterior midline at -pi/2
    body = np.stack(np.broadcast_arrays(a * cos_t, along[None, :], b * sin_t), -1)
    normal_body = np.stack(np.broadcast_arrays(cos_t / a, np.zeros((1, along.size)), sin_t / b), -1)
    normal_body /= np.linalg.norm(normal_body, axis=-1, keepdims=True)
    dose = np.zeros((theta.size, along.size))
    fallback = 0.0
    per_event: list[dict] = []
    rp_notes: set[str] = set()
    positions: set[str] = set()
    n_geom = 0
    posed: dict = {}
    for e in events:
        if not e.has_geometry:
            side = math.sqrt(e.field_area_cm2) if e.field_area_cm2 else 10.0
            if e.field_area_cm2 and e.source_to_isocenter_mm and e.source_to_detector_mm:
                # the field at the reference point, not at the detector
                side *= (e.source_to_isocenter_mm - s.rp_from_isocentre_mm) / e.source_to_detector_mm
            bsf = backscatter_factor(e.kvp, side, e.added_cu_mm)
            fallback += e.dose_rp_mgy * bsf * F_TISSUE_AIR
            per_event.append({"has_geometry": False, "bsf": bsf, "f": F_TISSUE_AIR})
            continue
        n_geom += 1
        pose = (e.patient_orientation_modifier, e.patient_table_relationship)
        if pose not in posed:   # the phantom turned once per patient position of the study
            rotation, position = patient_rotation(*pose)
            posed[pose] = (rotation, position, body @ rotation.T, normal_body @ rotation.T)
        rotation, position, body_room, normal = posed[pose]
        positions.add(position)
        table_z = (e.table_height_mm if e.table_height_mm is not None else -b) + \
            (s.table_height_offset_mm if e.table_height_mm is not None else 0.0)
        x0 = e.table_lateral_mm or 0.0
        y0 = e.table_longitudinal_mm or 0.0
        # the rotated ellipse rests on the table top: its lowest point at table_z
        rest = math.hypot(rotation[2, 0] * a, rotation[2, 2] * b)
        points = body_room + np.array([x0, y0, table_z + rest])
        d = beam_direction(e.primary_angle_deg, e.secondary_angle_deg)
        sod = float(e.source_to_isocenter_mm)
        source = -sod * d
        d_rp, rp_note = _rp_distance(e, source, d, table_z, s)
        rp_notes.add(rp_note)
        sid = float(e.source_to_detector_mm) if e.source_to_detector_mm else sod
        ref = np.array([0.0, 0.0, 1.0]) if abs(d[1]) > 0.99 else np.array([0.0, 1.0, 0.0])
        u = np.cross(ref, d)
        u /= np.linalg.norm(u)
        v = np.cross(d, u)
        rel = points - source
        t, across_u, across_v = np.moveaxis(rel @ np.stack([d, u, v], axis=1), -1, 0)
        dist = np.sqrt(np.einsum("ijk,ijk->ij", rel, rel))
        side_at_t = (math.sqrt(e.field_area_cm2) * 10.0 if e.field_area_cm2 else 100.0) * t / sid
        inside = (t > 0) & (np.abs(across_u) <= side_at_t / 2) & (np.abs(across_v) <= side_at_t / 2)
        facing = np.einsum("ijk,ijk->ij", normal, rel) < 0
        hit = inside & facing
        if not hit.any():
            per_event.append({"has_geometry": True, "hit": False})
            continue
        through = np.zeros_like(hit)
        if source[2] < table_z:
            k = (table_z - source[2]) / np.where(rel[..., 2] > 0, rel[..., 2], np.inf)
            x_cross = source[0] + k * rel[..., 0]
            through = (k > 0) & (k <= 1) & (np.abs(x_cross - x0) <= s.table_half_width_mm)
        # the factors are evaluated on the irradiated cells only (the interpolation of the
        # backscatter table is the costly part; cells outside the field get nothing)
        rows_hit, cols_hit = np.nonzero(hit)
        trans = np.where(through[rows_hit, cols_hit], s.table_transmission, 1.0)
        bsf = _bsf(e.kvp, side_at_t[rows_hit, cols_hit] / 10.0, e.added_cu_mm)
        dist_hit = dist[rows_hit, cols_hit]
        cell = e.dose_rp_mgy * (d_rp / dist_hit) ** 2 * bsf * F_TISSUE_AIR * trans
        dose[rows_hit, cols_hit] += cell
        m = int(np.argmax(cell))
        per_event.append({"has_geometry": True, "hit": True,
                          "inverse_square": float((d_rp / dist_hit[m]) ** 2),
                          "bsf": float(bsf[m]), "f": F_TISSUE_AIR,
                          "table_transmission": float(trans[m]),
                          "d_rp_mm": d_rp, "d_skin_mm": float(dist_hit[m]),
                          "position": position})
    psd = float(dose.max()) + fallback if dose.size else fallback
    ka_r = float(sum(e.dose_rp_mgy for e in events))
    method = (f"elliptical-cylinder phantom {2 * a:.0f} x {2 * b:.0f} mm ({ph.basis}), "
              f"{s.cell_mm:g} mm cells; patient {'; '.join(sorted(positions)) or 'n/a'}; "
              f"Ka,r x inverse square from the reference point "
              f"({'; '.join(sorted(rp_notes)) or 'none'}) x BSF x f x table transmission, "
              "summed per cell, PSD = maximum (Jones & Pasciak 2011 Part I)")
    if n_geom < len(events):
        method += (f"; {len(events) - n_geom} event(s) without geometry added at the reference-"
                   "point value x BSF x f: upper bound")
    if any(e.added_cu_mm is None for e in events):
        method += "; copper filtration unknown for some events: largest tabulated BSF used"
    factors = {"backscatter": BSF_SOURCE, "f_tissue_air": F_SOURCE,
               "table_transmission": s.table_transmission_source,
               "phantom": f"{ph.basis}; trunk mass fraction {s.trunk_mass_fraction} and length "
                          f"{s.trunk_length_fraction} x height (from memory), width:thickness "
                          f"{s.lateral_to_ap_ratio} (common practice, no source)",
               "reference_point": "IEC 60601-2-43: 15 cm from the isocentre towards the source "
                                  "unless the report defines another (CID 10025; the IEC text "
                                  "from memory)",
               "patient_position": "Patient Orientation Modifier (CID 20) and Patient Table "
                                   "Relationship (CID 21) per event; absent -> supine head-first; "
                                   "positioner angles taken in the equipment frame of a "
                                   "head-first supine patient (an assumption: PS3.3 C.8.7.5 "
                                   "states them relative to the patient)",
               "table_height": "Table Height Position taken as the table-top height relative "
                               "to the isocentre (device-specific in DICOM; an assumption)",
               "field": "Collimated Field Area taken at the detector plane (Distance Source to "
                        "Detector; PS3.16 wording from memory) and scaled linearly with distance; "
                        "a square field of that area"}
    return SkinDoseResult(psd, dose, around, along, len(events), n_geom, ka_r, fallback, ph,
                          method, factors, per_event)
