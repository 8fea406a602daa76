-- grain: one row per irradiation event per report that carries it (TID 10003 or image header)
-- key (event_uid, sop_instance_uid): kept by the load, not by a primary key. A report's rows arrive
-- only with the report, which is loaded once (a SOP Instance UID already in raw_dose_object is a
-- duplicate), and each batch keeps the first row of each key (pipeline/warehouse/load.py, GRAIN).
-- An index on these random UIDs was read nearly whole by every batch's insert, so it stayed in
-- memory and grew with the warehouse (bench/ingest_scale.py). A warehouse created with the
-- primary key keeps it (and its memory); its loads work the same
create table if not exists raw_projection_event (
    event_uid varchar,
    sop_instance_uid varchar,
    source_kind varchar,
    event_type varchar,
    acquisition_plane varchar,
    started_at timestamp,
    acquisition_protocol varchar,
    target_region varchar,
    target_region_code varchar,
    laterality varchar,
    image_view varchar,
    dap_gy_cm2 double,
    dose_rp_mgy double,
    entrance_exposure_rp_mgy double,
    entrance_dose_mgy double,          -- image header Entrance Dose (0040,8302), mGy
    entrance_dose_derivation varchar,  -- (0040,8303) IAK | ESAK | ESDBS | ESDNOBS
    kvp double,
    tube_current_ma double,
    exposure_mas double,
    exposure_time_s double,
    pulse_rate_per_s double,
    number_of_pulses double,
    pulse_width_ms double,
    irradiation_duration_s double,
    fluoro_mode varchar,
    positioner_primary_angle_deg double,
    positioner_secondary_angle_deg double,
    source_to_detector_mm double,
    source_to_isocenter_mm double,
    collimated_field_area_cm2 double,
    table_longitudinal_mm double,
    table_lateral_mm double,
    table_height_mm double,
    distance_source_to_rp_mm double,
    reference_point_definition varchar,
    patient_orientation varchar,
    patient_orientation_modifier varchar,
    patient_table_relationship varchar,
    filter_material varchar,
    filter_thickness_mm double,
    agd_mgy double,
    compressed_breast_thickness_mm double,
    half_value_layer_mm double,
    anode_target varchar,
    exposure_index double,
    target_exposure_index double,
    deviation_index double,
    body_part varchar,
    view_position varchar,
    study_key varchar,
    device_key varchar,
    run_id varchar
);
-- columns added after the first release: a warehouse made before them gains them here
alter table raw_projection_event add column if not exists entrance_dose_mgy double;
alter table raw_projection_event add column if not exists entrance_dose_derivation varchar;
alter table raw_projection_event add column if not exists table_longitudinal_mm double;
alter table raw_projection_event add column if not exists table_lateral_mm double;
alter table raw_projection_event add column if not exists table_height_mm double;
alter table raw_projection_event add column if not exists distance_source_to_rp_mm double;
alter table raw_projection_event add column if not exists reference_point_definition varchar;
alter table raw_projection_event add column if not exists patient_orientation varchar;
alter table raw_projection_event add column if not exists patient_orientation_modifier varchar;
alter table raw_projection_event add column if not exists patient_table_relationship varchar;
