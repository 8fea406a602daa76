"""Peak skin dose of each study from its event rows (pipeline/skin_dose.py's model). Pure."""

from __future__ import annotations

__all__ = ["skin_dose_rows"]


def _added_cu_mm(material: str | None, thickness_mm: float | None) -> float | None:
    """Copper filtration of an event from its (first) X-Ray Filters item: copper -> its
    thickness, aluminium only -> 0; otherwise unknown."""
    name = (material or "").strip().lower()
    if name in ("copper", "cu") and thickness_mm is not None:
        return float(thickness_mm)
    return 0.0 if name in ("aluminum", "aluminium", "al") else None


def skin_dose_rows(rows, map_threshold_mgy: float | None = None,
                   factors: list[dict] | None = None,
                   keep: tuple[str, ...] = ("study_key", "device_key")) -> tuple[list[dict], list[dict]]:
    """Per RF/XA study x device: the peak skin dose estimate (pipeline/skin_dose.py).

    `rows` are mappings, one per event, in study order (queries/refresh/select_skin_model_events.sql);
    missing values are None; each output row starts with the first event's `keep` fields. Returns (one row per study, the non-zero cells of the skin-dose map
    of each study whose PSD reaches `map_threshold_mgy`; none when it is None). When `factors`
    is a list, one row per study x factor (range over the events and source) is appended to it.
    """
    from itertools import groupby

    from ..skin_dose import UNCERTAINTY_NOTE, SkinDoseEvent, compute_skin_dose

    out, cells = [], []
    for _, group in groupby(rows, key=lambda r: (r["study_key"], r["device_key"])):
        group = list(group)
        first = group[0]
        events = [SkinDoseEvent(
            dose_rp_mgy=float(r["dose_rp_mgy"]), kvp=r["kvp"],
            primary_angle_deg=r["positioner_primary_angle_deg"],
            secondary_angle_deg=r["positioner_secondary_angle_deg"],
            source_to_isocenter_mm=r["distance_source_to_isocenter_mm"],
            source_to_detector_mm=r["distance_source_to_detector_mm"],
            source_to_rp_mm=r["distance_source_to_rp_mm"],
            field_area_cm2=(r["collimated_field_area_m2"] * 1e4
                            if r["collimated_field_area_m2"] is not None else None),
            table_longitudinal_mm=r["table_longitudinal_mm"], table_lateral_mm=r["table_lateral_mm"],
            table_height_mm=r["table_height_mm"],
            reference_point_definition=r["reference_point_definition"],
            added_cu_mm=_added_cu_mm(r.get("filter_material"), r.get("filter_thickness_mm")),
            patient_orientation_modifier=r.get("patient_orientation_modifier"),
            patient_table_relationship=r.get("patient_table_relationship")) for r in group]
        result = compute_skin_dose(events, height_m=first["patient_height_m"],
                                   weight_kg=first["patient_weight_kg"])
        out.append({**{k: first[k] for k in keep},
                    "psd_mgy": result.psd_mgy, "method": result.method,
                    "n_events": result.n_events,
                    "n_events_with_geometry": result.n_events_with_geometry,
                    "ka_r_total_mgy": result.ka_r_total_mgy, "psd_to_ka_r": result.psd_to_ka_r,
                    "is_upper_bound": result.is_upper_bound,
                    "upper_bound_part_mgy": result.upper_bound_part_mgy,
                    "phantom": result.phantom.basis,
                    "factor_sources": "; ".join(f"{k}: {v}" for k, v in result.factors.items()),
                    "uncertainty_note": UNCERTAINTY_NOTE})
        if factors is not None:
            factors += [{"study_key": first["study_key"], "device_key": first["device_key"], **f}
                        for f in result.factor_rows()]
        if map_threshold_mgy is not None and result.psd_mgy >= map_threshold_mgy:
            i, j = result.dose_map_mgy.nonzero()
            cells += [{"study_key": first["study_key"], "device_key": first["device_key"],
                       "around_mm": float(result.around_mm[a]), "along_mm": float(result.along_mm[b]),
                       "dose_mgy": float(result.dose_map_mgy[a, b])} for a, b in zip(i, j)]
    return out, cells
