-- grain: one row per projection irradiation event with a Dose (RP) of the studies x devices in
-- skin_map_wanted (the audit's studies at a peak-skin-dose threshold below
-- derived_skin_dose_map's floor), ordered as select_skin_model_events
select
    s.study_key, s.device_key, s.patient_height_m, s.patient_weight_kg,
    e.event_uid, e.dose_rp_mgy, e.kvp,
    e.positioner_primary_angle_deg, e.positioner_secondary_angle_deg,
    e.distance_source_to_isocenter_mm, e.distance_source_to_detector_mm,
    e.distance_source_to_rp_mm, e.collimated_field_area_m2,
    e.table_longitudinal_mm, e.table_lateral_mm, e.table_height_mm,
    e.reference_point_definition, e.filter_material, e.filter_thickness_mm,
    e.patient_orientation_modifier, e.patient_table_relationship
from derived_study_total as s
join skin_map_wanted as w using (study_key, device_key)
join derived_irradiation_event as e using (study_key, device_key)
where e.dose_rp_mgy is not null
order by s.study_key, s.device_key, e.started_at nulls last, e.event_uid
