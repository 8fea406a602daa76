-- grain: one row per unique irradiation event (event_uid), deduplicated across reports: the computation
-- behind the public irradiation_event (kept as the table derived_irradiation_event, refreshed per
-- ingest run for the studies it touched: pipeline/warehouse/derived.py)
-- source_kind: rdsr (dose report), dose_screen (Exposure Dose Sequence of an image object) or
-- image_header. dose_rp_mgy is Dose (RP), the reference-point air kerma of a dose report only;
-- entrance_dose_mgy is the image header's Entrance Dose (0040,8302) in mGy, else 100 x (0040,0302)
-- in dGy: a dose at the patient's entrance surface, a different quantity, never pooled with it;
-- entrance_dose_derivation is its (0040,8303): only ESAK is the entrance surface air kerma Ka,e.
-- Projection geometry (TID 10003B/C): positioner angles in degrees (PS3.3 C.8.7.5 signs),
-- distances in mm, table positions in mm from a device-specific origin (signed),
-- collimated_field_area_m2 as reported (or Height x Width), reference_point_definition per event;
-- patient_orientation / _modifier / patient_table_relationship: TID 10003 CID 19 / 20 / 21 terms
-- (recumbent, supine, prone, headfirst, feet-first, ...) as the event reports them, else null.
create or replace view calc_irradiation_event as
select
    event_uid, study_key, device_key, modality, source_kind, sop_instance_uid,
    ct_acquisition_type as event_type, null::varchar as acquisition_plane, started_at,
    acquisition_protocol, target_region, kvp, tube_current_ma, exposure_time_s,
    null::double as dap_gy_cm2, null::double as dose_rp_mgy, ctdivol_mgy, dlp_mgy_cm,
    ctdi_phantom, scanning_length_mm, pitch_factor,
    null::double as agd_mgy, null::double as compressed_breast_thickness_mm,
    null::double as irradiation_duration_s, null::varchar as laterality,
    nominal_total_collimation_mm, ssde_mgy, water_equivalent_diameter_mm,
    null::double as entrance_dose_mgy, null::varchar as entrance_dose_derivation,
    top_z_scanning_length_mm, bottom_z_scanning_length_mm,
    null::double as positioner_primary_angle_deg, null::double as positioner_secondary_angle_deg,
    null::double as distance_source_to_isocenter_mm, null::double as distance_source_to_detector_mm,
    null::double as distance_source_to_rp_mm,
    null::double as table_longitudinal_mm, null::double as table_lateral_mm,
    null::double as table_height_mm, null::double as collimated_field_area_m2,
    null::varchar as filter_material, null::double as filter_thickness_mm,
    null::varchar as reference_point_definition,
    null::varchar as patient_orientation, null::varchar as patient_orientation_modifier,
    null::varchar as patient_table_relationship
from stg_ct_event
union all by name
select
    event_uid, study_key, device_key, modality, source_kind, sop_instance_uid,
    event_type, acquisition_plane, started_at,
    acquisition_protocol, target_region, kvp, tube_current_ma, exposure_time_s,
    dap_gy_cm2, dose_rp_mgy, null::double as ctdivol_mgy, null::double as dlp_mgy_cm,
    null::varchar as ctdi_phantom, null::double as scanning_length_mm, null::double as pitch_factor,
    agd_mgy, compressed_breast_thickness_mm, irradiation_duration_s, laterality,
    null::double as nominal_total_collimation_mm, null::double as ssde_mgy,
    null::double as water_equivalent_diameter_mm,
    entrance_dose_mgy, entrance_dose_derivation,
    null::double as top_z_scanning_length_mm, null::double as bottom_z_scanning_length_mm,
    positioner_primary_angle_deg, positioner_secondary_angle_deg,
    source_to_isocenter_mm as distance_source_to_isocenter_mm,
    source_to_detector_mm as distance_source_to_detector_mm,
    distance_source_to_rp_mm,
    table_longitudinal_mm, table_lateral_mm, table_height_mm,
    collimated_field_area_cm2 / 1e4 as collimated_field_area_m2,
    filter_material, filter_thickness_mm, reference_point_definition,
    patient_orientation, patient_orientation_modifier, patient_table_relationship
from stg_projection_event
